"""One place for how the plant's kernels are compiled.

``error_model="numpy"`` drops the per-division zero checks of the Python error model
(a division by zero gives inf/NaN as in numpy; the stepper never lets non-finite inputs
in). Arithmetic is strict IEEE 754 (no fastmath): with reassociation or contraction
allowed, LLVM rounded differently when a kernel was compiled fresh than when it was loaded
from numba's cache (callees inlined or not), and the stiff creep dynamics grew those
last-bit differences into a different wet-rail start. Strict arithmetic costs about a
quarter of the plant's frame time (35 -> 45 us median on the 8-motor demo trainset,
measured with ``railrig bench``) and makes a lockstep run reproducible bit for bit
whatever the compile state.
``cache=True`` stores the machine code beside the module: only the first start compiles.
"""

from __future__ import annotations

import numba as nb

FASTMATH = False

compiled = nb.njit(cache=True, error_model="numpy", fastmath=FASTMATH)
compiled_inline = nb.njit(cache=True, error_model="numpy", fastmath=FASTMATH, inline="always")
