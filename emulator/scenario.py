"""Driver programs: what the train asks of the controller, frame by frame.

The train's side of the train interface: mode, effort demand, cruise speed, notices; and
its friction brake, which the rig applies to the plant. The demo run lives here; the
scenario files of the scenario issue will drive the same hooks.
"""

from __future__ import annotations

from dataclasses import dataclass

from emulator.signals import MODES

MODE = {name: code for code, name in MODES.items()}


@dataclass
class DemoRun:
    """Start, accelerate to a speed, cruise, coast, brake to a stop at a position.

    Braking aims at the stop position with the deceleration the controller says it can
    give (``tcu.available_effort_kn``); below ``blend_mps`` the friction brake finishes
    the stop (electric braking fades at standstill; common practice of brake blending).
    """

    target_kmh: float = 100.0
    cruise_s: float = 20.0
    coast_s: float = 10.0
    stop_at_m: float = 4000.0
    switch_on_s: float = 2.0
    blend_mps: float = 1.0
    phase: str = "switch-on"
    phase_since: float = 0.0
    finished: bool = False
    top_speed_mps: float = 0.0
    drawn_j: float = 0.0  # energy taken from the catenary
    returned_j: float = 0.0  # energy fed back into the catenary
    events: set = None  # event codes the controller reported

    def __post_init__(self) -> None:
        self.events = set()
        self._e_source = 0.0
        self._trim = 0.0

    def update(self, rig) -> None:
        """Set the driver's demands for the next frame."""
        plant, d = rig.plant, rig.driver
        t = plant.time_s
        e_source = plant.energy_from_source()
        step, self._e_source = e_source - self._e_source, e_source
        if step > 0:
            self.drawn_j += step
        else:
            self.returned_j -= step
        code = int(rig.replies.get("event_code", 0))
        if code:
            self.events.add(code)
        v = plant.read("train.speed_mps")
        x = plant.read("train.position_m")
        self.top_speed_mps = max(self.top_speed_mps, v)
        m_eff = plant.params.train.mass_kg * (1 + plant.params.train.rotating_mass_allowance)

        def go(phase: str) -> None:
            self.phase, self.phase_since = phase, t

        if self.phase == "switch-on" and t >= self.switch_on_s:
            go("accelerate")
        elif self.phase == "accelerate" and v >= self.target_kmh / 3.6:
            go("cruise")
        elif self.phase == "cruise" and t - self.phase_since >= self.cruise_s:
            go("coast")
        elif self.phase in ("coast", "cruise", "accelerate"):
            available = max(rig.replies.get("available_effort_kn", 0.0) * 1e3, 1.0)
            a_cap = 0.8 * available / m_eff
            coasted = self.phase == "coast" and t - self.phase_since >= self.coast_s
            must_brake = (self.stop_at_m - x) <= v * v / (2 * max(a_cap, 0.2)) + 5 * v
            if coasted or must_brake:
                go("brake")
        d.cruise_speed_kmh = self.target_kmh
        if self.phase == "switch-on":
            d.mode, d.effort_demand = MODE["off"], 0.0
        elif self.phase == "accelerate":
            d.mode, d.effort_demand = MODE["accelerate"], 1.0
        elif self.phase == "cruise":
            d.mode, d.effort_demand = MODE["cruise"], 0.0
        elif self.phase == "coast":
            d.mode, d.effort_demand = MODE["coast"], 0.0
        elif self.phase == "brake":
            remaining = max(self.stop_at_m - x, 0.5)
            a_req = v * v / (2 * remaining)
            available = max(rig.replies.get("available_effort_kn", 0.0) * 1e3, 1.0)
            if v > self.blend_mps:
                # feed forward from the available effort, corrected by the deceleration
                # actually measured (a driver closes this loop by eye)
                decel = -plant.read("train.acceleration_mps2")
                self._trim = min(max(self._trim + 0.5 * (a_req - decel) * plant.params.frame_s,
                                     -0.5), 0.5)
                d.mode = MODE["brake"]
                d.effort_demand = min(max(a_req * m_eff / available + self._trim, 0.0), 1.0)
                plant.set_brake_force(0.0)
            else:  # the friction brake takes the last metres
                d.mode, d.effort_demand = MODE["coast"], 0.0
                plant.set_brake_force(min(m_eff * max(a_req, 0.05), 3e5))
            if v == 0.0:
                self.finished = True
                plant.set_brake_force(1e5)
