"""The demo run with the reference controller, in lockstep.

Checks from the issue: reaches the target speed, stops at the target position within a
stated tolerance (5 m), no protective trip. Lockstep is deterministic: the controller in
its own process over UDP gives the same run as in the rig's process.
"""

from __future__ import annotations

import pytest

from emulator.controller.config import config_from_profile
from emulator.scenario.demo_run import run_reference_demo
from tests.controller.conftest import TRAINSET


@pytest.mark.long
def test_demo_reaches_speed_and_stops_on_the_mark(run) -> None:
    s = run(run_reference_demo(TRAINSET, in_process=True, target_kmh=60.0, stop_at_m=1200.0))
    assert s.completed
    assert s.top_speed_kmh >= 60.0
    assert abs(s.stop_error_m) <= 5.0
    assert s.trips == ()
    assert s.catenary_returned_kwh > 0.3 * s.catenary_drawn_kwh  # it regenerated


@pytest.mark.long
def test_controller_over_udp_gives_the_same_run(run) -> None:
    # a short ride through every mode: what is compared is the link, not the ride
    kw = dict(target_kmh=20.0, stop_at_m=100.0, cruise_s=1.0, coast_s=1.0)
    local = run(run_reference_demo(TRAINSET, in_process=True, **kw))
    remote = run(run_reference_demo(TRAINSET, in_process=False, **kw))
    assert remote.completed and local.completed
    # lockstep is deterministic: every figure of the run the same, to the bit (only the
    # wall time differs)
    same = ("plant_time_s", "distance_m", "stop_error_m", "top_speed_kmh",
            "catenary_drawn_kwh", "catenary_returned_kwh", "brake_resistor_kwh", "trips",
            "events")
    assert [getattr(remote, f) for f in same] == [getattr(local, f) for f in same]
    assert remote.link["valid"] == local.link["valid"]


def test_16_7_hz_variant_with_vector_control(run) -> None:
    profile = TRAINSET.with_name("tern-15kv.toml")
    assert config_from_profile(profile).motor_control == "vector"  # what the name says
    s = run(run_reference_demo(profile, in_process=True, target_kmh=40.0, stop_at_m=400.0,
                               cruise_s=3.0, coast_s=2.0))
    assert s.completed and s.trips == ()
    assert s.top_speed_kmh >= 40.0
    assert abs(s.stop_error_m) <= 5.0
