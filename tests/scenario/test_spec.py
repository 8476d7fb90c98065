"""Scenario files: bad input gives an error naming the file, the line and the key;
nothing in a file is evaluated. The checks language judged against numpy's own
reductions on a synthetic recording (independent arithmetic)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from emulator.recording.recorder import Recording
from emulator.scenario import ScenarioError, load_scenario
from emulator.scenario.checks import CheckSpec, evaluate
from emulator.scenario.track import curve_resistance_per_mille

ROOT = Path(__file__).parents[2]
GOOD = (ROOT / "profiles" / "scenarios" / "four-modes.toml").read_text()


def _write(tmp_path: Path, text: str) -> Path:
    (tmp_path / "trainsets").mkdir(exist_ok=True)
    for name in ("tern-25kv.toml",):
        (tmp_path / "trainsets" / name).write_text(
            (ROOT / "profiles" / "trainsets" / name).read_text())
    (tmp_path / "machines").mkdir(exist_ok=True)
    (tmp_path / "machines" / "tern-tm310.toml").write_text(
        (ROOT / "profiles" / "machines" / "tern-tm310.toml").read_text())
    (tmp_path / "scenarios").mkdir(exist_ok=True)
    path = tmp_path / "scenarios" / "s.toml"
    path.write_text(text)
    return path


def _line_of(text: str, needle: str) -> int:
    return next(i for i, line in enumerate(text.splitlines(), 1) if needle in line)


@pytest.mark.parametrize(("old", "new", "key"), [
    ("duration_s = 90.0", "duraton_s = 90.0", "duraton_s"),  # misspelt
    ('mode = "coast"', 'mode = "glide"', "mode"),  # not a mode
    ("rises_to = 59.5", "rises_to = \"fast\"", "rises_to"),  # not a number
    ('after = "cruise"', 'after = "cruising"', "after"),  # no such label
    ("permille = 2.0", "permille = 200.0", "permille"),  # out of range
])
def test_errors_name_file_line_and_key(tmp_path: Path, old: str, new: str, key: str) -> None:
    assert old in GOOD
    text = GOOD.replace(old, new, 1)
    path = _write(tmp_path, text)
    with pytest.raises(ScenarioError) as err:
        load_scenario(path)
    message = str(err.value)
    assert f"{path}:{_line_of(text, new)}:" in message
    assert key in message


def test_not_toml_names_the_line(tmp_path: Path) -> None:
    path = _write(tmp_path, GOOD + "\n[[check]\n")
    with pytest.raises(ScenarioError, match=r"not valid TOML.*line"):
        load_scenario(path)


def test_a_check_with_two_kinds_is_refused(tmp_path: Path) -> None:
    text = GOOD.replace("rises_to = 59.5", "rises_to = 59.5\nmax = 3.0", 1)
    with pytest.raises(ScenarioError, match="exactly one of"):
        load_scenario(_write(tmp_path, text))


def test_unknown_fault_is_refused(tmp_path: Path) -> None:
    text = GOOD + '\n[[fault]]\nname = "gremlins"\ntarget = "INV-A1"\n'
    with pytest.raises(ScenarioError, match="gremlins"):
        load_scenario(_write(tmp_path, text))


def _recording() -> Recording:
    t = np.arange(1, 1001) * 1e-3
    speed = np.where(t < 0.5, 0.0, 10.0 * (1 - np.exp(-(t - 0.5) / 0.05)))
    creep = np.stack([np.sin(2 * np.pi * 5 * t), 0.5 * np.cos(2 * np.pi * 5 * t)], axis=1)
    code = np.where((t > 0.3) & (t < 0.4), 70.0, 0.0)
    data = np.column_stack([t, speed, 20.0 * t, creep, code])
    cols = ["time_s", "p.train.speed_mps", "p.train.position_m",
            "p.motor.creep_velocity_mps[0]", "p.motor.creep_velocity_mps[1]",
            "u.tcu.event_code"]
    return Recording({}, cols, data, True, marks=[])


@pytest.mark.parametrize(("spec", "passed", "expected"), [
    (CheckSpec("m", "max", signal="motor.creep_velocity_mps", value=1.0), True, 1.0),
    (CheckSpec("m", "max", signal="motor.creep_velocity_mps", value=0.99), False, 1.0),
    (CheckSpec("m", "min", signal="motor.creep_velocity_mps", index=1, value=-0.5), True, -0.5),
    (CheckSpec("b", "band", signal="train.speed_kmh", band=(0.0, 36.0)), True, (0.0, 36.0)),
])
def test_max_min_band_agree_with_numpy(spec: CheckSpec, passed: bool, expected) -> None:
    # the values numpy gives for the recording, as the check prints them (three
    # significant digits): max and min one number, the band both ends (min .. max of the
    # speed in km/h: 0 while standing, 35.998 at the end, 3.6 x 10 (1 - e^-10) m/s)
    rec = _recording()
    r = evaluate(spec, rec, {})
    assert r.passed is passed
    numbers = [float(x) for x in r.measured.replace("..", " ").split()]
    if isinstance(expected, tuple):
        speed_kmh = 3.6 * rec.column("p.train.speed_mps")
        assert numbers == pytest.approx([speed_kmh.min(), speed_kmh.max()], rel=1e-3,
                                        abs=1e-3)
    else:
        assert numbers == pytest.approx([expected], abs=1e-3)


def test_settling_time_of_a_first_order_step() -> None:
    # 10 (1 - exp(-t/tau)) enters the 2 % band after tau ln(50) = 0.1956 s (textbook)
    spec = CheckSpec("s", "settles", signal="train.speed_mps", band=(9.8, 10.2),
                     within_s=0.25, after="step")
    r = evaluate(spec, _recording(), {"step": 0.5})
    assert r.passed
    assert float(r.measured.split()[0]) == pytest.approx(0.05 * np.log(50), abs=2e-3)


def test_reaches_by_time_and_position() -> None:
    rec = _recording()
    t_hit = 0.5 - 0.05 * np.log(0.5)  # 5 m/s of the step
    r = evaluate(CheckSpec("r", "rises_to", signal="train.speed_mps", value=5.0, by_s=0.54),
                 rec, {})
    assert r.passed
    assert float(r.measured.split()[1]) == pytest.approx(t_hit, abs=6e-3)  # 2 decimals
    r = evaluate(CheckSpec("r", "rises_to", signal="train.speed_mps", value=5.0, by_m=10.0),
                 rec, {})
    assert not r.passed  # at 0.535 s the train is at 10.7 m


def test_event_raised_in_its_window_only() -> None:
    rec = _recording()
    assert evaluate(CheckSpec("e", "raised", codes=(70,)), rec, {}).passed
    assert not evaluate(CheckSpec("e", "raised", codes=(70,), from_s=0.5), rec, {}).passed
    assert not evaluate(CheckSpec("e", "not_raised", codes=(70,)), rec, {}).passed


def test_roeckl_curve_resistance() -> None:
    # Röckl's formula from memory: 650 / (R - 55) N/kN for R >= 300 m (standard gauge)
    assert curve_resistance_per_mille(600.0) == pytest.approx(650.0 / 545.0)
    assert curve_resistance_per_mille(250.0) == pytest.approx(500.0 / 220.0)


def _falling() -> Recording:
    """A coasting-down speed: v = 20 exp(-t / 0.4) m/s, position its integral."""
    t = np.arange(1, 2001) * 1e-3
    v = 20.0 * np.exp(-t / 0.4)
    x = 8.0 * (1 - np.exp(-t / 0.4))  # integral of v
    # braking torque, negative first and deeper than it later rises: -300 .. +200 N m
    torque = np.where(np.sin(2 * np.pi * 3 * t) > 0, -300.0, 200.0) * np.abs(
        np.sin(2 * np.pi * 3 * t))
    code = np.zeros_like(t)
    data = np.column_stack([t, v, x, torque, code])
    cols = ["time_s", "p.train.speed_mps", "p.train.position_m", "p.motor.torque_nm[0]",
            "u.tcu.event_code"]
    return Recording({}, cols, data, True, marks=[])


def test_falls_to_by_time_and_by_position() -> None:
    rec = _falling()
    t_hit = 0.4 * np.log(20.0 / 5.0)  # 20 exp(-t/0.4) = 5 m/s at 0.5545 s
    x_hit = 8.0 * (1 - 5.0 / 20.0)  # there the train is at 6 m
    r = evaluate(CheckSpec("f", "falls_to", signal="train.speed_mps", value=5.0, by_s=0.56),
                 rec, {})
    assert r.passed
    assert float(r.measured.split()[1]) == pytest.approx(t_hit, abs=6e-3)  # 2 decimals
    assert not evaluate(CheckSpec("f", "falls_to", signal="train.speed_mps", value=5.0,
                                  by_s=0.54), rec, {}).passed
    assert evaluate(CheckSpec("f", "falls_to", signal="train.speed_mps", value=5.0,
                              by_m=x_hit + 0.05), rec, {}).passed
    assert not evaluate(CheckSpec("f", "falls_to", signal="train.speed_mps", value=5.0,
                                  by_m=x_hit - 0.05), rec, {}).passed
    r = evaluate(CheckSpec("f", "falls_to", signal="train.speed_mps", value=-1.0, by_s=2.0),
                 rec, {})
    assert not r.passed and r.measured == "not reached"


def test_abs_checks_the_magnitude() -> None:
    rec = _falling()
    signed = evaluate(CheckSpec("a", "max", signal="motor.torque_nm", value=250.0), rec, {})
    magnitude = evaluate(CheckSpec("a", "max", signal="motor.torque_nm", value=250.0,
                                   absolute=True), rec, {})
    assert signed.passed is True  # the signed peak is +200 N m
    assert float(signed.measured) == pytest.approx(200.0, rel=1e-3)
    assert magnitude.passed is False  # |x| reaches 300 N m
    assert float(magnitude.measured) == pytest.approx(300.0, rel=1e-3)
    assert evaluate(CheckSpec("a", "min", signal="motor.torque_nm", value=0.0, absolute=True),
                    rec, {}).passed  # |x| is never below zero, x is


def test_a_position_window_judges_only_the_frames_inside_it() -> None:
    rec = _falling()
    x, v = rec.column("p.train.position_m"), rec.column("p.train.speed_mps")
    inside = (x >= 2.0) & (x <= 4.0)
    r = evaluate(CheckSpec("w", "max", signal="train.speed_mps", value=100.0, from_m=2.0,
                           to_m=4.0), rec, {})
    assert float(r.measured) == pytest.approx(v[inside].max(), rel=1e-3)
    assert r.window == (rec.column("time_s")[inside][0], rec.column("time_s")[inside][-1])


def test_an_empty_window_fails_saying_so() -> None:
    rec = _falling()
    for spec in (CheckSpec("e", "max", signal="train.speed_mps", value=100.0, from_m=50.0),
                 CheckSpec("e", "min", signal="train.speed_mps", value=0.0, from_s=10.0),
                 CheckSpec("e", "not_raised", codes=(70,), from_s=5.0, to_s=6.0)):
        r = evaluate(spec, rec, {})
        assert not r.passed and "no recorded frame" in r.detail


def test_an_event_that_never_happened() -> None:
    rec = _falling()  # the controller reported nothing
    raised = evaluate(CheckSpec("e", "raised", codes=(70, 10)), rec, {})
    assert not raised.passed and raised.measured == "none"
    assert evaluate(CheckSpec("e", "not_raised", codes=(70, 10)), rec, {}).passed
    late = evaluate(CheckSpec("e", "max", signal="train.speed_mps", value=100.0,
                              after="brake"), rec, {})
    assert not late.passed and "never happened" in late.detail



@pytest.mark.parametrize(("times", "passed"), [(1, True), (2, False)])
def test_raised_times_counts_the_separate_raises(times: int, passed: bool) -> None:
    # the recording's event code is 70 from 0.3 to 0.4 s: one raise (_recording)
    r = evaluate(CheckSpec("w", "raised", codes=(70,), times=times), _recording(), {})
    assert r.passed is passed
    assert r.measured.startswith("1 raise(s) at 0.30")


def test_times_belongs_to_a_raised_check(tmp_path: Path) -> None:
    text = GOOD + '\n[[check]]\nname = "x"\nnot_raised = "trip"\ntimes = 2\n'
    with pytest.raises(ScenarioError, match="times counts the raises"):
        load_scenario(_write(tmp_path, text))
