"""A single spurious hardware trip at speed: the reference V/f drive waits out its rotor's
flux, then starts again without tripping a second time.

An induction machine whose inverter stops at speed keeps its rotor flux, which decays
with the rotor's open-circuit time constant tau_r = L_r / R_r = (L_m + L_lr) / R_r and
turns with the rotor (Novotny & Lipo, Vector Control and Dynamics of AC Drives, 1996,
ch. 5: the rotor circuit with the stator current zero). A V/f drive restarting its
voltage from zero at its own angle meets that flux as a source of its own; without a
flying restart it waits about three time constants (e^-3 = 5 % of the flux left: common
practice, no source). Measured before the wait: the restart 0.2 s after the trip at
50 km/h drew 1.5 kA and tripped the gate drivers again.
"""

from __future__ import annotations

import asyncio

import numpy as np
import pytest

from emulator.plant import layout as L  # noqa: N812
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.scenario.demo_run import run_reference_demo

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"  # V/f (scalar) control


@pytest.mark.parametrize("trip_s", [20.0, 30.0])  # the demo at 50 and 75 km/h, motoring
def test_one_trip_at_speed_is_waited_out_and_not_repeated(trip_s: float) -> None:
    machine = load_trainset(TRAINSET).machine
    tau_r = (machine.magnetising_h + machine.rotor_leakage_h) / machine.rotor_resistance_ohm
    seen = {"trips": [], "gates_on": [], "peak_a": 0.0, "speed_kmh": 0.0}

    def setup(rig, _controller) -> None:
        plant = rig.plant
        advance = plant.advance
        before = {"trip": 0.0, "gates": 1.0}

        def injecting(commands, frame_s=None) -> None:
            if not seen["speed_kmh"] and plant.time_s >= trip_s:
                seen["speed_kmh"] = plant.read("train.speed_mps") * 3.6
                plant.ist[0, L.IS_HW_TRIP] = 1.0  # the gate drivers trip once, spuriously
            advance(commands, frame_s)
            trip, gates = plant.ist[0, L.IS_HW_TRIP], plant.iu[0, L.IU_ENABLE]
            if trip > 0.5 and before["trip"] < 0.5:
                seen["trips"].append(plant.time_s)
            if gates > 0.5 and before["gates"] < 0.5 and seen["speed_kmh"]:
                seen["gates_on"].append(plant.time_s)  # (after the trip)
            before.update(trip=trip, gates=gates)
            if seen["speed_kmh"]:
                currents = plant.ist[0, [L.IS_IA, L.IS_IB, L.IS_IC]]
                seen["peak_a"] = max(seen["peak_a"], float(np.max(np.abs(currents))))

        plant.advance = injecting

    asyncio.run(run_reference_demo(TRAINSET, in_process=True, max_plant_s=trip_s + 5.0,
                                   setup=setup))
    assert seen["speed_kmh"] > 40.0, seen  # (at speed, with the flux up)
    assert len(seen["trips"]) == 1, seen  # the injected one, no second
    assert len(seen["gates_on"]) == 1, seen  # started again once, not isolated
    wait = seen["gates_on"][0] - seen["trips"][0]
    assert 3.0 * tau_r <= wait <= 3.0 * tau_r + 1.0, (wait, tau_r)  # (1 s: the reset and
    # the switch-on's own steps, our allowance)
    # the restart draws no more than a running drive (the gate drivers trip at 1600 A,
    # the firmware's own limit at 1200 A: tern-25kv.toml, inverter_guard.py)
    assert seen["peak_a"] < 1200.0, seen
