"""Fault catalogue: errors name what is wrong; each point applies and clears."""

from __future__ import annotations

import math

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
    assert math.isclose(dropped + rig.health.accepted, 1000, abs_tol=1)
    assert np.all(np.isfinite(rig.plant.ms))


def test_open_motor_phase_opens_and_reconnects(params) -> None:
    # The physics of the open phase is checked against scipy in
    # tests/plant/test_open_phase.py; here: the fault reaches the right motor and clears.
    rig, _ = rig_with_faults(params)
    rig.faults.add("open-motor-phase", "INV-A2.m2", {"phase": 2}, at_s=0.01, until_s=0.03)
    run(rig.run(frames=20))
    assert list(rig.plant.mu[:, L.MU_OPEN_PHASE]) == [0, 0, 0, 3.0, 0, 0, 0, 0]
    run(rig.run(frames=40))  # frames counts from the start of the run
    assert not rig.plant.mu[:, L.MU_OPEN_PHASE].any()
