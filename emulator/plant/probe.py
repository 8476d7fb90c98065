"""Probes: plant values taken at the end of every sub-step, for the measurement chain.

A board's sensors see the plant continuously: their filters act between the control
exchanges, and a board may sample at an instant of its carrier or average over a
period. The rig's measurement chain therefore needs the measured values at every
sub-step, not only at the frame's end. A probe list (made once, by the rig) names each
value by its state array, row and column; the kernel writes one row of values per
sub-step into a trace the chain reads after the frame.
"""

from __future__ import annotations

import numpy as np

from .jit import compiled_inline

# the state arrays a probe reads
SRC_SUPPLY, SRC_LINE_CONVERTER, SRC_LINK, SRC_INVERTER, SRC_MOTOR = range(5)


@compiled_inline
def probe_values(src, row, col, ss, ls2, lst, ist, ms, out):
    """out[i] = the value probe i names, for every probe."""
    for i in range(src.shape[0]):
        s = src[i]
        if s == SRC_SUPPLY:
            out[i] = ss[col[i]]
        elif s == SRC_LINE_CONVERTER:
            out[i] = ls2[row[i], col[i]]
        elif s == SRC_LINK:
            out[i] = lst[row[i], col[i]]
        elif s == SRC_INVERTER:
            out[i] = ist[row[i], col[i]]
        else:
            out[i] = ms[row[i], col[i]]


class Probes:
    """The probe list of a plant and the trace of its last frame (one row a sub-step)."""

    def __init__(self) -> None:
        self.src = np.zeros(0, dtype=np.int64)
        self.row = np.zeros(0, dtype=np.int64)
        self.col = np.zeros(0, dtype=np.int64)
        self.trace = np.zeros((1, 0))
        # set by the plant when its kernel has filled the trace (Plant.advance):
        self.frame = -1  # the plant's frame count after the frame the trace holds
        self.n_sub, self.h = 0, 0.0  # that frame's sub-steps

    def set(self, src: np.ndarray, row: np.ndarray, col: np.ndarray) -> None:
        """Probe these values from the next frame on."""
        arrays = [np.ascontiguousarray(a, dtype=np.int64) for a in (src, row, col)]
        if any(a.ndim != 1 or len(a) != len(arrays[0]) for a in arrays):
            # (the plant's frame call is bound to 1-D lists: kernel_cache.entry_point)
            raise ValueError("a probe list is three 1-D arrays of one length")
        self.src, self.row, self.col = arrays
        self.trace = np.zeros((self.trace.shape[0], len(self.src)))
        self.frame = -1

    def check_places(self, ss: np.ndarray, ls2: np.ndarray, lst: np.ndarray,
                     ist: np.ndarray, ms: np.ndarray) -> None:
        """Raise ValueError unless every probe names a value of these state arrays (the
        compiled frame reads them unchecked: a place outside them is read out of bounds).
        The plant asks this at the first frame after a new list."""
        arrays = {SRC_SUPPLY: ss, SRC_LINE_CONVERTER: ls2, SRC_LINK: lst, SRC_INVERTER: ist,
                  SRC_MOTOR: ms}
        for i, (src, row, col) in enumerate(zip(self.src.tolist(), self.row.tolist(),
                                                self.col.tolist(), strict=True)):
            array = arrays.get(src)
            if array is None:
                raise ValueError(f"probe {i}: no state array {src} (0..{len(arrays) - 1})")
            rows, cols = (1, array.shape[0]) if array.ndim == 1 else array.shape
            if not (0 <= row < rows and 0 <= col < cols):
                raise ValueError(f"probe {i}: row {row}, column {col} outside the "
                                 f"{rows} x {cols} of state array {src}")

    def rows_for(self, n_sub: int) -> np.ndarray:
        """The trace, with room for n_sub sub-steps."""
        if self.trace.shape[0] < n_sub:
            self.trace = np.zeros((n_sub, len(self.src)))
        return self.trace
