"""One place for how the plant's kernels are compiled.

``error_model="numpy"`` drops the per-division zero checks of the Python error model
(a division by zero gives inf/NaN as in numpy; the stepper never lets non-finite inputs
in). The fastmath flags allow reassociation and contraction but keep NaN and inf
semantics (no ``nnan``/``ninf``), so a diverging state is still seen as such.
``cache=True`` stores the machine code beside the module: only the first start compiles.
"""

from __future__ import annotations

import numba as nb

FASTMATH = {"nsz", "arcp", "contract", "afn", "reassoc"}

compiled = nb.njit(cache=True, error_model="numpy", fastmath=FASTMATH)
compiled_inline = nb.njit(cache=True, error_model="numpy", fastmath=FASTMATH, inline="always")
