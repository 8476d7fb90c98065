"""Transports chosen by URL: the registry owns the table of schemes (one class each).

The transports do not import the registry; it imports a transport's module only when a
URL asks for its scheme (so pyserial loads only for ``serial://``).
"""

from __future__ import annotations

import importlib
from urllib.parse import parse_qs, urlsplit

from .base import Link, LinkError

SCHEMES: dict[str, tuple[str, str]] = {
    "loop": ("emulator.link.loop", "LoopLink"),
    "serial": ("emulator.link.serial_link", "SerialLink"),
    "udp": ("emulator.link.udp", "UdpLink"),
}


def schemes() -> list[str]:
    """The URL schemes known."""
    return sorted(SCHEMES)


def transport_class(scheme: str) -> type[Link] | None:
    """The transport class of a scheme, or None if the scheme is unknown."""
    where = SCHEMES.get(scheme)
    if where is None:
        return None
    module, name = where
    return getattr(importlib.import_module(module), name)


def open_link(url: str, *, allow_remote: bool = False) -> Link:
    """A transport for a URL: ``udp://HOST:PORT?peer=HOST:PORT``,
    ``serial:///dev/ttyX?baud=N``, ``loop://NAME``. Call ``await link.open()`` next."""
    parts = urlsplit(url)
    cls = transport_class(parts.scheme)
    if cls is None:
        raise LinkError(f"{url}: unknown link scheme {parts.scheme!r}; use one of "
                        f"{', '.join(s + '://' for s in schemes())}")
    query = {k: v[-1] for k, v in parse_qs(parts.query, keep_blank_values=True).items()}
    link = cls(parts, query, allow_remote=allow_remote)
    link.url = url
    return link
