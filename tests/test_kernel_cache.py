"""The compiled kernels' cache is dropped when any compiled package's source changes
(numba checks a cached function against its own file only, not its callees')."""

from __future__ import annotations

from pathlib import Path

import pytest

from emulator.kernel_cache import COMPILED_PACKAGES, refresh_kernel_cache
from tests.conftest import FRESH_RETURNS_ENV


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


#: the kernels the rig calls from Python in a demo frame: whatever the cache holds, a
#: demo run compiles or loads these
DEMO_ENTRY_POINTS = {"emulator.plant.kernel.advance_frame",
                     "emulator.rig.command_mapping._load_vector",
                     "emulator.controller.compiled_tcu._answer_plain",
                     "emulator.rig.sampling._sample_frame",
                     "emulator.rig.record_layout._fill_row",
                     "emulator.link.telegram._pack_telegram",
                     "emulator.link.telegram._read_plain"}
#: callees of those (not inlined: kernels of their own) that only a fresh compile types
CALLEES = {"emulator.controller.period_kernel.period",
           "emulator.link.msgpack_array.pack",
           "emulator.link.msgpack_array.unpack_scaled",
           "emulator.plant.inverter.blocked_bridge",
           "emulator.plant.thermal.thermal_frame",
           "emulator.controller.slip_circuit.operating_point",
           "emulator.controller.scalar_kernel.torque_step",
           "emulator.rig.sensors._chain"}


def test_no_kernel_compiled_without_the_runtime_returns_an_array() -> None:
    # Without numba's runtime a returned array would point into memory nobody holds;
    # numba refuses a bare one but not one inside a tuple. Here: every overload this
    # process compiled or loaded for a short demo (from a warm cache, the demo's entry
    # points only); and, where the suite's compile processes compiled the kernels fresh
    # (tests/conftest.py: a fresh clone, CI), every overload they compiled, the callees
    # included.
    import asyncio
    import json
    import os

    from emulator.kernel_cache import WITHOUT_RUNTIME, returned_arrays
    from emulator.profiles.reader import PROFILES_DIR
    from emulator.scenario.demo_run import run_reference_demo

    if not WITHOUT_RUNTIME:
        pytest.skip("this numba has no _nrt option: every kernel keeps the runtime")
    asyncio.run(run_reference_demo(PROFILES_DIR / "trainsets" / "tern-25kv.toml",
                                   in_process=True, max_plant_s=0.5))
    seen, bad = returned_arrays()
    assert not DEMO_ENTRY_POINTS - seen, sorted(DEMO_ENTRY_POINTS - seen)  # (not of nothing)
    assert bad == []
    fresh = os.environ.get(FRESH_RETURNS_ENV)
    if fresh:
        found = json.loads(fresh)  # {"seen": [...], "bad": [...]} of both processes
        missing = (DEMO_ENTRY_POINTS | CALLEES) - set(found["seen"])
        assert not missing, sorted(missing)
        assert found["bad"] == []


def test_the_frames_bound_entry_points_run_what_numbas_dispatcher_runs() -> None:
    """kernel_cache.entry_point: the frame's four calls bound to their overloads (the
    plant's frame, the sampler's, the command telegram's reader, the controller's
    answer) run 3 s of the in-process demo to the same bits as the same calls through
    numba's dispatcher, which types every argument of every call (the reference)."""
    import asyncio
    import hashlib

    from emulator.controller.compiled_tcu import _answer_plain
    from emulator.link.telegram import _read_plain
    from emulator.plant.kernel import advance_frame
    from emulator.profiles.reader import PROFILES_DIR
    from emulator.rig.sampling import _sample_frame
    from emulator.scenario.demo_run import run_reference_demo

    def run(through_dispatcher: bool) -> tuple[str, list[str]]:
        seen = {}

        def setup(rig, tcu) -> None:
            seen["rig"], seen["tcu"] = rig, tcu
            if through_dispatcher:
                rig.plant._frame_step, rig.sampler._sample_frame = advance_frame, _sample_frame
                rig.codec._read_plain, tcu._answer_plain = _read_plain, _answer_plain

        asyncio.run(run_reference_demo(PROFILES_DIR / "trainsets" / "tern-25kv.toml",
                                       in_process=True, max_plant_s=3.0, setup=setup))
        rig, tcu = seen["rig"], seen["tcu"]
        calls = [type(c).__name__ for c in (rig.plant._frame_step, rig.sampler._sample_frame,
                                             rig.codec._read_plain, tcu._answer_plain)]
        digest = hashlib.sha256()
        for name in ("ms", "mx", "ist", "lst", "ts", "ss", "ls2", "iu", "lu", "ku"):
            digest.update(getattr(rig.plant, name).tobytes())
        digest.update(rig._y.tobytes())
        digest.update(tcu._g.tobytes())
        return digest.hexdigest(), calls

    bound, bound_calls = run(False)
    reference, reference_calls = run(True)
    assert bound_calls == ["builtin_function_or_method"] * 4  # the entry points ran
    assert reference_calls == ["CPUDispatcher"] * 4
    assert bound == reference
