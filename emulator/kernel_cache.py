"""Keep numba's on-disk cache of the plant kernels consistent with their sources.

Numba checks a cached function against its own file only: when a callee in another
module changes (line.py under kernel.py, say), the caller's cache would still hold the old
callee. So a digest of every plant source is kept beside the cache, and the plant's cache
files are removed when any source changed. Runs once per process, on import of emulator.
"""

from __future__ import annotations

import hashlib
import logging
from pathlib import Path

log = logging.getLogger(__name__)

PLANT_DIR = Path(__file__).resolve().parent / "plant"
STAMP = "railrig-plant-sources.sha256"


def plant_sources_digest() -> str:
    """SHA-256 over the plant's Python sources, in name order."""
    h = hashlib.sha256()
    for path in sorted(PLANT_DIR.glob("*.py")):
        h.update(path.name.encode())
        h.update(path.read_bytes())
    return h.hexdigest()


def refresh_kernel_cache() -> bool:
    """Drop stale compiled plant kernels; True if something was dropped."""
    cache = PLANT_DIR / "__pycache__"
    stamp = cache / STAMP
    try:
        digest = plant_sources_digest()
        if stamp.exists() and stamp.read_text().strip() == digest:
            return False
        stale = [*cache.glob("*.nbi"), *cache.glob("*.nbc")] if cache.exists() else []
        for path in stale:
            path.unlink(missing_ok=True)
        cache.mkdir(exist_ok=True)
        stamp.write_text(digest)
        return bool(stale)
    except OSError as exc:  # a read-only install: numba then compiles in memory
        log.debug("kernel cache not refreshed: %s", exc)
        return False
