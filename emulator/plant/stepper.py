"""The plant stepper: owns the state arrays, plant time and counters.

``Plant.advance(commands, frame_s)`` holds the commands for one frame and runs the
compiled kernel over it in fixed sub-steps. States are read by name (``plant.read(
"train.speed_mps")``), see :data:`emulator.plant.layout.READABLE`.
"""

from __future__ import annotations

import math

import numpy as np

from emulator.kernel_cache import entry_point

from . import layout as L  # noqa: N812 (the layout reads as a namespace)
from . import power_quality
from .build import build_line_side, build_load_transfer, build_motor_side, build_train
from .commands import CommandError, Commands, LineCommands
from .drivetrain import RAIL_CONDITIONS
from .energy import EnergyAccount, energy_account
from .inputs import (
    COMMAND_NOT_FINITE,
    LINE_NOT_FINITE,
    command_error,
    load_commands,
    load_line_commands,
)
from .kernel import advance_frame
from .line import SUPPLY_LEVELS
from .machine import currents
from .params import (
    ConverterParams,
    DcLinkParams,
    DrivetrainParams,
    InverterParams,
    MachineParams,
    SupplyParams,
    TrainParams,
    TrainsetParams,
)
from .probe import Probes

#: the plant's attribute holding each kind of state (layout.READABLE's first field)
_STATE_ARRAYS = {"motor_state": "ms", "inverter_state": "ist", "link_state": "lst",
                 "train_state": "ts", "supply_state": "ss", "lc_state": "ls2"}


class Plant:
    """The whole drive of a trainset, stepped one frame at a time."""

    def __init__(self, params: TrainsetParams, *, refresh_each_substep: bool = False,
                 ideal_dc_links: bool = False) -> None:
        """Build the state arrays.

        ideal_dc_links: hold every DC link at its nominal voltage and leave the line side
        out (motor-side studies); also the case when the profile has no line side.
        """
        self.params = params
        self.substep_s = params.substep_s
        # the command arrays last found well-formed, and the line side's (a fresh object
        # until then, which no command is)
        self._checked: tuple = (object(),) * 2
        self._line_checked: tuple = (object(),) * 5
        self.refresh_each_substep = refresh_each_substep
        self.time_s = 0.0
        self.time_ns = 0
        self._last_frame = math.nan  # (never equal: the first frame length is checked)
        self._n_sub, self._h = 1, params.substep_s
        self._frame_step = None  # advance_frame, bound at the first frame (advance)
        self.frames = 0
        self.substeps = 0
        self.probes = Probes()  # values the measurement chain reads at every sub-step
        self._read_at: dict[str, tuple[np.ndarray, int]] = {}  # read(): name -> place
        build_motor_side(self, params)
        build_load_transfer(self, params)
        build_line_side(self, params, ideal_dc_links or params.transformer is None)
        self.derive_drivetrain()
        build_train(self, params)
        #: the state arrays advance_frame takes, in its order (made once, in build.py)
        self._state_arrays = (self.mpar, self.mint, self.mu, self.ms, self.mx, self.sat_i,
                              self.sat_psi, self.ipar, self.iint, self.iu, self.ist, self.lst,
                              self.tpar, self.tu, self.ts, self.sp, self.harmonics, self.ss,
                              self.lp, self.li, self.lu, self.ls2, self.kp, self.ku,
                              self.i_link)

    @property
    def line_side(self) -> bool:
        """Whether the line side is modelled (False: ideal DC links)."""
        return self.sp[L.SP_ACTIVE] > 0.5

    def derive_drivetrain(self) -> None:
        """Recompute the derived drivetrain columns after a change of their sources."""
        mp = self.mpar
        mp[:, L.MP_POL_KAPPA] = 0.25 * math.pi * mp[:, L.MP_KALKER] / mp[:, L.MP_AXLE_LOAD]
        mp[:, L.MP_POL_SCALE] = 2.0 * mp[:, L.MP_AXLE_LOAD] / math.pi

    @classmethod
    def test_bench(cls, machine: MachineParams, motors: int = 1, *, dc_link_v: float = 0.0,
                   substep_s: float = 50e-6, frame_s: float = 1e-3,
                   refresh_each_substep: bool = True,
                   inverter: InverterParams | None = None) -> Plant:
        """One inverter feeding ``motors`` machines whose shafts are on a test bench.

        Every shaft starts free (rotor inertia only, no load); use impose_speed() for a
        dynamometer and drive_from_sine() for an ideal source. No train, gear or wheel
        takes part; the drivetrain data below only satisfy the layout. The inverter is
        ideal (no dead time, drops or switching loss) unless one is given.
        """
        bench = TrainsetParams(
            name=f"test bench: {machine.name}", source="test bench", substep_s=substep_s,
            frame_s=frame_s,
            train=TrainParams(1.0, 0.0, 0.0, 0.0, 0.0, 1.0, machine.reference_temperature_k),
            supply=SupplyParams(1.0, 50.0),
            machine=machine,
            drivetrain=DrivetrainParams(1.0, 1.0, 1.0, 1.0, 1.0, "dry", 0.1),
            inverter=inverter or InverterParams(1000.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0, 1.0,
                                                1.0),
            dc_links=(DcLinkParams("bench", dc_link_v),),
            converters=(ConverterParams("bench", 0, (1.0,) * motors),),
        )
        plant = cls(bench, refresh_each_substep=refresh_each_substep)
        for m in range(motors):
            plant.free_shaft(m, 0.0)
        return plant

    # --- stepping -------------------------------------------------------------------
    def advance(self, commands: Commands | None, frame_s: float | None = None) -> None:
        """Hold commands for one frame and advance the plant by frame_s seconds.

        The frame is cut into equal sub-steps no longer than the profile's sub-step.
        ``commands=None`` keeps the previous ones (or the ideal sources).
        """
        frame = self.params.frame_s if frame_s is None else frame_s
        if frame != self._last_frame:  # (a frame that failed the check is never the last)
            if not (math.isfinite(frame) and 1e-5 <= frame <= 1.0):
                raise CommandError(f"frame length must be within 10 us .. 1 s, got {frame!r}")
            self._n_sub = max(1, math.ceil(frame / self.substep_s - 1e-9))
            self._h = float(frame) / self._n_sub  # (a Python float: the frame call's h)
            self._last_frame = frame
        probes = self.probes
        if probes.frame < 0:  # a list new since the last frame (or the first): in range?
            probes.check_places(self.ss, self.ls2, self.lst, self.ist, self.ms)
        if commands is not None:
            self._apply(commands)
        n_sub, h = self._n_sub, self._h
        ring = self._pq_ring
        args = (n_sub, h, self.time_s, self.refresh_each_substep, *self._state_arrays,
                probes.src, probes.row, probes.col, probes.rows_for(n_sub), self.cols, ring,
                self._pq_sum, self.frames % ring.shape[0])
        frame_step = self._frame_step
        if frame_step is None:  # advance_frame for these arrays (kernel_cache.entry_point)
            frame_step = self._frame_step = entry_point(advance_frame, *args)
        frame_step(*args)
        probes.frame, probes.n_sub, probes.h = self.frames + 1, n_sub, h  # the trace's frame
        self.frames += 1
        self.substeps += n_sub
        # integer nanoseconds: t_k = k T exactly for a constant frame, no drift
        self.time_ns += round(frame * 1e9)
        self.time_s = self.time_ns / 1e9

    def _apply(self, commands: Commands) -> None:
        duty, gates = commands.duty, commands.gates_enabled
        if (duty is not self._checked[0] or gates is not self._checked[1]
                or duty.shape != (self.n_inverters, 3) or gates.shape != (self.n_inverters,)):
            duty, gates = self._checked_arrays(duty, gates)
        line = commands.line
        if line is not None:
            self._apply_line(line)
        reset = commands.fault_reset
        # (None unless one is asked: the rig's command mapper leaves it out)
        if reset is not None and (reset.any() if isinstance(reset, np.ndarray)
                                  else np.any(reset)):
            self.reset_gate_drivers(reset)
        code = load_commands(duty, gates, self.iu)
        if code:
            raise command_error(code)

    def _checked_arrays(self, duty, gates) -> tuple[np.ndarray, np.ndarray]:
        """Duty and gate commands as arrays of the plant's shape and type; arrays that
        already are are remembered (the rig fills the same ones each frame, and an
        array's type does not change under it; its shape is checked each time)."""
        as_given = (isinstance(duty, np.ndarray) and duty.dtype == np.float64
                    and duty.shape == (self.n_inverters, 3) and isinstance(gates, np.ndarray)
                    and gates.dtype == np.bool_ and gates.shape == (self.n_inverters,))
        if as_given:
            self._checked = (duty, gates)
            return duty, gates
        duty = np.asarray(duty, dtype=float)
        if duty.shape != (self.n_inverters, 3):
            raise CommandError(f"expected duty of shape ({self.n_inverters}, 3), "
                               f"got {duty.shape}")
        gates = np.asarray(gates, dtype=bool)
        if gates.shape != (self.n_inverters,):
            raise CommandError(f"expected gates of shape ({self.n_inverters},), "
                               f"got {gates.shape}")
        return duty, gates

    def reset_gate_drivers(self, which: np.ndarray) -> None:
        """Reset the latched hardware trip of the inverters where which is True; a driver
        whose phase current is still past its threshold trips again at once."""
        which = np.asarray(which, dtype=bool)
        if which.shape != (self.n_inverters,):
            raise CommandError(f"fault_reset needs {self.n_inverters} flags")
        self.ist[which, L.IS_HW_TRIP] = 0.0

    def _apply_line(self, line: LineCommands) -> None:
        n, k = self.n_line_converters, self.n_links
        arrays = (line.modulation, line.gates_enabled, line.precharge, line.line_contactor)
        chopper = line.chopper
        seen = self._line_checked  # the arrays found well-formed last frame (the rig's)
        if not (arrays[0] is seen[0] and arrays[1] is seen[1] and arrays[2] is seen[2]
                and arrays[3] is seen[3] and chopper is seen[4] and chopper.shape == (k,)
                and arrays[0].shape == arrays[1].shape == arrays[2].shape
                == arrays[3].shape == (n,)):
            arrays = [a if isinstance(a, np.ndarray) else np.asarray(a, dtype=float)
                      for a in arrays]
            if not isinstance(chopper, np.ndarray):
                chopper = np.asarray(chopper, dtype=float)
            if any(a.shape != (n,) or a.dtype.kind not in "fb" for a in arrays) or (
                    chopper.shape != (k,) or chopper.dtype.kind != "f"):
                raise CommandError(f"line commands need {n} values per converter and {k} "
                                   "chopper duties, as numbers")
            self._line_checked = (*arrays, chopper)
        code = load_line_commands(arrays[0], arrays[1], arrays[2], arrays[3],
                                  1.0 if line.breaker else 0.0, chopper, self.lu, self.ss,
                                  self.ku)
        if code:
            raise command_error(code + LINE_NOT_FINITE - COMMAND_NOT_FINITE)

    # --- the supply (used by scenarios: level steps, dips, neutral sections) -----------
    def set_supply(self, *, voltage_rms_v: float | None = None,
                   frequency_hz: float | None = None, phase_jump_rad: float = 0.0,
                   live: bool | None = None, droop_v_per_w: float | None = None) -> None:
        """Change the catenary now (the phase continuous across a frequency change):
        voltage_rms_v, the EMF behind the source impedance (0: a short the converters can
        feed); live, the feeding breaker (False: an interruption, a neutral section);
        phase_jump_rad, added to the phase (a return's jump); droop_v_per_w, the EMF rise
        per watt of reverse power (0: receptive)."""
        if not self.line_side:
            raise CommandError("this plant has no line side (ideal DC links)")
        t = self.time_s
        sp = self.sp
        if frequency_hz is not None or phase_jump_rad:
            self._finite("frequency", sp[L.SP_FREQUENCY] if frequency_hz is None
                         else frequency_hz, 1.0, 100.0)
            self._finite("phase jump", phase_jump_rad, -10.0, 10.0)
            theta = sp[L.SP_PHASE_REF] + 2 * math.pi * sp[L.SP_FREQUENCY] * (t - sp[L.SP_T_REF])
            sp[L.SP_PHASE_REF] = math.fmod(theta + phase_jump_rad, 2 * math.pi)
            sp[L.SP_T_REF] = t
            if frequency_hz is not None:
                sp[L.SP_FREQUENCY] = frequency_hz
        if voltage_rms_v is not None:
            self._finite("supply voltage", voltage_rms_v, 0.0, 50e3)
            sp[L.SP_AMPLITUDE] = voltage_rms_v * math.sqrt(2.0)
        if live is not None:
            sp[L.SP_LIVE] = 1.0 if live else 0.0
        if droop_v_per_w is not None:
            self._finite("droop", droop_v_per_w, 0.0, 10.0)
            sp[L.SP_DROOP] = droop_v_per_w

    def supply_level(self, name: str) -> float:
        """An EN 50163 level (U_min2, U_min1, U_n, U_max1, U_max2) of this system, V rms."""
        levels = SUPPLY_LEVELS.get(self.params.supply.nominal_voltage_v)
        if levels is None or name not in levels:
            raise CommandError(f"no EN 50163 level {name!r} for a "
                               f"{self.params.supply.nominal_voltage_v:g} V system")
        return levels[name]

    def power_quality(self) -> dict[str, float]:
        """Pantograph power quality over the last whole line periods (>= 100 ms):
        power_quality.figures."""
        return power_quality.figures(self._pq_ring)

    # --- inputs from the track and the driver -----------------------------------------
    def set_gradient(self, gradient: float) -> None:
        """Track gradient as rise over run (0.01 = 10 per mille uphill)."""
        self._finite("gradient", gradient, -0.2, 0.2)
        self.tu[L.TU_GRADIENT] = gradient

    def set_brake_force(self, force_n: float, vent: np.ndarray | None = None) -> None:
        """Friction brake force demanded of the whole train at the rail, N.

        Spread evenly over the train's axles: a motored axle's share is a torque on its
        wheelset through the wheel-rail contact (it can lock the wheel and slide), the
        other axles' share acts on the train. Each cylinder follows its demand with the
        profile's lag. vent: per motored axle, the fraction of its demand a wheel-slide
        protection's dump valve takes away (0 none, 1 all).
        """
        self._finite("brake force", force_n, 0.0, 1e7)
        n_m = self.n_motors
        axles = max(self.params.train.axle_count, n_m)
        share = force_n / axles
        if vent is None:
            self.mu[:, L.MU_BRAKE_DEMAND] = share
        else:
            vent = np.asarray(vent, dtype=float)
            if vent.shape != (n_m,) or not np.all((vent >= 0.0) & (vent <= 1.0)):
                raise CommandError(f"vent needs {n_m} fractions within 0..1")
            self.mu[:, L.MU_BRAKE_DEMAND] = share * (1.0 - vent)
        self.tu[L.TU_BRAKE_FORCE] = share * (axles - n_m)

    def set_curve_resistance(self, force_n: float) -> None:
        """Curve resistance of the whole train, N: like friction it acts against the
        motion and, at rest, holds up to its size (it never pushes a train)."""
        self._finite("curve resistance", force_n, 0.0, 1e7)
        self.tu[L.TU_CURVE_RESISTANCE] = force_n

    def set_adhesion_factor(self, motor: int, factor: float) -> None:
        """Scale the friction coefficient mu0 of one motored axle (1 = profile value)."""
        self._finite("adhesion factor", factor, 0.0, 10.0)
        self.mpar[motor, L.MP_ADHESION_FACTOR] = factor

    def set_rail_condition(self, motor: int, condition: str) -> None:
        """Switch one axle's rail condition (a name in RAIL_CONDITIONS)."""
        if condition not in RAIL_CONDITIONS:
            raise CommandError(f"rail condition must be one of {sorted(RAIL_CONDITIONS)}")
        (self.mpar[motor, L.MP_KA], self.mpar[motor, L.MP_KS], self.mpar[motor, L.MP_MU0],
         self.mpar[motor, L.MP_POL_A], self.mpar[motor, L.MP_POL_B]) = RAIL_CONDITIONS[condition]

    def set_dc_link_voltage(self, link: int, voltage_v: float) -> None:
        """Voltage of an ideal DC-link source, V."""
        self._finite("DC-link voltage", voltage_v, 0.0, 1e4)
        self.lst[link, L.LS_UDC] = voltage_v

    def set_speed(self, speed_mps: float) -> None:
        """Set the train and all its coupled wheelsets rolling at speed_mps (no slip)."""
        self._finite("speed", speed_mps, -200.0, 200.0)
        self.ts[L.TS_SPEED] = speed_mps
        for m in range(self.n_motors):
            if self.mint[m, L.MI_SHAFT_MODE] == L.SHAFT_DRIVETRAIN:
                ow = speed_mps / self.mpar[m, L.MP_WHEEL_R]
                om = ow * self.mpar[m, L.MP_GEAR]
                self.ms[m, L.MS_OMEGA_M] = om
                self.ms[m, L.MS_OMEGA_AT_REFRESH] = om
                self.ms[m, L.MS_OMEGA_W] = ow
                self.ms[m, L.MS_TWIST] = 0.0

    def hold_speed(self, speed_mps: float) -> None:
        """Hold the train (not its wheelsets) at speed_mps, as a dynamometer or the track of
        a characteristic measurement would: the wheels keep their own speed, so the creep
        and the creep force come from the drive."""
        self._finite("speed", speed_mps, -200.0, 200.0)
        self.ts[L.TS_SPEED] = speed_mps

    @staticmethod
    def _finite(what: str, value: float, lo: float, hi: float) -> None:
        if not (isinstance(value, int | float) and math.isfinite(value) and lo <= value <= hi):
            raise CommandError(f"{what} must be a finite number within {lo:g}..{hi:g}, "
                               f"got {value!r}")

    # --- validation harness: ideal source and dynamometer -------------------------------
    def drive_from_sine(self, inverter: int, amplitude_v: float, frequency_hz: float,
                        phase_rad: float = 0.0) -> None:
        """Feed an inverter's motors from an ideal balanced sinusoidal source.

        amplitude_v is the space-vector amplitude, i.e. the phase-to-neutral peak
        (V_LL,rms * sqrt(2/3)). Replaces the inverter until drive_from_inverter().
        """
        self._finite("amplitude", amplitude_v, 0.0, 1e5)
        self._finite("frequency", frequency_hz, -1e4, 1e4)
        self._finite("phase", phase_rad, -1e3, 1e3)
        self.iint[inverter, L.II_SOURCE] = L.SOURCE_SINE
        self.iu[inverter, L.IU_SINE_AMP] = amplitude_v
        self.iu[inverter, L.IU_SINE_FREQ] = frequency_hz
        self.iu[inverter, L.IU_SINE_PHASE] = phase_rad

    def drive_from_inverter(self, inverter: int) -> None:
        """Return an inverter's motors to the inverter (undo drive_from_sine)."""
        self.iint[inverter, L.II_SOURCE] = L.SOURCE_INVERTER

    def impose_speed(self, motor: int, speed_rad_s: float) -> None:
        """Hold a motor shaft at a mechanical speed, as a dynamometer would."""
        self._finite("speed", speed_rad_s, -1e4, 1e4)
        self.mint[motor, L.MI_SHAFT_MODE] = L.SHAFT_IMPOSED_SPEED
        self.mu[motor, L.MU_IMPOSED_SPEED] = speed_rad_s
        self.ms[motor, L.MS_OMEGA_M] = speed_rad_s
        self.ms[motor, L.MS_OMEGA_AT_REFRESH] = speed_rad_s

    def free_shaft(self, motor: int, load_torque_nm: float = 0.0) -> None:
        """Uncouple a motor from its axle: rotor inertia only, with a load torque."""
        self._finite("load torque", load_torque_nm, -1e6, 1e6)
        self.mint[motor, L.MI_SHAFT_MODE] = L.SHAFT_FREE
        self.mu[motor, L.MU_LOAD_TORQUE] = load_torque_nm

    def set_rotor_torque(self, motor: int, torque_nm: float) -> None:
        """A torque on a coupled motor's rotor besides its own (a test bench's
        dynamometer on the shaft's free end; positive drives), N m. 0 on a train."""
        self._finite("rotor torque", torque_nm, -1e6, 1e6)
        self.mu[motor, L.MU_LOAD_TORQUE] = -torque_nm

    def set_open_phase(self, motor: int, phase: int | None) -> None:
        """Open one stator phase of a motor (0, 1, 2 for a, b, c), or None to reconnect."""
        if phase is not None and phase not in (0, 1, 2):
            raise ValueError(f"open phase must be 0, 1 or 2 (a, b, c), got {phase!r}")
        self.mu[motor, L.MU_OPEN_PHASE] = 0.0 if phase is None else phase + 1.0

    def couple_drivetrain(self, motor: int) -> None:
        """Couple a motor back to its gear and axle (the wheelset turning with the rotor,
        the shaft untwisted)."""
        self.mint[motor, L.MI_SHAFT_MODE] = L.SHAFT_DRIVETRAIN
        self.mu[motor, L.MU_LOAD_TORQUE] = 0.0
        self.ms[motor, L.MS_OMEGA_W] = self.ms[motor, L.MS_OMEGA_M] / self.mpar[motor, L.MP_GEAR]
        self.ms[motor, L.MS_TWIST] = 0.0

    # --- reading ----------------------------------------------------------------------
    def read(self, name: str) -> np.ndarray | float:
        """A state by name: an array over motors/inverters/links, or a train scalar."""
        place = self._read_at.get(name)
        if place is None:  # (the state arrays are made once, in build.py)
            place = self._read_at[name] = self.state_column(name)
        data, column = place
        return float(data[column]) if data.ndim == 1 else data[:, column].copy()

    def state_column(self, name: str) -> tuple[np.ndarray, int]:
        """The live array and column of a state (for recorders that gather each frame)."""
        if name not in L.READABLE:
            raise KeyError(f"no state named {name!r}; see Plant.names()")
        array, column, _unit, _ = L.READABLE[name]
        return getattr(self, _STATE_ARRAYS[array]), column

    @staticmethod
    def names() -> dict[str, str]:
        """Readable state names with their SI units."""
        return {name: spec[2] for name, spec in L.READABLE.items()}

    def flux_linkages(self, motor: int) -> tuple[complex, complex]:
        """Stator and rotor flux linkage space vectors of a motor, V s."""
        return complex(self.mx[motor, L.MX_PSI_S]), complex(self.mx[motor, L.MX_PSI_R])

    def stator_current(self, motor: int) -> complex:
        """Stator current space vector of a motor, A (amplitude invariant)."""
        return self._currents(motor)[0]

    def _currents(self, motor: int) -> tuple[complex, complex]:
        lm = self.ms[motor, L.MS_LM]
        ps, pr = self.flux_linkages(motor)
        return currents(ps, pr, self.mpar[motor, L.MP_LLS] + lm,
                        self.mpar[motor, L.MP_LLR] + lm, lm)

    def energy_from_source(self) -> float:
        """Net energy the catenary EMF delivered since the start, J (cheap to call)."""
        return float(self.ss[L.SS_E_SOURCE])

    def energy(self) -> EnergyAccount:
        """Energy bookkeeping since the start, for balance checks and reports."""
        return energy_account(self)
