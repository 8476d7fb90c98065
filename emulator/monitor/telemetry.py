"""What the monitor tells a dashboard: the rig's layout once, then decimated snapshots.

Plain dictionaries of numbers and strings, so msgpack carries them and a client needs
none of our code. SI units inside the rig; the snapshot uses the units people read on a
cab display (km/h, kV, kN, degC, rpm), and every key names its unit.
"""

from __future__ import annotations

import math
from typing import Any

import numba as nb
import numpy as np

from emulator.faults.catalogue import CATALOGUE
from emulator.plant import layout as L  # noqa: N812  (as in the plant)
from emulator.plant.drivetrain import RAIL_CONDITIONS
from emulator.protocol.events import NAMES as EVENT_NAMES
from emulator.protocol.events import TRIPS
from emulator.protocol.signal_map import MODES

RPM_PER_RAD_S = 60.0 / (2.0 * math.pi)
#: the plant's rail conditions from the most friction down (sanding is something done to
#: a rail, not a level of friction to name)
_BY_FRICTION = sorted((n for n in RAIL_CONDITIONS if n != "sanded"),
                      key=lambda name: -RAIL_CONDITIONS[name][2])


def catalogue() -> list[dict[str, Any]]:
    """The fault catalogue as plain data: name, point, target kind, parameters."""
    return [{"name": k.name, "point": k.point, "target": k.target,
             "description": k.description,
             "params": [{"name": n, "unit": p.unit, "lo": p.lo, "hi": p.hi,
                         "default": p.default} for n, p in k.params.items()]}
            for k in CATALOGUE.values()]


def rail_condition(mu0: float) -> str:
    """A word for an axle's friction coefficient: the first of the plant's rail
    conditions (from the most friction down) it reaches within a fifth, or "low" below
    them all."""
    for name in _BY_FRICTION:
        if mu0 >= 0.8 * RAIL_CONDITIONS[name][2]:
            return name
    return "low"


class TelemetryBuilder:
    """Reads a rig into the hello message and into snapshots.

    DC-side currents (line converters into the links, choppers, inverters) are means
    over the frames since the last snapshot (``accumulate`` once per frame); voltages,
    speeds, torques and temperatures are the values at the snapshot's frame.
    """

    def __init__(self, rig) -> None:
        self.rig = rig
        p = rig.plant.params
        self.motor_names = p.motor_names
        self.links = [lk.name for lk in p.dc_links]
        self.inverters = [c.name for c in p.converters]
        self.line_converters = [u.name for u in p.line_converters]
        self._inv_link = [c.dc_link for c in p.converters]
        self._lc_link = [u.dc_link for u in p.line_converters]
        plant = rig.plant
        names = ["dc_link.chopper_current_a", "inverter.dc_current_a"]
        if plant.line_side:
            names.append("line_converter.dc_current_a")
        self._means = {n: plant.state_column(n) for n in names}
        self._sums = {n: np.zeros(a.shape[0]) for n, (a, _) in self._means.items()}
        for name, (array, col) in self._means.items():  # compile or load it now, not
            _add_column(np.zeros_like(self._sums[name]), array, col)  # in the frame loop
        self._udc = plant.state_column("dc_link.voltage_v")
        self._breaker = self._feeder = self._lc_pre = self._lc_main = None
        if plant.line_side:
            self._breaker = plant.state_column("line.breaker_closed")
            self._feeder = plant.state_column("line.feeder_closed")
            self._lc_pre = plant.state_column("line_converter.precharge_closed")
            self._lc_main = plant.state_column("line_converter.line_contactor_closed")
        self._count = 0

    def accumulate(self) -> None:
        """Add this frame's DC-side currents (frame means) to the next snapshot's mean,
        so that a snapshot shows them averaged over its ~33 ms rather than one frame."""
        sums = self._sums
        for name, (array, col) in self._means.items():
            _add_column(sums[name], array, col)
        self._count += 1

    def _take_means(self) -> dict[str, list[float]]:
        """The means since the last snapshot (this frame's values if none), then reset."""
        means = {}
        for name, (array, col) in self._means.items():
            total = self._sums[name]
            means[name] = (total / self._count if self._count else array[:, col]).tolist()
            total[:] = 0.0
        self._count = 0
        return means

    def hello(self, targets: dict[str, list[str]]) -> dict[str, Any]:
        """Layout, catalogue and names, sent once when a client connects."""
        rig = self.rig
        p = rig.plant.params
        return {"kind": "hello", "trainset": p.name, "mode": rig.mode,
                "period_us": rig.period_us, "line_side": rig.plant.line_side,
                "motors": self.motor_names, "inverters": self.inverters,
                "dc_links": self.links, "line_converters": self.line_converters,
                "groups": [{"name": lk, "line_converters": [u for u, j in zip(
                    self.line_converters, self._lc_link, strict=True) if j == i],
                            "inverters": [c for c, j in zip(
                                self.inverters, self._inv_link, strict=True) if j == i]}
                           for i, lk in enumerate(self.links)],
                "catalogue": catalogue(), "targets": targets,
                "event_names": {str(k): v for k, v in EVENT_NAMES.items()},
                "trips": sorted(TRIPS), "modes": {str(k): v for k, v in MODES.items()}}

    def snapshot(self, paused: bool, recording: str | None, program: str) -> dict[str, Any]:
        """The rig's state now, for a dashboard (about 50 us: it runs inside a frame)."""
        rig = self.rig
        plant = rig.plant
        d = rig.driver
        replies = rig.replies
        mpar, ms = plant.mpar, plant.ms
        mu0 = mpar[:, L.MP_MU0] * mpar[:, L.MP_ADHESION_FACTOR]
        worst = int(np.argmin(mu0))
        health = rig.health
        ts = plant.ts
        return {
            "kind": "telemetry", "t_s": plant.time_s, "frame": rig.frame, "mode": rig.mode,
            "paused": paused, "recording": recording,
            "timing": self._timing(rig.stats),
            "link": {"telegrams": health.accepted, "valid": health.valid,
                     "held": health.missing, "late": health.sequence.get("late", 0)
                     + health.expired, "rejected": sum(health.rejected.values()),
                     "crc_errors": getattr(rig.link.stats.framing, "crc_errors", 0),
                     "watchdog": bool(rig.tripped), "watchdog_trips": health.watchdog_trips},
            "train": {"speed_kmh": float(ts[L.TS_SPEED]) * 3.6,
                      "position_m": float(ts[L.TS_POSITION]),
                      "acceleration_mps2": float(ts[L.TS_ACCEL]),
                      "tractive_force_kn": float(ts[L.TS_TRACTIVE_FORCE]) / 1e3,
                      "demand": d.effort_demand, "driver_mode": MODES.get(d.mode, "?"),
                      "program": program,
                      "achieved_kn": replies.get("achieved_effort_kn", 0.0),
                      "available_kn": replies.get("available_effort_kn", 0.0),
                      "event_code": int(replies.get("event_code", 0)),
                      "adhesion": rail_condition(float(mu0[worst])),
                      "mu0_min": float(mu0[worst]),
                      "adhesion_use_max": float(ms[:, L.MS_ADHESION_UTIL].max())},
            "line": self._line(),
            "groups": self._groups(),
            "motors": {"speed_rpm": (ms[:, L.MS_OMEGA_M] * RPM_PER_RAD_S).tolist(),
                       "torque_nm": ms[:, L.MS_TORQUE].tolist(),
                       "current_a_rms": (np.abs(plant.mx[:, L.MX_IS])
                                         * (1.0 / math.sqrt(2.0))).tolist(),
                       "creep_mps": ms[:, L.MS_CREEP_VEL].tolist(),
                       "stator_degc": (ms[:, L.MS_T_STATOR] - 273.15).tolist(),
                       "rotor_degc": (ms[:, L.MS_T_ROTOR] - 273.15).tolist()},
            "faults": rig.faults.listing() if rig.faults is not None else [],
        }

    @staticmethod
    def _timing(stats) -> dict[str, float]:
        """Lateness p99 and compute median over the last 256 frames."""
        n = min(stats.frames, 256)
        if n == 0:
            return {"frames": 0, "lateness_us_p99": 0.0, "compute_us_median": 0.0,
                    "late_frames": 0}
        i = (stats.frames - n + np.arange(n)) % stats.capacity
        k99, k50 = (99 * (n - 1)) // 100, (n - 1) // 2
        return {"frames": stats.frames,
                "lateness_us_p99": float(np.partition(stats.lateness_us[i], k99)[k99]),
                "compute_us_median": float(np.partition(stats.compute_us[i], k50)[k50]),
                "late_frames": stats.late_frames}

    def _line(self) -> dict[str, Any]:
        plant = self.rig.plant
        if not plant.line_side:
            return {}
        pq = plant.power_quality()
        return {"voltage_kv_rms": pq.get("voltage_rms_v", 0.0) / 1e3,
                "current_a_rms": pq.get("current_rms_a", 0.0),
                "power_kw": pq.get("active_power_w", 0.0) / 1e3,
                "power_factor": pq.get("power_factor", 0.0),
                "breaker_closed": bool(self._breaker[0][self._breaker[1]] > 0.5),
                "feeder_closed": bool(self._feeder[0][self._feeder[1]] > 0.5)}

    def _groups(self) -> list[dict[str, Any]]:
        udc = self._udc[0][:, self._udc[1]].tolist()
        means = self._take_means()
        lc_dc = means.get("line_converter.dc_current_a", [])
        chop, idc = means["dc_link.chopper_current_a"], means["inverter.dc_current_a"]
        pre = main = ()
        if self._lc_pre is not None:
            pre = self._lc_pre[0][:, self._lc_pre[1]].tolist()
            main = self._lc_main[0][:, self._lc_main[1]].tolist()
        out = []
        for i, name in enumerate(self.links):
            units = [{"name": u, "dc_current_a": lc_dc[j], "precharge": pre[j] > 0.5,
                      "contactor": main[j] > 0.5}
                     for j, u in enumerate(self.line_converters) if self._lc_link[j] == i]
            out.append({"name": name, "dc_link_v": udc[i], "chopper_a": chop[i],
                        "line_converters": units,
                        "inverter_dc_a": sum(idc[j] for j, k in enumerate(self._inv_link)
                                             if k == i)})
        return out


@nb.njit(cache=True)
def _add_column(total: np.ndarray, array: np.ndarray, col: int) -> None:
    """total += array[:, col], without numpy's per-call overhead (once a frame)."""
    for i in range(total.shape[0]):
        total[i] += array[i, col]
