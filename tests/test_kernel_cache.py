"""The compiled kernels' cache is dropped when any compiled package's source changes
(numba checks a cached function against its own file only, not its callees')."""

from __future__ import annotations

from pathlib import Path

from emulator.kernel_cache import COMPILED_PACKAGES, refresh_kernel_cache


def _cached_kernels(root: Path) -> list[Path]:
    """A cached kernel in each compiled package, as a run leaves them."""
    cached = []
    for package in COMPILED_PACKAGES:
        (root / package / "__pycache__").mkdir(parents=True, exist_ok=True)
        for suffix in ("nbi", "nbc"):
            path = root / package / "__pycache__" / f"parts.kernel-1.py311.{suffix}"
            path.write_bytes(b"compiled")
            cached.append(path)
    return cached


def test_a_callee_changed_in_another_package_drops_every_cached_kernel(tmp_path) -> None:
    for package in COMPILED_PACKAGES:  # a package tree like emulator's
        (tmp_path / package).mkdir()
        (tmp_path / package / "parts.py").write_text(f"# {package}\n")
    cached = _cached_kernels(tmp_path)
    assert refresh_kernel_cache(tmp_path)  # no stamp yet: what is there is not trusted
    assert not any(p.exists() for p in cached)
    cached = _cached_kernels(tmp_path)
    assert not refresh_kernel_cache(tmp_path)  # the sources as stamped: the cache stays
    assert all(p.exists() for p in cached)
    (tmp_path / "controller" / "parts.py").write_text("# controller, edited\n")
    assert refresh_kernel_cache(tmp_path)
    assert not any(p.exists() for p in cached)  # the plant's and the rig's too
