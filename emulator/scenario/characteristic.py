"""The tractive- and braking-effort characteristic of a controller, measured on the rig.

The train is held at each speed point as a dynamometer would hold it (``Plant.hold_speed``:
the train, not its wheelsets, so the creep and the force at the rail come from the drive),
the controller gets a full or partial demand in motoring and in braking, and once the
effort has settled (the demand ramps in 1.5 s) the rig averages over a window: the force
at the rail (the sum of the axles' creep forces), the inverter current, the rotor flux,
the modulation (applied voltage over U_dc / sqrt(3)), the DC-link voltage (its mean, and
the largest of the links' peak to peak: a link that rings shows there, not in the mean)
and the line's power factor, and notes any protective trip. Each point is set beside the
trainset's specified effort curve (``[controller] max_*`` in the profile). It is the first
measurement a firmware engineer makes on a new controller.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

from emulator.protocol import events as ev
from emulator.protocol.signal_map import MODES

MODE = {name: code for code, name in MODES.items()}
SWITCH_ON_S = 3.0  # breaker, precharge, line contactors: before the first point
SETTLE_S = 2.5  # the demand ramps in 1.5 s (jerk limit), then settles
WAIT_RUNNING_S = 4.0  # at most this long for the drives to start before settling counts
AVERAGE_S = 0.5  # the measuring window at the end of each point
RAMP_MPS2 = 2.0  # between speed points, coasting
# after a point, coasting before the speed moves: the effort ramps out as it ramped in;
# a train that speeds up on the dynamometer while its drive still brakes looks, to any
# slip control, like wheels spinning up
RELEASE_S = 2.0


@dataclass(frozen=True)
class Point:
    """One point of the characteristic (forces in kN, positive in the train's direction)."""

    speed_kmh: float
    demand: float
    rail_force_kn: float
    limit_kn: float  # the specified curve at this speed, signed like the demand
    inverter_current_a_rms: float
    rotor_flux_vs: float
    modulation: float
    dc_link_v: float
    line_power_factor: float
    trips: tuple[str, ...]
    reported_kn: float = math.nan  # the effort the controller says it achieves (its reply)
    dc_link_swing_v: float = math.nan  # the largest of the links' peak to peak in the window

    @property
    def share_of_limit(self) -> float:
        """Rail force over demand x limit (1.0: the curve met)."""
        wanted = self.demand * abs(self.limit_kn)
        return self.rail_force_kn / wanted if wanted else math.nan


class Dynamometer:
    """A driver program that holds the train's speed and sets the demand; it notes the
    event codes the controller reports (any controller: they come in its replies)."""

    def __init__(self) -> None:
        self.speed_mps = 0.0
        self.phase = "characteristic"
        self.events: set[int] = set()

    def update(self, rig) -> None:
        rig.plant.hold_speed(self.speed_mps)
        code = int(rig.replies.get("event_code", 0))
        if code:
            self.events.add(code)


async def measure(profile: Path, speeds_kmh: list[float], demands: list[float], *,
                  controller: str = "reference", control: str | None = None,
                  progress: Callable[[float, float], None] | None = None) -> list[Point]:
    """The characteristic of a controller for a trainset profile.

    controller: "reference" (in this process, through telegrams) or the link URL where
    the controller under test answers. control: "scalar" or "vector" to override the
    reference's motor control (not for a controller under test).
    """
    from emulator.controller.inprocess import attach_reference
    from emulator.link import open_link
    from emulator.profiles.reader import load_trainset
    from emulator.rig.frame_loop import Rig

    params = load_trainset(profile)
    if params.effort_limits is None:
        raise ValueError(f"{profile}: [controller] gives no max_tractive_effort_kn etc.: "
                         "no effort curve to measure against")
    if controller != "reference" and control is not None:
        raise ValueError("the motor control can be chosen for the reference controller only")
    channel = f"characteristic-{id(params)}"
    url = f"loop://{channel}" if controller == "reference" else controller
    link = open_link(url)
    await link.open()
    rig = Rig(params, link, mode="lockstep")
    tcu = None
    if controller == "reference":
        tcu = await attach_reference(channel, rig, profile, motor_control=control)
    dyno = Dynamometer()
    rig.program = dyno
    frame_s = rig.period_us * 1e-6
    points: list[Point] = []
    try:
        rig.driver.mode, rig.driver.effort_demand = MODE["coast"], 0.0
        await rig.run(frames=rig.frame + round(SWITCH_ON_S / frame_s))
        for v_kmh in speeds_kmh:
            for demand in demands:
                if progress is not None:
                    progress(v_kmh, demand)
                # to the next speed as a train would get there (the encoders see no jump a
                # motor could not make), coasting, wheels and train together
                target = v_kmh / 3.6
                step = RAMP_MPS2 * frame_s
                while abs(dyno.speed_mps - target) > 1e-9:
                    dyno.speed_mps += min(max(target - dyno.speed_mps, -step), step)
                    rig.plant.set_speed(dyno.speed_mps)
                    await rig.run(frames=rig.frame + 1)
                dyno.events.clear()
                if tcu is not None:
                    tcu.clear_events()
                rig.driver.mode = MODE["accelerate"] if demand > 0 else MODE["brake"]
                rig.driver.effort_demand = demand
                # a drive released while the speed moved on may wait for its rotor's flux
                # to die away before it starts (up to WAIT_RUNNING_S): the settling time
                # counts from when every inverter carries current
                for _ in range(round(WAIT_RUNNING_S / frame_s)):
                    p = rig.plant
                    amps = sum(np.abs(p.read(f"inverter.phase_current_{x}_a")) for x in "abc")
                    if np.all(amps > 1.0):
                        break
                    await rig.run(frames=rig.frame + 1)
                await rig.run(frames=rig.frame + round(SETTLE_S / frame_s))
                sums = {"force": 0.0, "i2": 0.0, "flux": 0.0, "mod": 0.0, "udc": 0.0,
                        "reported": 0.0}
                n = round(AVERAGE_S / frame_s)
                low = np.full(len(params.dc_links), np.inf)  # the links' lowest and
                high = np.full(len(params.dc_links), -np.inf)  # highest in the window
                for _ in range(n):
                    await rig.run(frames=rig.frame + 1)
                    p = rig.plant
                    sums["force"] += float(p.read("train.tractive_force_n"))
                    ia, ib, ic = (p.read(f"inverter.phase_current_{x}_a") for x in "abc")
                    sums["i2"] += float(np.mean((ia**2 + ib**2 + ic**2) / 3.0))
                    sums["flux"] += float(np.mean([abs(p.flux_linkages(m)[1])
                                                   for m in range(p.n_motors)]))
                    u = np.hypot(p.read("inverter.voltage_alpha_v"),
                                 p.read("inverter.voltage_beta_v"))
                    udc = p.read("dc_link.voltage_v")
                    np.minimum(low, udc, out=low)
                    np.maximum(high, udc, out=high)
                    feeds = [c.dc_link for c in params.converters]
                    sums["mod"] += float(np.mean(u / (udc[feeds] / math.sqrt(3))))
                    sums["udc"] += float(np.mean(udc))
                    sums["reported"] += float(rig.replies.get("achieved_effort_kn", math.nan))
                pq = rig.plant.power_quality()
                limit = params.effort_limits.at(dyno.speed_mps, braking=demand < 0)
                seen = dyno.events | (set(tcu.events) if tcu is not None else set())
                trips = tuple(sorted(ev.NAMES.get(c, f"event {c}") for c in seen
                                     if c in ev.TRIPS))
                points.append(Point(
                    speed_kmh=v_kmh, demand=demand, rail_force_kn=sums["force"] / n / 1e3,
                    limit_kn=math.copysign(limit / 1e3, demand),
                    inverter_current_a_rms=math.sqrt(sums["i2"] / n),
                    rotor_flux_vs=sums["flux"] / n, modulation=sums["mod"] / n,
                    dc_link_v=sums["udc"] / n,
                    line_power_factor=float(pq.get("power_factor", math.nan)),
                    trips=trips, reported_kn=sums["reported"] / n,
                    dc_link_swing_v=float(np.max(high - low))))
                rig.driver.mode, rig.driver.effort_demand = MODE["coast"], 0.0
                await rig.run(frames=rig.frame + round(RELEASE_S / frame_s))
    finally:
        link.close()
    return points


def as_json(points: list[Point]) -> list[dict]:
    """Points as plain dictionaries (with the share of the limit met)."""
    return [dict(asdict(p), share_of_limit=p.share_of_limit) for p in points]


def plot(points: list[Point], title: str, path: Path) -> Path:
    """Rail force against speed, measured and specified, motoring and braking (PNG)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(8, 5))
    for demand in sorted({p.demand for p in points}, reverse=True):
        pts = [p for p in points if p.demand == demand]
        ax.plot([p.speed_kmh for p in pts], [p.rail_force_kn for p in pts], "o-",
                label=f"measured, demand {demand:+.2f}")
    for sign in (1.0, -1.0):
        pts = sorted({(p.speed_kmh, p.limit_kn) for p in points
                      if math.copysign(1.0, p.demand) == sign})
        if pts:
            ax.plot([s for s, _ in pts], [lk for _, lk in pts], "k--", lw=1,
                    label="specified curve" if sign > 0 else None)
    ax.axhline(0.0, color="grey", lw=0.5)
    ax.set_xlabel("speed, km/h")
    ax.set_ylabel("force at the rail, kN (negative: braking)")
    ax.set_title(title)
    ax.legend(fontsize=8)
    ax.grid(alpha=0.3)
    fig.tight_layout()
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, dpi=100)
    plt.close(fig)
    return path
