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

Without numba's runtime (NRT): numba counts references to every array a compiled
function holds, with atomic increments and decrements, and its pruning pass leaves many
in the sub-step loops (an inlined helper's array arguments, decremented on each of its
branches): perf put 17 % of the 128-motor frame in ``NRT_incref``/``NRT_decref``. The
plant's kernels allocate no arrays and return none; every array they touch belongs to
the Python caller for the whole call (the plant's state, its views are not kept), so
they need no counting. Compiled with numba's ``_nrt=False`` (a CPU target option of
numba's own, underscored: not in its user documentation, hence the check in
kernel_cache.py, which falls back to the counted build where a numba lacks it): the
demo trainset's frame 17.6 -> 13.6 us, 128 motors 163 -> 127 us (one run each, same
host), every result the same to the bit (the counting never touched the arithmetic).
Without the runtime numba refuses to compile an allocation or a returned array, but not
an array returned inside a tuple: kernel_cache.py states the rules, and a test checks
every such kernel's return types.
"""

from __future__ import annotations

import numba as nb

from emulator.kernel_cache import WITHOUT_RUNTIME

FASTMATH = False


compiled = nb.njit(cache=True, error_model="numpy", fastmath=FASTMATH, **WITHOUT_RUNTIME)
compiled_inline = nb.njit(cache=True, error_model="numpy", fastmath=FASTMATH, inline="always",
                          **WITHOUT_RUNTIME)
