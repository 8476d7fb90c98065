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


def test_an_edit_of_the_compile_options_drops_every_cached_kernel(tmp_path) -> None:
    # kernel_cache.py holds the option the kernels are compiled with (WITHOUT_RUNTIME)
    for package in COMPILED_PACKAGES:
        (tmp_path / package).mkdir()
        (tmp_path / package / "parts.py").write_text(f"# {package}\n")
    (tmp_path / "kernel_cache.py").write_text("# options\n")
    refresh_kernel_cache(tmp_path)
    cached = _cached_kernels(tmp_path)
    assert not refresh_kernel_cache(tmp_path)
    (tmp_path / "kernel_cache.py").write_text("# options, edited\n")
    assert refresh_kernel_cache(tmp_path)
    assert not any(p.exists() for p in cached)


def _holds_an_array(t) -> bool:
    from numba.core import types

    if isinstance(t, types.Array):
        return True
    return isinstance(t, types.BaseTuple) and any(_holds_an_array(e) for e in t.types)


def test_no_kernel_compiled_without_the_runtime_returns_an_array() -> None:
    # Without numba's runtime a returned array would point into memory nobody holds;
    # numba refuses a bare one but not one inside a tuple. Every kernel the demo runs
    # (plant, sampler, sensors, codec, recorder row, controller) is compiled or loaded
    # here, then every overload's return type is read.
    import asyncio
    import importlib
    import pkgutil

    import numba

    from emulator.kernel_cache import WITHOUT_RUNTIME
    from emulator.profiles.reader import PROFILES_DIR
    from emulator.scenario.demo_run import run_reference_demo

    if not WITHOUT_RUNTIME:
        return  # this numba has no such option: every kernel keeps the runtime
    asyncio.run(run_reference_demo(PROFILES_DIR / "trainsets" / "tern-25kv.toml",
                                   in_process=True, max_plant_s=0.5))
    seen, bad = set(), []
    for package in COMPILED_PACKAGES:
        root = importlib.import_module(f"emulator.{package}")
        for info in pkgutil.iter_modules(root.__path__):
            module = importlib.import_module(f"emulator.{package}.{info.name}")
            for obj in vars(module).values():
                if not isinstance(obj, numba.core.registry.CPUDispatcher) or (
                        obj.targetoptions.get("_nrt", True)):
                    continue
                for sig in obj.nopython_signatures:
                    seen.add(f"{obj.__module__}.{obj.__name__}")
                    if _holds_an_array(sig.return_type):
                        bad.append(f"{obj.__module__}.{obj.__name__}: {sig}")
    # the check is not of nothing: every kernel the rig calls from Python in a demo frame
    # was run (a kernel loaded from the cache brings no overloads of the kernels it
    # calls, so only these are sure to be there; a fresh compile adds its callees)
    entry_points = {"emulator.plant.kernel.advance_frame",
                    "emulator.plant.inputs.load_commands",
                    "emulator.plant.inputs.load_line_commands",
                    "emulator.controller.period_kernel.period",
                    "emulator.rig.sampling._sample_frame",
                    "emulator.rig.sampling._fill_commands",
                    "emulator.rig.record_layout._fill_row",
                    "emulator.link.msgpack_array.pack",
                    "emulator.link.msgpack_array.unpack_scaled",
                    "emulator.link.telegram._read_plain"}
    assert entry_points <= seen, sorted(entry_points - seen)
    assert bad == []
