"""Keep numba's on-disk cache of the compiled kernels consistent with their sources.

Numba checks a cached function against its own file only: when a callee in another
module changes (line.py under kernel.py, period_parts.py under period_kernel.py, the
plant's probe.py under the rig's sampling.py), the caller's cache would still hold the
old callee. So a digest of every source of the packages that hold compiled code is kept
beside the cache, and their cache files are removed when any of those sources changed.
Runs once per process, on import of emulator.

Also the compile option the kernels that allocate nothing share: ``WITHOUT_RUNTIME``
(plant/jit.py says why and what it measured), and ``entry_point``, how the frame's
calls skip numba's dispatcher. This file is in the digest too, so a change of it drops
the kernels cached beside the sources (a cache elsewhere, under ``NUMBA_CACHE_DIR``, is
numba's own to check, as before).
"""

from __future__ import annotations

import hashlib
import logging
from pathlib import Path

log = logging.getLogger(__name__)

PACKAGE_DIR = Path(__file__).resolve().parent
#: the packages with numba-compiled functions (they call into each other)
COMPILED_PACKAGES = ("plant", "controller", "rig", "link")
STAMP = "railrig-compiled-sources.sha256"


def _without_runtime() -> dict[str, bool]:
    """numba's CPU target option that compiles a function without numba's runtime (NRT):
    no reference counts on the arrays it holds, and no allocation at all
    (``_nrt=False``, underscored: numba's own, not in its user documentation), where
    this numba has it; else nothing (the runtime's build: slower, the same results)."""
    from numba.core import cpu

    return {"_nrt": False} if hasattr(cpu.CPUTargetOptions, "_nrt") else {}


def __getattr__(name: str):
    """``WITHOUT_RUNTIME``, for ``numba.njit(**WITHOUT_RUNTIME)``, made when a kernel
    module first asks (importing emulator does not load numba). Rules for the kernels
    compiled with it: allocate no array (numba refuses to compile that), return no
    array in any form (numba refuses a bare one, not one inside a tuple: the caller
    would get a view of freed or wrong memory; ``returned_arrays`` finds them among the
    kernels a process has compiled or loaded, and tests/test_kernel_cache.py runs it),
    touch only arrays their Python caller holds for the whole call."""
    if name == "WITHOUT_RUNTIME":
        globals()[name] = options = _without_runtime()
        return options
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def entry_point(kernel, *args):
    """The overload of a compiled kernel for the types of ``args`` (loaded from numba's
    cache, or compiled now) as its entry point: the compiled function's own Python
    wrapper, called without the dispatcher's typing of every argument first. That
    typing costs about 13 ns an argument (measured: 0.57 us of a 44-argument call that
    takes 0.84 us in all), and the frame's calls take thirty to forty-four.

    Only for a call site whose arrays are its owner's buffers, each of one dtype, number
    of dimensions and layout for good (the plant's state, the sampler's and the
    controller's arrays), and whose scalars keep their Python types: the wrapper
    converts what it is given to the types of the overload without asking, and an
    array of other dimensions is not refused (tried: the process crashed). Arguments
    from outside (a telegram's payload) are made of the bound type before the call, and
    the callers make their scalars Python floats, ints and bools: an int at the first
    call would bind an integer, and every later float would be truncated. A numpy scalar
    binds as the Python scalar it converts to (a float32 frame length at the first call
    would otherwise narrow every later float). Without numba's compiler
    (NUMBA_DISABLE_JIT) the kernel itself."""
    import numpy as np

    if not hasattr(kernel, "overloads"):
        return kernel
    signature = tuple(kernel.typeof_pyval(a.item() if isinstance(a, np.generic) else a)
                      for a in args)
    kernel.compile(signature)
    return kernel.overloads[signature].entry_point


def compiled_sources_digest(root: Path = PACKAGE_DIR) -> str:
    """SHA-256 over the compiled packages' Python sources, in package and name order."""
    h = hashlib.sha256()
    own = root / "kernel_cache.py"  # (the compile option below)
    if own.exists():
        h.update(own.read_bytes())
    for package in COMPILED_PACKAGES:
        for path in sorted((root / package).glob("*.py")):
            h.update(f"{package}/{path.name}".encode())
            h.update(path.read_bytes())
    return h.hexdigest()


def refresh_kernel_cache(root: Path = PACKAGE_DIR) -> bool:
    """Drop stale compiled kernels; True if something was dropped."""
    stamp = root / "__pycache__" / STAMP
    try:
        digest = compiled_sources_digest(root)
        if stamp.exists() and stamp.read_text().strip() == digest:
            return False
        stale = []
        for package in COMPILED_PACKAGES:
            cache = root / package / "__pycache__"
            if cache.exists():
                stale += [*cache.glob("*.nbi"), *cache.glob("*.nbc")]
        for path in stale:
            path.unlink(missing_ok=True)
        stamp.parent.mkdir(exist_ok=True)
        stamp.write_text(digest)
        return bool(stale)
    except OSError as exc:  # a read-only install: numba then compiles in memory
        log.debug("kernel cache not refreshed: %s", exc)
        return False


def returned_arrays() -> tuple[set[str], list[str]]:
    """(the kernels compiled without the runtime that this process has compiled or
    loaded, the overloads among them that return an array, bare or inside a tuple), by
    "module.name". A kernel loaded from numba's cache brings no overloads of the kernels
    it calls, so only a process that compiled fresh sees those."""
    import importlib
    import pkgutil

    import numba
    from numba.core import types

    def holds_an_array(t) -> bool:
        if isinstance(t, types.Array):
            return True
        return isinstance(t, types.BaseTuple) and any(holds_an_array(e) for e in t.types)

    seen: set[str] = set()
    bad: list[str] = []
    for package in COMPILED_PACKAGES:
        root = importlib.import_module(f"emulator.{package}")
        for info in pkgutil.iter_modules(root.__path__):
            module = importlib.import_module(f"emulator.{package}.{info.name}")
            for obj in vars(module).values():
                if not isinstance(obj, numba.core.registry.CPUDispatcher) or (
                        obj.targetoptions.get("_nrt", True)):
                    continue
                name = f"{obj.__module__}.{obj.__name__}"
                for sig in obj.nopython_signatures:
                    seen.add(name)
                    if holds_an_array(sig.return_type):
                        bad.append(f"{name}: {sig}")
    return seen, sorted(set(bad))
