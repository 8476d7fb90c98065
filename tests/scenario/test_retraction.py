"""Traction asked again soon after the drives let go of their machines at speed (the
flux hold after the last demand ran out while coasting): a control started from zero
volts on a machine still magnetised meets its back-EMF, a current surge. Before the
drives waited for the rotor flux to die away, traction asked 0.2 s after the release
drew 1.6 kA (a hardware trip) and 0.5 s after 1.33 kA (the 1.2 kA software trip)."""

from __future__ import annotations

import asyncio
from pathlib import Path

import numpy as np
import pytest

from emulator.controller.config import config_from_profile
from emulator.controller.tcu import FLUX_HOLD_S
from emulator.protocol import events
from emulator.scenario import load_scenario, run_scenario
from tests.controller.twin import Twin

TRAINSET = Path(__file__).parents[2] / "profiles" / "trainsets" / "tern-25kv.toml"
FIRST_S, DEMAND_S = 3.0, 2.0  # switch-on coasting, then the first traction


def _scenario(gap_s: float) -> str:
    return f"""
[scenario]
name = "traction again {gap_s} s after the drives let go"
description = "traction, a coast past the flux hold, traction again"
trainset = "{TRAINSET}"
duration_s = {FIRST_S + DEMAND_S + FLUX_HOLD_S + gap_s + 4.0}
initial_speed_kmh = 80.0
[driver]
[[driver.step]]
mode = "coast"
name = "switch-on"
for_s = {FIRST_S}
[[driver.step]]
mode = "accelerate"
name = "first"
effort = 0.5
for_s = {DEMAND_S}
[[driver.step]]
mode = "coast"
name = "coast"
for_s = {FLUX_HOLD_S + gap_s}
[[driver.step]]
mode = "accelerate"
name = "again"
effort = 0.5
for_s = 4.0
[[check]]
name = "no protective trip"
not_raised = "trip"
"""


@pytest.mark.parametrize("gap_s", [0.2, 0.5])
def test_traction_asked_again_waits_for_the_rotor_flux(tmp_path, gap_s) -> None:
    path = tmp_path / "again.toml"
    path.write_text(_scenario(gap_s), encoding="utf-8")
    twin = Twin() if gap_s == 0.2 else None  # the plain-Python description, bit for bit
    seen = {}
    run = asyncio.run(run_scenario(load_scenario(path), tune=lambda tcu: (
        seen.update(tcu=tcu), twin and twin.install(tcu))))
    if twin is not None:
        twin.assert_identical(at_least=len(run.recording.data) - 1)
    assert run.passed and not set(seen["tcu"].events) & events.TRIPS
    rec = run.recording
    t = rec.column("time_s")
    phases = [rec.columns.index(c) for c in rec.columns if c.startswith("p.inverter.phase")]
    # a quarter's margin below the 1.2 kA software trip (our choice, common practice)
    assert np.abs(rec.data[:, phases]).max() < 0.75 * 1200.0
    # the drives let go FLUX_HOLD_S after the demand ended, and start again once three
    # rotor time constants (tau_r = L_r / R_r, the rotor circuit with the stator open:
    # e^-3, 5 % of the flux left) have passed since, not before, and then drive
    cfg = config_from_profile(TRAINSET)
    tau_r = (cfg.magnetising_h + cfg.rotor_leakage_h) / cfg.rotor_resistance_ohm
    gates = [rec.columns.index(c) for c in rec.columns
             if c.startswith("u.INV-") and c.endswith("gates_enabled")]
    on = rec.data[:, gates].all(axis=1)
    released = FIRST_S + DEMAND_S + FLUX_HOLD_S
    off = np.flatnonzero(~on & (t > FIRST_S + DEMAND_S))[0]
    assert t[off] == pytest.approx(released, abs=0.01)
    again = np.flatnonzero(on & (t > t[off]))[0]
    assert t[again] == pytest.approx(t[off] + 3.0 * tau_r, abs=0.01)
    torques = [rec.columns.index(c) for c in rec.columns if c.startswith("p.motor.torque_nm")]
    assert rec.data[np.ix_(t > t[again] + 1.0, torques)].mean() > 0.1 * cfg.rated_torque_nm
