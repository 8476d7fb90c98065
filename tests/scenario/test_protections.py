"""The protections scenario fails when the protection it is about fails to act: the same
transducer fault with the gate drivers' hardware trip disabled (the fault catalogue's
"overcurrent-protection-fails"): nothing trips, since the firmware's own limit reads the
same wrong transducers."""

from __future__ import annotations

import asyncio
from dataclasses import replace

from emulator.profiles.reader import PROFILES_DIR
from emulator.scenario.runner import run_scenario
from emulator.scenario.spec import FaultSpec, load_scenario

SCENARIO = PROFILES_DIR / "scenarios" / "protections.toml"


def test_without_the_hardware_trip_the_protection_checks_fail() -> None:
    scenario = load_scenario(SCENARIO)
    broken = FaultSpec("overcurrent-protection-fails", "INV-A1", {}, "no hardware trip",
                       at_s=0.0)
    run = asyncio.run(run_scenario(replace(scenario, faults=(broken, *scenario.faults))))
    failed = {r.spec.name for r in run.results if not r.passed}
    assert failed == {
        "INV-A1's gate drivers trip within a second of it (the plant's hardware)",
        "the controller reports the hardware trip",
        "reset, retried, isolated: the hardware trip raised exactly three times",
        "INV-A1 isolated after three trips: its trip stays latched from 10 s",
        # (never isolated, INV-A1 stays in the effort available)
        "INV-A1 left out of the effort reported available"}
