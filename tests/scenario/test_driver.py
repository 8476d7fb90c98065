"""The driver program puts the documented sign on the wire: train.effort_demand is
negative for braking (the signal map, `railrig protocol`), as the operator's demand from
the monitor is."""

from __future__ import annotations

from emulator.link import open_link
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.protocol.signal_map import MODES
from emulator.rig.frame_loop import Rig
from emulator.scenario.driver import DriverProgram, DriverSpec, DriverStep

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"


def test_braking_demand_is_negative_and_traction_positive() -> None:
    rig = Rig(load_trainset(TRAINSET), open_link("loop://driver-sign"), mode="afap")
    rig.plant.set_speed(20.0)
    brake = DriverProgram(DriverSpec(steps=(DriverStep("brake", effort=0.6, to_kmh=10.0),)))
    for _ in range(2000):  # 2 s of frames: the jerk-limited ramp reaches the step's effort
        brake.update(rig)
    assert MODES[rig.driver.mode] == "brake"
    assert rig.driver.effort_demand == -0.6
    power = DriverProgram(DriverSpec(steps=(DriverStep("accelerate", effort=0.8),)))
    for _ in range(2000):
        power.update(rig)
    assert MODES[rig.driver.mode] == "accelerate"
    assert rig.driver.effort_demand == 0.8
