"""Keep numba's on-disk cache of the compiled kernels consistent with their sources.

Numba checks a cached function against its own file only: when a callee in another
module changes (line.py under kernel.py, period_parts.py under period_kernel.py, the
plant's probe.py under the rig's sampling.py), the caller's cache would still hold the
old callee. So a digest of every source of the packages that hold compiled code is kept
beside the cache, and their cache files are removed when any of those sources changed.
Runs once per process, on import of emulator.

Also the one compile option every kernel that allocates nothing shares:
``WITHOUT_RUNTIME`` (plant/jit.py says why and what it measured). This file is in the
digest too, so a change of it recompiles them.
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
    """numba's CPU target option that compiles without its runtime's reference counting
    (``_nrt=False``, underscored: numba's own, not in its user documentation), where
    this numba has it; else nothing (the counted build, slower, the same results)."""
    from numba.core import cpu

    return {"_nrt": False} if hasattr(cpu.CPUTargetOptions, "_nrt") else {}


#: for ``numba.njit(**WITHOUT_RUNTIME)``: kernels that allocate no array, return none,
#: and touch only arrays their Python caller holds for the whole call (numba refuses to
#: compile an allocation without its runtime)
WITHOUT_RUNTIME = _without_runtime()


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
