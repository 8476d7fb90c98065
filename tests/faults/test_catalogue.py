"""Fault catalogue: errors name what is wrong; each point applies and clears."""

from __future__ import annotations

import msgpack
import numpy as np
import pytest

from emulator.faults import CATALOGUE, FaultError, FaultSet
from emulator.plant import layout as L  # noqa: N812
from emulator.protocol.header import HEADER
from tests.link.conftest import command, make_rig, run


def echo(rig, m):
    over = {"line.breaker_close": 1.0}
    for u in rig.plant.params.line_converters:
        over[f"{u.name}.line_contactor_close"] = 1.0
    return command(rig, m[1], duty=0.5, gates=1, **over)


def rig_with_faults(params, **kw):
    async def go():
        rig, ctl = await make_rig(params, echo, **kw)
        rig.faults = FaultSet(rig, seed=1)
        return rig, ctl
    return run(go())


def measured(rig, ctl, name: str, k: int = -1) -> float:
    i = rig.signal_map.index("measurement", name)
    wire = msgpack.unpackb(ctl.received[k])[len(HEADER) + i]
    return wire * rig.signal_map.measurements[i].scale


@pytest.mark.parametrize(("args", "words"), [
    (("no-such-fault", "DC-A.voltage_v"), "no fault named"),
    (("sensor-gain", "DC-A.voltage_v", {"gain": 50.0}), "gain must be 1 within 0..10"),
    (("sensor-gain", "DC-A.voltage_v", {"gian": 2.0}), "no parameter 'gian'"),
    (("sensor-gain", "DC-Z.voltage_v"), "no analog channel named 'DC-Z.voltage_v'"),
    (("low-adhesion", "INV-A1.m9"), "no axle named"),
])
def test_bad_faults_are_refused_with_a_clear_message(params, args, words) -> None:
    rig, _ = rig_with_faults(params)
    with pytest.raises(FaultError, match=words.replace("(", r"\(")):
        rig.faults.add(*args)


@pytest.mark.parametrize("when", ["train.speed > 3", "train.speed_mps >> 3",
                                  "__import__('os') > 1", "train.speed_mps > fast"])
def test_conditions_are_parsed_never_evaluated(params, when: str) -> None:
    rig, _ = rig_with_faults(params)
    with pytest.raises(FaultError):
        rig.faults.add("low-adhesion", "INV-A1.m1", when=when)


def test_every_catalogue_entry_names_its_point() -> None:
    assert {k.point for k in CATALOGUE.values()} == {"measurement", "command", "plant", "line",
                                                     "link"}


def test_stuck_sensor_applies_and_clears_by_time(params) -> None:
    rig, ctl = rig_with_faults(params, ideal_dc_links=True)
    rig.faults.add("sensor-stuck", "DC-A.voltage_v", {"value": 0.0}, at_s=0.05, until_s=0.1)
    run(rig.run(frames=80))
    assert measured(rig, ctl, "DC-A.voltage_v") == 0.0
    assert rig.faults.listing()[0]["state"] == "active"
    run(rig.run(frames=150))
    assert measured(rig, ctl, "DC-A.voltage_v") == pytest.approx(1800, abs=20)
    assert rig.faults.listing()[0]["state"] == "cleared"
    # to the frame (points.py: a fault starts or ends at the start of the first frame
    # whose plant time has reached its time, and acts from that frame on): frame 50
    # starts at 50 ms, so y_51, sampled after it, is the first stuck measurement; frame
    # 100 starts at 100 ms and ends it, so y_100 is the last: 50 of them
    i = rig.signal_map.index("measurement", "DC-A.voltage_v")
    stuck = [msgpack.unpackb(p)[1] for p in ctl.received
             if msgpack.unpackb(p)[len(HEADER) + i] == 0.0]
    assert stuck == list(range(51, 101))


def test_encoder_pulse_loss_drifts_the_count(params) -> None:
    rig, ctl = rig_with_faults(params, ideal_dc_links=True)
    rig.faults.add("encoder-pulse-loss", "INV-A1.m1", {"counts_per_s": 1000.0})
    run(rig.run(frames=200))
    lost = measured(rig, ctl, "INV-A1.m2.encoder_count") - measured(rig, ctl,
                                                                    "INV-A1.m1.encoder_count")
    assert lost % 65536 == pytest.approx(199, abs=2)  # 1000 counts/s for 0.2 s, at rest


def test_gate_driver_fault_blocks_the_inverter_and_raises_its_flag(params) -> None:
    rig, ctl = rig_with_faults(params, ideal_dc_links=True)
    rig.faults.add("gate-driver-fault", "INV-A2")
    run(rig.run(frames=20))
    enabled = rig.plant.iu[:, L.IU_ENABLE]
    assert enabled[1] == 0.0 and enabled[0] == 1.0
    assert measured(rig, ctl, "INV-A2.gate_fault") == 7


def test_low_adhesion_by_condition(params) -> None:
    rig, _ = rig_with_faults(params, ideal_dc_links=True)
    rig.plant.set_speed(4.0)
    rig.faults.add("low-adhesion", "INV-B1.m2", {"factor": 0.2}, when="train.speed_mps < 3.9")
    run(rig.run(frames=5))
    assert rig.plant.mpar[5, L.MP_ADHESION_FACTOR] == 1.0
    rig.plant.set_speed(3.0)
    run(rig.run(frames=10))
    assert rig.plant.mpar[5, L.MP_ADHESION_FACTOR] == pytest.approx(0.2)


def test_contactor_that_wont_close(params) -> None:
    rig, _ = rig_with_faults(params)
    rig.faults.add("contactor-wont-close", "LC-B1")
    run(rig.run(frames=200))
    closed = rig.plant.read("line_converter.line_contactor_closed")
    assert list(closed) == [1.0, 1.0, 0.0, 1.0]


def test_capacitance_loss_is_restored_on_clear(params) -> None:
    rig, _ = rig_with_faults(params)
    c0 = rig.plant.kp[0, L.KP_C]
    rig.faults.add("link-capacitance-loss", "DC-A", {"remaining": 0.5}, at_s=0.01, until_s=0.02)
    run(rig.run(frames=15))
    assert rig.plant.kp[0, L.KP_C] == pytest.approx(0.5 * c0)
    run(rig.run(frames=30))
    assert rig.plant.kp[0, L.KP_C] == c0


def test_telegram_loss_at_the_link(params) -> None:
    rig, _ = rig_with_faults(params, ideal_dc_links=True, watchdog_frames=50)
    rig.faults.add("telegram-loss", "link", {"probability": 0.5})
    run(rig.run(frames=1000))
    dropped = rig.health.rejected["fault_dropped"]
    assert 400 < dropped < 600  # binomial, n = 1000, p = 0.5
    assert dropped + rig.health.accepted == 1000  # each of the 1000 answers one or other
    assert np.all(np.isfinite(rig.plant.ms))


def test_open_motor_phase_opens_and_reconnects(params) -> None:
    # The physics of the open phase is checked against scipy in
    # tests/plant/test_open_phase.py; here: the fault reaches the right motor and clears.
    # It acts in frames 10..29 exactly: a fault starts at the start of the first frame
    # whose plant time has reached at_s (frame 10 starts at 10 ms) and ends at the start
    # of the one that reaches until_s (frame 30)
    rig, _ = rig_with_faults(params)
    rig.faults.add("open-motor-phase", "INV-A2.m2", {"phase": 2}, at_s=0.01, until_s=0.03)
    opened = []
    for k in range(40):
        run(rig.run(frames=k + 1))  # frame k (frames counts from the start of the run)
        if rig.plant.mu[:, L.MU_OPEN_PHASE].any():
            assert list(rig.plant.mu[:, L.MU_OPEN_PHASE]) == [0, 0, 0, 3.0, 0, 0, 0, 0]
            opened.append(k)
    assert opened == list(range(10, 30))


#: what a fault leaves changed after it ends, by design (the rest must be as before)
LEFT_AFTER = {
    "encoder-pulse-loss": {"count_offset"},  # the counts lost stay lost
    "encoder-channel-loss": {"count_offset"},  # the counter resumes where it froze
    "encoder-wrong-ppr": {"count_offset"},  # the count miscounted stays miscounted
}

#: parameters that make a fault visible within its 10 ms (the defaults of these are
#: neutral or act too slowly to see: a gain of 1, an offset of 0, 100 counts/s, sand
#: after 1 s); each list is tried in turn. The gain's range edge 0 is one of them
PARAMS = {"sensor-gain": [{"gain": 2.0}, {"gain": 0.0}], "sensor-offset": [{"offset": 10.0}],
          "sensor-dropout": [{"probability": 1.0}], "encoder-pulse-loss": [
              {"counts_per_s": 1000.0}], "sanding": [{"delay_s": 0.0}]}


def _settings(rig) -> dict[str, np.ndarray]:
    """What the fault hooks may change: the analog chain's settings, the encoders', the
    sampler's gate-fault flags, the plant's parameters and inputs (less the columns the
    plant itself moves each frame: the contact constants that follow the axle loads, the
    supply's phase reference, which a change of frequency moves to keep the phase
    continuous), the link fault's drop rate, and what the command faults do to a command
    vector of halves."""
    from emulator.rig.sensors import (
        C_FAULT_GAIN,
        C_FAULT_OFFSET,
        C_GAIN,
        C_HI,
        C_LO,
        C_NOISE,
        C_OFFSET,
        C_STUCK,
    )

    plant, enc = rig.plant, rig.sampler.encoders
    table = rig.sampler.analog.table
    mpar = np.delete(plant.mpar, [L.MP_POL_KAPPA, L.MP_POL_SCALE], axis=1)
    sp = np.delete(plant.sp, [L.SP_PHASE_REF, L.SP_T_REF])
    commands = np.full(len(rig.signal_map.commands), 0.5)  # (a command fault sets 0 or 1)
    rig.faults.transform_command(commands, rig._command_index)
    return {"analog": table[[C_GAIN, C_FAULT_GAIN, C_OFFSET, C_FAULT_OFFSET, C_NOISE, C_LO,
                             C_HI, C_STUCK]].copy(),
            "count_offset": enc.count_offset.copy(), "edge_scale": enc.edge_scale.copy(),
            "eccentricity": enc.eccentricity.copy(),
            "gate_fault": np.array(rig.sampler.gate_fault, dtype=float),
            "mpar": mpar, "kp": plant.kp.copy(), "ipar": plant.ipar.copy(), "sp": sp,
            "mu": plant.mu.copy(), "drop": np.array([rig.faults.drop_probability]),
            "commands": commands}


def _changed(a: dict, b: dict) -> set[str]:
    return {k for k in a if not np.array_equal(a[k], b[k], equal_nan=True)}


@pytest.mark.parametrize("name", sorted(CATALOGUE))
def test_every_fault_acts_and_is_undone_exactly_when_it_ends(params, name: str) -> None:
    # points.py: "Every change is undone exactly when the fault ends". Each entry of the
    # catalogue (at its default parameters, or PARAMS'), on the first target of its kind,
    # from 10 to 20 ms: while it acts something it may change has changed (the rotor
    # temperature: the plant's state; a phase jump: the supply's phase); 25 frames after
    # its end everything is as before, but for what LEFT_AFTER names
    kind = CATALOGUE[name]
    rig, _ = rig_with_faults(params)
    target = ("DC-A.voltage_v" if kind.target == "analog channel"
              else rig.faults.targets()[kind.target][0])
    for given in PARAMS.get(name, [None]):
        rig, _ = rig_with_faults(params)
        run(rig.run(frames=5))
        before = _settings(rig)
        phase_before = float(rig.plant.sp[L.SP_PHASE_REF])
        fault = rig.faults.add(name, target, given, at_s=0.010, until_s=0.020)
        run(rig.run(frames=15))
        assert fault.active, name
        during = _settings(rig)
        if name == "rotor-temperature":
            motor = rig.faults.targets()["motor"].index(target)
            assert rig.plant.ms[motor, L.MS_T_ROTOR] == pytest.approx(
                fault.params["temperature_degc"] + 273.15)
        elif name == "phase-jump":  # an event: the phase moved, and stays moved
            assert rig.plant.sp[L.SP_PHASE_REF] != phase_before
        else:
            assert _changed(before, during), f"{name} changed nothing while it acted"
        run(rig.run(frames=25))
        assert fault.done and not fault.active, name
        left = _changed(before, _settings(rig))
        assert left <= LEFT_AFTER.get(name, set()), (name, given, left)
