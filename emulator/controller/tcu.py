"""The reference traction controller: one measurement telegram in, one command out.

It speaks only the wire protocol: it reads values by their names in the signal map and
answers with a command telegram, as a board would. Per period, in this order:
protections -> switch-on sequence -> train demand (modes, jerk limit, tractive-effort
curve) -> adhesion control -> motor control per inverter -> line-converter control per
link (with the motors' power as feedforward) -> train-interface replies.
"""

from __future__ import annotations

import math
from collections import Counter

from emulator.protocol import events

from . import ride_through as rt
from .adhesion import AdhesionControl
from .config import ControllerConfig
from .effort import (
    BRAKE_FADE_FROM_MPS,
    BRAKE_FADE_TO_MPS,
    BRAKE_RESUME_MPS,
    FEEDFORWARD_EFFICIENCY,
    GEAR_EFFICIENCY,
    POWER_OVERLOAD,
    ROLL_BACK_M,
    brake_fade,
    gear_efficiency,
    line_limited_torque,
    link_power,
    motor_torque_limit,
    roll_back,
)
from .encoder import EncoderSpeed
from .inverter_guard import InverterGuards
from .line_converter import LinkControl, chopper_duty, power_limits
from .motor_scalar import ScalarControl
from .motor_vector import VectorControl
from .pll import DEAD_SAMPLES, SogiPll, dead_samples
from .sequence import RUNNING, TRIPPED, SwitchOnSequence
from .signal_positions import SignalPositions
from .speed_plausibility import STOPPED_CREEP_SHARE, STOPPED_S, SpeedPlausibility, added

# motors and inverters at full power, with margin: what the line converters are rated for
DRIVE_EFFICIENCY = 0.85
#: the V/f drives' voltage ramp after releasing the gates (flux build-up): about half a
#: rotor time constant (0.62 s on the Tern). At 0.1 s the stator flux was set far faster
#: than the rotor's could follow, and a start at 12 km/h drew 1.18 kA, a restart there
#: 1.25 kA, past the 1.2 kA software trip (DEVELOPERS.md, "Found by campaigns")
FLUX_RAMP_S = 0.3
LOCK_S = 0.2  # a live line tracked this long before the line converters run
ROTATING_FACTOR = 1.08  # train mass with its rotating parts, of the mass (1.06-1.12 for
# multiple units: from memory, REFERENCES.md)
MAGNETISED_ABOVE_MPS = 1.0  # in a driving mode, the motors stay fluxed above this speed
FLUX_HOLD_S = 3.0  # ... and as long after the last demand (coasting between brake steps)


class ReferenceController(SignalPositions):
    """Reads telegrams by name, runs the control, writes telegrams by name."""

    def __init__(self, cfg: ControllerConfig, signal_map: dict) -> None:
        self.cfg = cfg
        self.signal_map = signal_map
        self.version = signal_map["protocol_version"]
        self.map_digest = signal_map.get("map_digest", 0)  # sent back: the rig checks it
        self._last_seq, self._last_reply = -1, b""  # a repeated measurement: same answer
        self.m_index = {s["name"]: i for i, s in enumerate(signal_map["measurements"])}
        self.m_scale = [s["scale"] for s in signal_map["measurements"]]
        self.c_names = [s["name"] for s in signal_map["commands"]]
        self.c_scale = [s["scale"] for s in signal_map["commands"]]
        self._c_inv_scale = [1.0 / sc for sc in self.c_scale]
        self._out = [0.0] * len(self.c_names)
        T = cfg.period_s
        self.T = T
        n_inv = len(cfg.inverter_names)
        self.motors = [[f"{inv}.m{j + 1}" for j in range(n)]
                       for inv, n in zip(cfg.inverter_names, cfg.n_motors_per_inverter,
                                         strict=True)]
        axle_inverter = [k for k, ms in enumerate(self.motors) for _ in ms]
        self.scalar = [ScalarControl(cfg, len(ms)) for ms in self.motors]
        self.vector = ([VectorControl(cfg, len(ms)) for ms in self.motors]
                       if cfg.motor_control == "vector" else None)
        self.adhesion = AdhesionControl(T, axle_inverter, n_inv)
        n_motors = len(axle_inverter)
        self.p_rated_link = [  # the motors' maximum power plus the drive's losses
            POWER_OVERLOAD * cfg.rated_power_w / DRIVE_EFFICIENCY * sum(
                n for n, link in zip(cfg.n_motors_per_inverter, cfg.inverter_links, strict=True)
                if link == i) for i in range(len(cfg.link_names))]
        self.links = [LinkControl(cfg, cfg.n_line_converters_per_link[i], self.p_rated_link[i])
                      for i in range(len(cfg.link_names))]
        self.pll = SogiPll(cfg.line_frequency_hz, T,
                           min_amplitude=0.2 * cfg.line_nominal_v * math.sqrt(2))
        charged = 0.85 * cfg.secondary_v * math.sqrt(2) if cfg.line_side else 0.0
        self.sequence = SwitchOnSequence(T, charged)
        self.n_motors = n_motors
        self.effort_n = 0.0  # jerk-limited effort reference of the whole train
        self.brake_let_go = False  # the drives let go where the brake's fade ended
        self.rolled_back_m = 0.0  # run against the direction, times it (effort.roll_back)
        self.speed_integral = 0.0
        self.enabled_for = [0.0] * n_inv
        self.line_live_s = 0.0
        self.speed_check = SpeedPlausibility([len(ms) for ms in self.motors])
        # judge_stopped's floor at the motor, rad/s, and its run in periods
        self.stopped_floor_rad_s = (STOPPED_CREEP_SHARE * self.adhesion.creep_limit
                                    * cfg.gear_ratio / cfg.wheel_radius_m)
        self.stopped_periods = max(round(STOPPED_S / T), 1)
        # speed and angle from the encoders' counts, as a board has them
        self.encoders = [EncoderSpeed(cfg.encoder_lines, T) for _ in range(n_motors)]
        self.line_rms_f = cfg.line_nominal_v
        self._recent = [0.0] * max(round(1 / (4 * cfg.line_frequency_hz * T)), 1)
        self._recent_i = 0
        self._dead_samples = 0.0  # samples in a row not like a live line (pll.dead_samples)
        self.inverters_on_link = [max(cfg.inverter_links.count(i), 1)
                                  for i in range(len(cfg.link_names))]
        self.flux_decay_s = rt.flux_decay_s(cfg)
        self.guards = InverterGuards(n_inv, self.flux_decay_s)
        self.demanded_at = [-math.inf] * n_inv
        self.released = [False] * n_inv  # off since the demand ended (see the gates below)
        self.t = 0.0
        self.event = 0
        self._trip_now = False  # a trip was raised in this period
        self.events: Counter = Counter()
        self.achieved_n = 0.0
        self.available_n = 0.0
        self._index_signals(cfg)

    def clear_events(self) -> None:
        """Forget the events counted so far."""
        self.events.clear()

    def _raise(self, code: int) -> None:
        """Report an event; a trip raised in this period is not overwritten by an event
        that is not one (the telegram carries one code a period: a check looking for
        trips must see it)."""
        if code in events.TRIPS:
            self.event, self._trip_now = code, True
        elif not self._trip_now:
            self.event = code
        self.events[code] += 1

    # --- one period ---------------------------------------------------------------------
    def step(self, y: list[float], flags: int, period_s: float, out: list[float]) -> None:
        """The control laws: y the measurements in SI units (map order), out the commands."""
        cfg = self.cfg
        self.t += period_s
        self._trip_now = False
        if flags & 1:
            self._raise(events.LINK_WATCHDOG)
        u_links = [y[i] for i in self.ix_link_v]
        u_link_min = min(u_links)
        mode = round(y[self.ix_mode])
        demand = y[self.ix_demand]
        direction = y[self.ix_direction] or 1.0
        neutral = y[self.ix_neutral] > 0.5
        regen_ok = y[self.ix_regen] > 0.5
        cruise_mps = y[self.ix_cruise] / 3.6

        # --- line side: PLL, protections, sequence ----------------------------------
        line_rms = regen_rms = cfg.line_nominal_v
        theta = 0.0
        if cfg.line_side:
            theta = self.pll.update(y[self.ix_line_v])
            # the power limits follow the line voltage through a 0.2 s lag: on a weak or
            # non-receptive line the voltage answers the power within the same period,
            # and an unfiltered limit would chase it into a limit cycle
            self.line_rms_f += (self.pll.amplitude / math.sqrt(2) - self.line_rms_f) * min(
                period_s / 0.2, 1.0)
            line_rms = self.line_rms_f
            # regeneration is cut at once when the voltage rises and given back at the
            # filter's pace (no limit cycle, and no overshoot past U_max2 while the filter
            # catches up). A peak hold of the amplitude (releasing at the filter's pace)
            # was tried: it held the SOGI amplitude's ripple peaks, cut the regeneration
            # below what the chopper could take, and the link tripped on overvoltage
            regen_rms = max(self.line_rms_f, self.pll.amplitude / math.sqrt(2))
            if any(y[i] > 0.5 for i in self.ix_ovp):
                self._raise(events.LINK_OVERVOLTAGE)
                self.sequence.trip(events.LINK_OVERVOLTAGE)
            if y[self.ix_line_trip] > 0.5:  # opening the breaker acknowledges the trip
                self._raise(events.LINE_OVERCURRENT)
                self.sequence.trip(events.LINE_OVERCURRENT)
            pre = all(y[i] > 0.5 for i in self.ix_pre)
            line = all(y[i] > 0.5 for i in self.ix_line)
            # release the line converters only after the PLL has tracked a live line for
            # LOCK_S (after a neutral section or an interruption its phase is stale)
            peak = cfg.line_nominal_v * math.sqrt(2)
            # live down to U_min2, and the PLL locked to it (pll.dead_samples): a dead line
            # is seen within 5 ms at 50 Hz and 14 ms at 16.7 Hz at worst, far sooner
            # than the PLL's amplitude falls
            self._recent[self._recent_i] = abs(y[self.ix_line_v])
            self._recent_i = (self._recent_i + 1) % len(self._recent)
            self._dead_samples = dead_samples(y[self.ix_line_v], theta, self.pll.amplitude,
                                              max(self._recent), peak,
                                              cfg.line_u_min2_v * math.sqrt(2),
                                              self._dead_samples)
            live = self._dead_samples < DEAD_SAMPLES
            self.line_live_s = self.line_live_s + period_s if live else 0.0
            was_tripped = self.sequence.state == TRIPPED
            sw = self.sequence.step(y[self.ix_breaker] > 0.5, pre, line, u_link_min, neutral,
                                    enabled=True, line_locked=self.line_live_s >= LOCK_S)
            if self.sequence.state == TRIPPED and not was_tripped:  # its own timeout: a
                self._raise(events.SEQUENCE_TIMEOUT)  # trip the checks must see
            running = self.sequence.state == RUNNING
            out[self.ox_breaker] = float(sw.breaker)
            for i in self.ox_pre:
                out[i] = float(sw.precharge)
            for i in self.ox_line:
                out[i] = float(sw.line_contactor)
        else:
            running = True

        # --- train speed, effort demand, limits ---------------------------------------
        r, gear = cfg.wheel_radius_m, cfg.gear_ratio
        for enc, i in zip(self.encoders, self.ix_count, strict=True):
            enc.update(y[i])
        if self.speed_check.judge([e.speed_raw for e in self.encoders]):
            self._raise(events.SPEED_SENSOR_FAULT)
        if self.speed_check.judge_stopped([e.counts[-1] for e in self.encoders],
                                          [e.speed for e in self.encoders],
                                          self.effort_n > 0.0, self.stopped_floor_rad_s,
                                          self.stopped_periods):
            self._raise(events.SPEED_SENSOR_FAULT)
        speeds = self.speed_check.fill([e.speed for e in self.encoders])
        k_wheel = r / gear
        # the adhesion control watches the wheels with the shorter window (2 ms less lag,
        # 0.16 m/s resolution at the rail), the rest uses the smoother one
        quick = self.speed_check.fill([e.speed_short for e in self.encoders])
        wheel_mps = [w * k_wheel for w in quick]
        v = added(wheel_mps) / len(wheel_mps)
        self.rolled_back_m, rolled = roll_back(self.rolled_back_m, direction, v, period_s,
                                               ROLL_BACK_M)
        if rolled:
            self._raise(events.ROLL_BACK)
        f_max = self.n_motors * motor_torque_limit(cfg, abs(v)) * gear * GEAR_EFFICIENCY / r
        # the effort the drives can give now (what a brake manager must make up is not)
        self.available_n = (f_max * self.guards.ready_share(self.t, cfg.n_motors_per_inverter)
                            if running else 0.0)
        if mode == 1:
            target = max(demand, 0.0) * f_max
        elif mode == 2:
            err = cruise_mps - abs(v)
            kp = cfg.mass_kg * 0.5  # N per m/s: about 2 s to close the gap
            self.speed_integral = min(max(self.speed_integral + kp * 0.1 * err * period_s,
                                          -f_max), f_max)
            target = min(max(kp * err + self.speed_integral, -f_max), f_max)
        elif mode == 4:
            target = -abs(demand) * f_max
        else:
            target = 0.0
            self.speed_integral = 0.0
        if abs(v) > 1.05 * cfg.max_speed_mps and target > 0:
            self._raise(events.OVERSPEED)
            target = 0.0
        hottest = max(y[i] for i in self.ix_temp)
        derate = min(max((180.0 - hottest) / 20.0, 0.0), 1.0)  # 160 -> 180 degC
        if derate < 1.0:
            self._raise(events.MOTOR_TEMPERATURE_DERATING if derate > 0
                        else events.MOTOR_OVERTEMPERATURE)
        target *= derate
        if not running or (cfg.line_side and neutral):
            target = 0.0
        jerk = f_max / 1.5 * period_s  # full effort in 1.5 s (comfort: common practice)
        self.effort_n += min(max(target - self.effort_n, -jerk), jerk)
        braking = self.effort_n < 0

        # --- adhesion and motor control per inverter ----------------------------------
        if all(e.settled for e in self.encoders):
            # what the train itself can do now: its effort over its mass; without effort
            # the wheels roll with the train, so the reference starts anew from them (a
            # train moved by the track or by gravity keeps a true reference)
            plausible = self.effort_n / (cfg.mass_kg * ROTATING_FACTOR)
            if self.effort_n == 0.0:
                self.adhesion.v_ref = None
            factors = self.adhesion.step(wheel_mps, braking, plausible)
        else:  # until the encoders' windows hold measured speeds there is no creep to judge
            factors = self.adhesion.factor
        torque_motor = (self.effort_n * r
                        / (gear * gear_efficiency(self.effort_n) * self.n_motors))
        if self.effort_n < 0.0:  # the electric brake fades out towards standstill
            share, self.brake_let_go = brake_fade(
                abs(v), direction * v >= 0.0, self.brake_let_go, BRAKE_FADE_FROM_MPS,
                BRAKE_FADE_TO_MPS, BRAKE_RESUME_MPS)
            torque_motor *= share
        else:
            self.brake_let_go = False
        p_links = [0.0] * len(cfg.link_names)
        achieved = 0.0
        first = 0
        # what each link may draw: the line's power limit (EN 50388, 0 on a dead line)
        # shared by its inverters; a sagging link cuts traction too (ride-through)
        line_live = not cfg.line_side or self.line_live_s >= LOCK_S
        limits = [(power_limits(cfg, regen_rms, regen_ok, self.p_rated_link[i])[0],
                   power_limits(cfg, line_rms, regen_ok, self.p_rated_link[i])[1])
                  if line_live else (0.0, 0.0) for i in range(len(cfg.link_names))]
        p_draw = [hi * DRIVE_EFFICIENCY / self.inverters_on_link[i]
                  for i, (_, hi) in enumerate(limits)] if cfg.line_side else None
        # electric braking: what the resistor takes below the trip, plus half of what the
        # line may take back (a non-receptive line takes less than its limit says)
        p_chop = 0.8 * (cfg.link_nominal_v + 200.0) ** 2 / cfg.chopper_ohm
        # (shaft power: the link receives it times the efficiency, so divide by that)
        p_feed = [(p_chop - 0.5 * lo) / FEEDFORWARD_EFFICIENCY / self.inverters_on_link[i]
                  for i, (lo, _) in enumerate(limits)] if cfg.line_side else None
        for k, n_mot in enumerate(cfg.n_motors_per_inverter):
            link = cfg.inverter_links[k]
            u_d = u_links[link]
            ia, ib, ic = (y[i] for i in self.ix_phase[k])
            guards = self.guards
            guards.judge(k, self.t, (ia, ib, ic), y[self.ix_gate_fault[k]], self._raise)
            out[self.ox_reset[k]] = float(guards.resets(k, self.t, period_s))
            if factors[k] < 0.95 and not self._trip_now:
                self.event = events.WHEEL_SLIP
            demanded = mode in (1, 2, 4)
            link_ok = guards.link(k, self.t, u_d, cfg.link_nominal_v, running and demanded,
                                  self._raise)
            # magnetised while a mode asks for effort, and for FLUX_HOLD_S after it at speed
            # (a driver modulating the brake goes to coast and back): rebuilding the flux
            # takes a rotor time constant (~0.6 s) each time
            # once released after the demand, a drive stays off until asked again: the
            # speed near the threshold rings with the drivetrain's torsion (and the
            # encoder's steps), and each restart met the shaft's recoil with a fresh flux
            # model, a current surge and an overcurrent trip at the blend speed.
            # Below that speed too a drive keeps its pulses while its torque ramps out
            # under the jerk limit: blocked at once with the braking torque on, at the
            # scenario driver's blend to the friction brake (1 m/s), the drivetrain's
            # 30 Hz torsion rang the rail force through +-100 kN and pushed the train
            # forward at up to 0.67 m/s^2 (tests/scenario/test_library.py, the stops')
            if demanded:
                self.demanded_at[k] = self.t
                self.released[k] = False
            held = (not self.released[k]
                    and (abs(v) > MAGNETISED_ABOVE_MPS or self.effort_n != 0.0)
                    and self.t - self.demanded_at[k] < FLUX_HOLD_S)
            active = (running and (demanded or held) and self.t >= guards.block_until[k]
                      and link_ok and not self.brake_let_go
                      and (self.effort_n != 0.0 or mode == 2 or abs(v) > MAGNETISED_ABOVE_MPS))
            torque = direction * torque_motor * factors[k]
            motor_speed = added(speeds[first:first + n_mot]) / n_mot
            stator_degc = (added(y[self.ix_temp[a]] for a in range(first, first + n_mot)) / n_mot
                           if self.vector is None else 0.0)  # (V/f: its torque estimate)
            angle = self.speed_check.rotor_angle(
                k, [self.encoders[a].angle for a in range(first, first + n_mot)],
                motor_speed, period_s)
            torque = line_limited_torque(
                torque, motor_speed, n_mot, u_d, cfg.link_nominal_v,
                None if p_draw is None else p_draw[link],
                None if p_feed is None else p_feed[link])
            if cfg.line_side and running and not line_live:  # the train holds the link
                t_buffer = factors[k] * rt.buffer_torque(
                    u_d, cfg.link_nominal_v, v, motor_speed, self.p_rated_link[link],
                    self.inverters_on_link[link] * n_mot, cfg.rated_torque_nm)
                torque = (min(torque, -t_buffer) if motor_speed > 0
                          else max(torque, t_buffer))
            first += n_mot
            duty_ix = self.ox_duty[k]
            if active:
                self.enabled_for[k] += period_s
                if self.vector is not None:
                    ctl = self.vector[k]
                    duties = ctl.step(torque, angle, motor_speed, u_d, (ia, ib, ic))
                    ramp = 1.0  # the flux model builds the flux up itself
                    estimate = ctl.torque_estimate  # from the measured currents and flux
                else:
                    ramp = min(self.enabled_for[k] / FLUX_RAMP_S, 1.0)
                    estimate, duties = self.scalar[k].period(
                        torque, motor_speed, u_d, (ia, ib, ic), angle, stator_degc,
                        learns=ramp >= 1.0 and factors[k] >= 1.0)
                for i, d in zip(duty_ix, duties, strict=True):
                    out[i] = 0.5 + ramp * (d - 0.5)
                # the line converter's feed-forward: the torque the motor control can
                # give now (its limit from the current and the voltage), not the demand; a
                # drive at its voltage limit in braking returns less than asked, and a
                # line converter that takes the demand's power empties the link
                # (a V/f drive's voltage ramp builds its flux: its torque grows about as
                # the ramp squared, and a link fed for the whole torque at a restart at
                # speed rose past its overvoltage trip within milliseconds)
                ctl_k = self.vector[k] if self.vector is not None else self.scalar[k]
                given = math.copysign(min(abs(torque), ctl_k.torque_limit), torque) * (
                    ramp * ramp)
                p_links[link] += given * motor_speed * n_mot
                achieved += estimate * n_mot
            else:
                if (self.vector is None and self.enabled_for[k] > 0.0
                        and abs(v) > MAGNETISED_ABOVE_MPS):
                    guards.stopped_at_speed(k, self.t,
                                            min(self.enabled_for[k] / FLUX_RAMP_S, 1.0))
                self.enabled_for[k] = 0.0
                self.released[k] = not demanded
                if self.vector is not None:
                    self.vector[k].coast()
                for i in duty_ix:
                    out[i] = 0.5
            out[self.ox_gates[k]] = float(active)
        # the effort achieved: torque estimated from the measured currents, not the demand
        self.achieved_n = (achieved * gear * gear_efficiency(achieved * direction) / r
                           * direction)

        # --- line converters ----------------------------------------------------------
        if cfg.line_side:
            if (self.pll.amplitude / math.sqrt(2) < cfg.line_u_min2_v and not neutral
                    and running):
                self._raise(events.LINE_UNDERVOLTAGE)
            u_sec_peak = self.pll.amplitude / cfg.transformer_ratio
            for i, link in enumerate(self.links):
                p_min, p_max = limits[i]  # (0, 0) on a dead line, where they are unused
                # what holds the link may always be drawn, whatever the line's limit for
                # traction (0 at U_min2, EN 50388), so a line between its live floor and
                # U_min2 holds the link: the buffering's allowance at nominal voltage,
                # as a current (scaled with the line's voltage: it falls with it)
                p_max = max(p_max, rt.BUFFER_POWER_FRACTION * self.p_rated_link[i]
                            * line_rms / cfg.line_nominal_v)
                if running and line_live:
                    i_sec = [y[j] for j in self.ix_isec[i]]
                    mods, chopper = link.step(u_links[i], theta, self.pll.w, u_sec_peak, i_sec,
                                              link_power(p_links[i]), p_min, p_max)
                else:
                    link.reset()
                    mods = [0.0] * len(self.ox_mod[i])
                    chopper = chopper_duty(cfg.link_nominal_v, u_links[i])
                for j, mod in zip(self.ox_mod[i], mods, strict=True):
                    out[j] = mod
                for j in self.ox_lc_gates[i]:
                    out[j] = float(running and line_live)
                out[self.ox_chopper[i]] = chopper
        out[self.ox_achieved] = self.achieved_n / 1e3
        out[self.ox_available] = self.available_n / 1e3
        out[self.ox_status] = float(self.sequence.state)
        out[self.ox_event] = float(self.event)
