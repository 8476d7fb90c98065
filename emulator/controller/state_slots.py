"""Named views of a compiled control's state array, for the classes that configure it."""

from __future__ import annotations


def slot(index: int, doc: str, *, writable: bool = False) -> property:
    """A property reading (and, if writable, writing) one slot of ``self.state``."""

    def get(self) -> float:
        return float(self.state[index])

    def put(self, value: float) -> None:
        self.state[index] = value

    return property(get, put if writable else None, doc=doc)
