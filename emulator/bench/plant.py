"""Plant cost benchmark: figures printed, never asserted (the machines are shared and noisy).

Measures one frame of the plant at the profile's frame and sub-step while the drive is
under load, the cost as the trainset grows (motors replicated), and a frame of the
machines alone (held voltages, free shafts) by ``scipy.integrate.solve_ivp`` and by our
plant, for ratios measured in the same run: solve_ivp's against our whole frame, and
against ours of the same machines, with how far each lands from a tight reference.
"""

from __future__ import annotations

import dataclasses
import gc
import math
import time
from typing import Any

import numpy as np

from emulator.plant import Commands, Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.plant.params import TrainsetParams
from emulator.rig.open_loop import OpenLoopLineSide, SlipFrequencyVf


def _loaded_plant(params: TrainsetParams) -> tuple[Plant, SlipFrequencyVf]:
    """A plant rolling at 15 m/s with its motors under traction (realistic currents),
    fed from the catenary through the line side when the profile has one."""
    plant = Plant(params)
    if plant.line_side:
        line = OpenLoopLineSide(plant)
        blocked = Commands.blocked(plant.n_inverters)
        while not line.ready:
            plant.advance(line.commands(blocked))
        plant._line = line
    plant.set_speed(15.0)
    # the open-loop V/f below switches on at speed at full voltage: its inrush would trip
    # the gate drivers' hardware protection and leave a blocked plant to be timed
    plant.ipar[:, L.IP_HW_ON] = 0.0
    vf = SlipFrequencyVf(plant.n_inverters, params.machine.pole_pairs,
                         params.machine.rated_voltage_v * math.sqrt(2 / 3)
                         / params.machine.rated_frequency_hz, max_modulation=0.95)
    for _ in range(200):  # build up flux and current
        _frame(plant, vf)
    return plant, vf


def _commands(plant: Plant, vf: SlipFrequencyVf) -> Commands:
    speed = float(plant.read("motor.speed_rad_s")[0])
    duty = vf.step(speed, 1.0, float(plant.read("dc_link.voltage_v")[0]), plant.params.frame_s)
    command = Commands(duty, np.ones(plant.n_inverters, dtype=bool))
    line = getattr(plant, "_line", None)
    return line.commands(command) if line is not None else command


def _frame(plant: Plant, vf: SlipFrequencyVf) -> None:
    plant.advance(_commands(plant, vf))


def _times_us(run, repeats: int, before=None) -> np.ndarray:
    """Wall time of each of ``repeats`` calls of run(), us; before() (untimed) ahead of
    each. The collector stays off: a collection in the loop would measure it, not run."""
    samples = np.empty(repeats)
    gc.collect()
    gc.disable()
    try:
        for k in range(repeats):
            if before is not None:
                before()
            t0 = time.perf_counter_ns()
            run()
            samples[k] = (time.perf_counter_ns() - t0) / 1e3
    finally:
        gc.enable()
    return samples


def _frame_times_us(params: TrainsetParams, frames: int) -> np.ndarray:
    plant, vf = _loaded_plant(params)
    held: list[Commands] = []

    def commands() -> None:  # the controller's part, not timed
        held[:] = [_commands(plant, vf)]

    return _times_us(lambda: plant.advance(held[0]), frames, commands)


def replicated(params: TrainsetParams, n_motors: int) -> TrainsetParams:
    """The trainset repeated, whole motor cars at a time (links with their line converters
    and inverters), until it has at least n_motors motors. The one transformer feeds them
    all, so its breaker's overcurrent release and the catenary's stiffness grow with the
    copies (the source's impedance shared out): else a long train's current trips the
    breaker and the frame is timed with its line side dead."""
    per_copy = params.motor_count
    copies = max(1, -(-n_motors // per_copy))
    n_links = len(params.dc_links)
    links, conv, units = [], [], []
    for r in range(copies):
        links += [dataclasses.replace(lk, name=f"{lk.name}#{r}") for lk in params.dc_links]
        conv += [dataclasses.replace(c, name=f"{c.name}#{r}", dc_link=c.dc_link + r * n_links)
                 for c in params.converters]
        units += [dataclasses.replace(u, name=f"{u.name}#{r}", dc_link=u.dc_link + r * n_links)
                  for u in params.line_converters]
    extra = {}
    if params.transformer is not None:
        extra["transformer"] = dataclasses.replace(
            params.transformer,
            hardware_line_trip_a=params.transformer.hardware_line_trip_a * copies)
        extra["supply"] = dataclasses.replace(
            params.supply, source_resistance_ohm=params.supply.source_resistance_ohm / copies,
            source_inductance_h=params.supply.source_inductance_h / copies)
    return dataclasses.replace(params, dc_links=tuple(links), converters=tuple(conv),
                               line_converters=tuple(units), **extra)


class _Machines:
    """The problem both sides solve for the ratio: the trainset's machines with held
    voltages (900 V, a different angle each) and free shafts carrying the drivetrain's
    inertia referred to the rotor, linear magnetising inductance, resistances at the
    reference temperature, no core loss, friction or windage; from psi_s = 2.0 V s,
    psi_r = 1.9 V s and 300 rad/s, one frame. Equations: machine.py's module docstring."""

    def __init__(self, params: TrainsetParams) -> None:
        mp, dt = params.machine, params.drivetrain
        self.params, self.n = params, params.motor_count
        self.u = 900.0 * np.exp(1j * np.linspace(0, 2 * np.pi, self.n, endpoint=False))
        self.inertia = mp.rotor_inertia_kgm2 + (
            dt.wheelset_inertia_kgm2 + dt.gear_inertia_kgm2) / dt.gear_ratio ** 2
        self.psi_s0, self.psi_r0, self.omega0 = 2.0, 1.9, 300.0
        lm = mp.magnetising_h  # the constants of rhs, once (solve_ivp's time is measured)
        ls, lr = mp.stator_leakage_h + lm, mp.rotor_leakage_h + lm
        self._lm, self._ls, self._lr, self._d = lm, ls, lr, ls * lr - lm * lm
        self._rs, self._rr, self._p = (mp.stator_resistance_ohm, mp.rotor_resistance_ohm,
                                       mp.pole_pairs)

    def rhs(self, _t: float, y: np.ndarray) -> np.ndarray:
        n, lm, ls, lr, d, p = self.n, self._lm, self._ls, self._lr, self._d, self._p
        ps = y[0:n] + 1j * y[n:2 * n]
        pr = y[2 * n:3 * n] + 1j * y[3 * n:4 * n]
        w = y[4 * n:]
        i_s = (lr * ps - lm * pr) / d
        i_r = (ls * pr - lm * ps) / d
        dps = self.u - self._rs * i_s
        dpr = -self._rr * i_r + 1j * p * w * pr
        torque = 1.5 * p * (ps.real * i_s.imag - ps.imag * i_s.real)
        return np.concatenate([dps.real, dps.imag, dpr.real, dpr.imag, torque / self.inertia])

    def y0(self) -> np.ndarray:
        n = self.n
        return np.concatenate([np.full(n, self.psi_s0), np.zeros(n), np.full(n, self.psi_r0),
                               np.zeros(n), np.full(n, self.omega0)])

    def plant(self) -> Plant:
        """Our plant set up as the same problem: one ideal source (a held voltage: a
        0 Hz sine) per machine, each shaft free, at the profile's frame and sub-step with
        the matrices refreshed once a frame (as the trainset runs)."""
        p = self.params
        one = Plant.test_bench(p.machine, 1, substep_s=p.substep_s, frame_s=p.frame_s,
                               refresh_each_substep=False).params
        each = tuple(dataclasses.replace(one.converters[0], name=f"bench {i}")
                     for i in range(self.n))
        plant = Plant(dataclasses.replace(one, converters=each), refresh_each_substep=False)
        plant.mint[:, L.MI_SAT_POINTS] = 0  # linear magnetising inductance
        plant.mpar[:, L.MP_G_CORE] = 0.0  # no core loss
        plant.mpar[:, L.MP_C_FW] = 0.0  # no friction and windage
        plant.mpar[:, L.MP_J_ROTOR] = self.inertia
        for m in range(self.n):
            plant.free_shaft(m, 0.0)
            plant.drive_from_sine(m, abs(self.u[m]), 0.0, float(np.angle(self.u[m])))
        self.restart(plant)
        return plant

    def restart(self, plant: Plant) -> None:
        """Back to the initial state (the matrices are rebuilt at the frame's start)."""
        plant.mx[:, L.MX_PSI_S] = self.psi_s0
        plant.mx[:, L.MX_PSI_R] = self.psi_r0
        plant.ms[:, L.MS_OMEGA_M] = self.omega0
        plant.ms[:, L.MS_OMEGA_AT_REFRESH] = self.omega0
        plant.ms[:, L.MS_T_STATOR] = plant.mpar[:, L.MP_T_REF]
        plant.ms[:, L.MS_T_ROTOR] = plant.mpar[:, L.MP_T_REF]

    def state(self, plant: Plant) -> np.ndarray:
        """The plant's machines as solve_ivp's state vector."""
        ps, pr = plant.mx[:, L.MX_PSI_S], plant.mx[:, L.MX_PSI_R]
        return np.concatenate([ps.real, ps.imag, pr.real, pr.imag, plant.ms[:, L.MS_OMEGA_M]])

    def reference(self) -> np.ndarray:
        """The end state by SciPy's DOP853 at rtol = atol = 1e-12: the reference both
        sides are measured against."""
        from scipy.integrate import solve_ivp

        return solve_ivp(self.rhs, (0.0, self.params.frame_s), self.y0(), method="DOP853",
                         rtol=1e-12, atol=1e-12).y[:, -1]

    def apart(self, y: np.ndarray, ref: np.ndarray) -> tuple[float, float]:
        """How far an end state y lands from ref: the largest flux and speed differences,
        each relative to its quantity's largest magnitude in ref."""
        n = self.n
        flux = np.abs(y[:4 * n] - ref[:4 * n]).max() / np.abs(ref[:4 * n]).max()
        speed = np.abs(y[4 * n:] - ref[4 * n:]).max() / np.abs(ref[4 * n:]).max()
        return float(flux), float(speed)


def _solve_ivp_frame_us(problem: _Machines, repeats: int, rtol: float = 1e-6,
                        atol: float = 1e-9) -> tuple[float, np.ndarray]:
    """Median time of one frame of the machines by solve_ivp (RK45; by default rtol 1e-6,
    a usual engineering tolerance, atol 1e-9), and its end state."""
    from scipy.integrate import solve_ivp

    sol = []

    def run() -> None:
        sol[:] = [solve_ivp(problem.rhs, (0.0, problem.params.frame_s), problem.y0(),
                            method="RK45", rtol=rtol, atol=atol)]

    return float(np.median(_times_us(run, repeats))), sol[0].y[:, -1]


def _our_machines_frame_us(problem: _Machines, repeats: int,
                           refresh_each: bool) -> tuple[float, np.ndarray]:
    """Median time of our plant's frame of the same machines (each from the initial
    state), its matrices refreshed once a frame or at each sub-step, and its end state."""
    plant = problem.plant()
    plant.refresh_each_substep = refresh_each
    plant.advance(None)  # compiled or loaded before the clock
    samples = _times_us(lambda: plant.advance(None), repeats, lambda: problem.restart(plant))
    return float(np.median(samples)), problem.state(plant)


def _machines_ratio(params: TrainsetParams, repeats: int) -> dict[str, float]:
    """solve_ivp's frame of the machines against ours of the same machines, with how far
    apart their end states are (relative to each quantity's largest magnitude); the
    reference for the agreement is solve_ivp with DOP853 at rtol 1e-12. Ours twice: the
    matrices refreshed once a frame, as a trainset runs (the speed frozen at its
    predicted mid-frame value: on these free shafts, whose torque swings within the
    frame, that is the larger error), and at each sub-step."""
    problem = _Machines(params)
    ivp_us, ivp_end = _solve_ivp_frame_us(problem, repeats)
    ours_us, ours_end = _our_machines_frame_us(problem, 5 * repeats, False)
    each_us, each_end = _our_machines_frame_us(problem, 5 * repeats, True)
    # RK45 loosened to rtol = atol = 1e-3: still closer to the reference than our frame
    # refreshed once a frame (measured 9.8e-6 against 7.7e-5), so a ratio at no better
    # accuracy for ours
    loose_us, loose_end = _solve_ivp_frame_us(problem, repeats, 1e-3, 1e-3)
    ref = problem.reference()

    def apart(y: np.ndarray) -> float:
        return max(problem.apart(y, ref))

    return {"solve_ivp_us": ivp_us, "ours_us": ours_us, "ratio": ivp_us / ours_us,
            "solve_ivp_apart": apart(ivp_end), "ours_apart": apart(ours_end),
            "each_us": each_us, "each_ratio": ivp_us / each_us,
            "each_apart": apart(each_end), "loose_us": loose_us,
            "loose_ratio": loose_us / ours_us, "loose_apart": apart(loose_end)}


def plant_benchmark(params: TrainsetParams, frames: int = 3000) -> dict[str, Any]:
    """Figures of the plant's cost per frame; see the module docstring."""
    frame_us = params.frame_s * 1e6
    demo = _frame_times_us(params, frames)
    median = float(np.median(demo))
    counts = [params.motor_count, 32, 128]
    cost = [median] + [float(np.median(_frame_times_us(replicated(params, n), frames // 3)))
                       for n in counts[1:]]
    slope, intercept = np.polyfit(counts, cost, 1)
    budget = 0.1 * frame_us
    fit = math.floor((budget - intercept) / slope) if slope > 0 else 0
    machines = _machines_ratio(params, repeats=15)
    ivp = machines["solve_ivp_us"]
    return {
        "profile": params.name,
        "frame_us": frame_us,
        "substep_us": params.substep_s * 1e6,
        "motors": params.motor_count,
        "plant_frame_us_median": round(median, 2),
        "plant_frame_us_p99": round(float(np.percentile(demo, 99)), 2),
        "frame_fraction": round(median / frame_us, 4),
        "cost_us_by_motor_count": {str(n): round(c, 1) for n, c in zip(counts, cost,
                                                                        strict=True)},
        "us_per_motor": round(float(slope), 3),
        "motors_in_10pct": max(fit, 0),
        "solve_ivp_frame_us_median": round(ivp, 1),
        "solve_ivp_ratio": round(ivp / median, 1),
        "machines_frame_us_median": round(machines["ours_us"], 2),
        "solve_ivp_machines_ratio": round(machines["ratio"], 1),
        "machines_frame_us_refresh_each_substep": round(machines["each_us"], 2),
        "solve_ivp_machines_ratio_refresh_each_substep": round(machines["each_ratio"], 1),
        "machines_apart_ours": float(f"{machines['ours_apart']:.2e}"),
        "machines_apart_ours_refresh_each_substep": float(f"{machines['each_apart']:.2e}"),
        "machines_apart_solve_ivp": float(f"{machines['solve_ivp_apart']:.2e}"),
        "solve_ivp_loose_frame_us_median": round(machines["loose_us"], 1),
        "machines_apart_solve_ivp_loose": float(f"{machines['loose_apart']:.2e}"),
        "solve_ivp_loose_machines_ratio": round(machines["loose_ratio"], 1),
    }
