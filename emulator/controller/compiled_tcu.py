"""The reference controller with its period compiled (period_kernel.py, period_parts.py).

``CompiledController`` is a ``ReferenceController``: the same configuration, the same
classes built from it (which give the constants and name the parts), the same telegrams.
Its state lives in arrays and each period is one call into the kernel (the Python parts
give their constants when it is built; of their later changes only
``adhesion.enabled`` acts, read each period: tests switch it); the plain-Python
``ReferenceController.step`` stays the reference it is compared with, bit for bit
(tests/controller/test_compiled_controller.py). The rig and ``railrig controller`` run
this one.
"""

from __future__ import annotations

import math
from collections import Counter

import msgpack
import numba as nb
import numpy as np

from emulator.kernel_cache import WITHOUT_RUNTIME, entry_point
from emulator.link import msgpack_array

from . import inverter_guard as guard
from . import period_kernel as pk
from . import period_parts as pp
from . import ride_through as rt
from . import tcu as ref
from .config import ControllerConfig
from .effort import (
    BRAKE_FADE_FROM_MPS,
    BRAKE_FADE_TO_MPS,
    BRAKE_RESUME_MPS,
    FEEDFORWARD_EFFICIENCY,
    GEAR_EFFICIENCY,
    OVERLOAD,
    POWER_OVERLOAD,
    ROLL_BACK_M,
)
from .speed_plausibility import SENSOR_JUMP


def _state_attribute(index: int, whole: bool = False) -> property:
    """An attribute of ReferenceController that the compiled period keeps in its train
    state g (index pp.G_*): read from there, so that it is always the last period's.
    Set, it is written there (the base class's __init__ sets it before g exists: its
    zeros are g's own start)."""
    def get(self):
        return int(self._g[index]) if whole else self._g[index]

    def put(self, value) -> None:
        g = self.__dict__.get("_g")
        if g is not None:
            g[index] = value

    return property(get, put)


class CompiledController(ref.ReferenceController):
    """The reference controller, one compiled call a period."""

    def __init__(self, cfg: ControllerConfig, signal_map: dict) -> None:
        super().__init__(cfg, signal_map)
        self._m_scale = np.array(self.m_scale, dtype=float)
        self._c_inv = np.array(self._c_inv_scale, dtype=float)
        self._y = np.zeros(len(self.m_scale))
        self._commands = np.zeros(len(self.c_names))
        self._counts = np.zeros(pp.N_EVENT_CODES, dtype=np.int64)
        self._recent = np.zeros(len(self._recent))
        self._g = self._train_state()
        self._k = self._constants()
        self._mot, self._inv, self._lnk = self._motor_rows(), self._inverter_rows(), \
            self._link_rows()
        self._u_applied = np.zeros(max(len(cfg.line_converter_names), 1))
        # the motor controls' state and constants, one row per inverter: the classes'
        # own arrays become views of these rows, so they still read by name
        self._sc_state = np.array([c.state for c in self.scalar])
        self._sc_consts = np.array([c.consts for c in self.scalar])
        for c, row in zip(self.scalar, self._sc_state, strict=True):
            c.state = row
        self._circuit = self.scalar[0].circuit
        self._curve_i, self._curve_psi = self.scalar[0].curve.i, self.scalar[0].curve.psi
        if self.vector is not None:
            self._vc_state = np.array([c.state for c in self.vector])
            self._vc_consts = np.array([c.consts for c in self.vector])
            for c, row in zip(self.vector, self._vc_state, strict=True):
                c.state = row
        else:  # unused; the kernel takes arrays of the right kind
            self._vc_state = np.zeros((len(self.scalar), 1))
            self._vc_consts = np.zeros((len(self.scalar), 1))
        self._tables = self._index_tables(cfg)
        self._per_motor = np.zeros((3, self.n_motors))  # the period's scratch rows
        self._per_link = np.zeros((3, len(self._lnk)))
        # the telegrams' compiled codec (msgpack_array.py) and its buffers
        self._head = np.zeros(6, dtype=np.int64)
        self._reply_head = np.zeros(6, dtype=np.int64)
        self._reply_head[0] = self.version
        self._reply_head[5] = self.map_digest
        self._reply_items = memoryview(self._reply_head)  # (an item as a Python int)
        self._answer_plain = None  # _answer_plain, bound at the first answer
        self._scratch = np.zeros(1, dtype=np.uint64)
        self._wire = np.zeros(msgpack_array.buffer_size(len(self.c_names)), dtype=np.uint8)
        self._wire_bytes = memoryview(self._wire)  # (its slice's bytes: half numpy's cost)
        x, xi, xm, xl, xc = self._tables
        #: the period's arrays after (y, flags, period_s, out), in period_kernel.period's order
        self._period_arrays = (self._g, self._k, self._counts, self._recent, self._mot,
                               self._inv, self._lnk, self._u_applied, self._sc_state,
                               self._sc_consts, self._circuit, self._vc_state,
                               self._vc_consts, self._curve_i, self._curve_psi, x, xi, xm,
                               xl, xc, self._per_motor, self._per_link)
        self._warm_up()

    def _warm_up(self) -> None:
        """Compile (first start) or load the kernels now, not at the first telegram,
        where a real-time run would wait for them: one answer to a telegram of zeros,
        then the state put back as it was."""
        arrays = (self._g, self._counts, self._recent, self._mot, self._inv, self._lnk,
                  self._u_applied, self._sc_state, self._vc_state, self._commands)
        saved = [a.copy() for a in arrays]
        self.answer(msgpack.packb([self.version, 0, 0, round(self.T * 1e6), 0, 0,
                                   *([0] * len(self.m_scale))]))
        self._last_seq, self._last_reply = -1, b""
        for a, before in zip(arrays, saved, strict=True):
            a[...] = before
        self.events = Counter()
        self.t, self.event, self.effort_n = 0.0, 0, 0.0
        self.achieved_n = self.available_n = 0.0

    # --- the arrays, from the classes the base built -----------------------------------
    def _train_state(self) -> np.ndarray:
        g = np.zeros(pp.N_G)
        g[pp.G_LINE_RMS_F] = self.line_rms_f
        pll = self.pll
        g[pp.G_PLL_W], g[pp.G_PLL_INTEGRAL] = pll.w, pll._integral
        g[pp.G_ADH_ENABLED] = float(self.adhesion.enabled)
        return g

    def _constants(self) -> np.ndarray:
        cfg, k = self.cfg, np.zeros(pp.N_K)
        if guard.HARDWARE_TRIPS_TO_ISOLATE > pp.TRIP_SLOTS:
            raise ValueError(f"the kernel keeps {pp.TRIP_SLOTS} hardware trips an inverter")
        k[pp.K_PERIOD], k[pp.K_LINE_SIDE] = cfg.period_s, float(cfg.line_side)
        k[pp.K_VECTOR] = float(self.vector is not None)
        k[pp.K_LINE_NOMINAL] = cfg.line_nominal_v
        k[pp.K_U_MIN2], k[pp.K_U_MIN1] = cfg.line_u_min2_v, cfg.line_u_min1_v
        k[pp.K_U_MAX1], k[pp.K_U_MAX2] = cfg.line_u_max1_v, cfg.line_u_max2_v
        k[pp.K_TRANSFORMER_RATIO] = cfg.transformer_ratio
        k[pp.K_LINK_NOMINAL] = cfg.link_nominal_v
        k[pp.K_P_CHOP] = 0.8 * (cfg.link_nominal_v + 200.0) ** 2 / cfg.chopper_ohm
        k[pp.K_MASS], k[pp.K_MAX_SPEED] = cfg.mass_kg, cfg.max_speed_mps
        k[pp.K_WHEEL_R], k[pp.K_GEAR] = cfg.wheel_radius_m, cfg.gear_ratio
        k[pp.K_N_MOTORS] = self.n_motors
        k[pp.K_T_MAX] = OVERLOAD * cfg.rated_torque_nm
        k[pp.K_P_MAX] = POWER_OVERLOAD * cfg.rated_power_w
        k[pp.K_NATURAL_MPS] = cfg.natural_from_mps
        k[pp.K_GEAR_EFFICIENCY] = GEAR_EFFICIENCY
        k[pp.K_FEEDFORWARD_EFFICIENCY] = FEEDFORWARD_EFFICIENCY
        k[pp.K_DRIVE_EFFICIENCY], k[pp.K_FLUX_RAMP_S] = ref.DRIVE_EFFICIENCY, ref.FLUX_RAMP_S
        k[pp.K_LOCK_S], k[pp.K_ROTATING_FACTOR] = ref.LOCK_S, ref.ROTATING_FACTOR
        k[pp.K_RESET_S] = guard.HARDWARE_RESET_S
        k[pp.K_TRIPS_TO_ISOLATE] = guard.HARDWARE_TRIPS_TO_ISOLATE
        k[pp.K_TRIP_WINDOW_S] = guard.trip_window_s(self.flux_decay_s)
        k[pp.K_MAGNETISED_MPS], k[pp.K_FLUX_HOLD_S] = ref.MAGNETISED_ABOVE_MPS, ref.FLUX_HOLD_S
        k[pp.K_BRAKE_FADE_FROM], k[pp.K_BRAKE_FADE_TO] = BRAKE_FADE_FROM_MPS, BRAKE_FADE_TO_MPS
        k[pp.K_BRAKE_RESUME] = BRAKE_RESUME_MPS
        k[pp.K_ROLL_BACK] = ROLL_BACK_M
        pll = self.pll
        k[pp.K_PLL_K], k[pp.K_PLL_W_NOM] = pll.k, pll.w_nom
        k[pp.K_PLL_KP], k[pp.K_PLL_KI] = pll.kp, pll.ki
        k[pp.K_PLL_MIN_AMPLITUDE] = pll.min_amplitude
        seq = self.sequence
        k[pp.K_SEQ_CHARGED_V], k[pp.K_SEQ_TIMEOUT_S] = seq.charged_v, seq.timeout_s
        k[pp.K_SEQ_RETRY_S], k[pp.K_SEQ_MAX_RETRIES] = seq.retry_s, seq.max_retries
        adh = self.adhesion
        k[pp.K_ADH_CREEP_LIMIT], k[pp.K_ADH_A_MAX] = adh.creep_limit, adh.a_max
        k[pp.K_ADH_A_MARGIN], k[pp.K_ADH_CUT] = adh.a_margin, adh.cut
        k[pp.K_ADH_REAPPLY] = adh.reapply
        enc = self.encoders[0]
        k[pp.K_RAD_PER_COUNT], k[pp.K_WINDOW], k[pp.K_SHORT] = (enc.rad_per_count,
                                                                enc.window, enc.short)
        k[pp.K_SENSOR_JUMP] = SENSOR_JUMP
        k[pp.K_STOPPED_FLOOR], k[pp.K_STOPPED_PERIODS] = (self.stopped_floor_rad_s,
                                                          self.stopped_periods)
        k[pp.K_LEAKAGE_H] = cfg.secondary_leakage_h
        k[pp.K_LINK_STOP], k[pp.K_LINK_RESTART] = (rt.LINK_STOP_FRACTION,
                                                   rt.LINK_RESTART_FRACTION)
        k[pp.K_FLUX_DECAY_S] = self.flux_decay_s
        k[pp.K_BUFFER_LINK], k[pp.K_BUFFER_POWER] = (rt.BUFFER_LINK_FRACTION,
                                                     rt.BUFFER_POWER_FRACTION)
        k[pp.K_BUFFER_NONE_MPS], k[pp.K_BUFFER_FULL_MPS] = (rt.BUFFER_NONE_MPS,
                                                            rt.BUFFER_FULL_MPS)
        k[pp.K_BUFFER_TORQUE] = rt.BUFFER_TORQUE_FRACTION * cfg.rated_torque_nm
        if self.links:
            link = self.links[0]
            k[pp.K_RAMP_V_PER_S], k[pp.K_DEADBEAT_GAIN] = link.ramp_v_per_s, link.g
            (k[pp.K_NOTCH_B0], k[pp.K_NOTCH_B1], k[pp.K_NOTCH_B2]), (
                k[pp.K_NOTCH_A1], k[pp.K_NOTCH_A2]) = link.notch.b, link.notch.a
        return k

    def _motor_rows(self) -> np.ndarray:
        mot = np.zeros((self.n_motors, pp.M_WINDOW + self.encoders[0].window))
        mot[:, pp.M_OK] = 1.0
        mot[:, pp.M_INVERTER] = [k for k, ms in enumerate(self.motors) for _ in ms]
        return mot

    def _inverter_rows(self) -> np.ndarray:
        cfg = self.cfg
        inv = np.zeros((len(cfg.inverter_names), pp.N_I))
        inv[:, pp.I_DEMANDED_AT] = -math.inf
        inv[:, pp.I_FACTOR] = 1.0
        inv[:, pp.I_LINK] = cfg.inverter_links
        inv[:, pp.I_N_MOTORS] = cfg.n_motors_per_inverter
        inv[:, pp.I_FIRST_MOTOR] = np.cumsum((0, *cfg.n_motors_per_inverter[:-1]))
        inv[:, pp.I_ANGLE_SOURCE] = [(1 << n) - 1 for n in cfg.n_motors_per_inverter]
        return inv

    def _link_rows(self) -> np.ndarray:
        lnk = np.zeros((len(self.cfg.link_names), pp.N_L))
        for row, link, on_link in zip(lnk, self.links, self.inverters_on_link, strict=True):
            row[pp.L_KP], row[pp.L_KI], row[pp.L_I_MAX] = link.kp, link.ki, link.i_max
            row[pp.L_N], row[pp.L_P_RATED], row[pp.L_ON_LINK] = link.n, link.p_rated, on_link
        if not self.links:  # no line side: the links' voltages only
            lnk[:, pp.L_ON_LINK] = self.inverters_on_link
        return lnk

    def _index_tables(self, cfg: ControllerConfig) -> tuple[np.ndarray, ...]:
        """Where every value sits in the telegrams (from the base's lookups)."""
        x = np.zeros(pp.N_X, dtype=np.int64)
        x[[pp.X_MODE, pp.X_DEMAND, pp.X_DIRECTION, pp.X_NEUTRAL, pp.X_REGEN, pp.X_CRUISE]] = (
            self.ix_mode, self.ix_demand, self.ix_direction, self.ix_neutral, self.ix_regen,
            self.ix_cruise)
        x[[pp.X_ACHIEVED_OUT, pp.X_AVAILABLE_OUT, pp.X_STATUS_OUT, pp.X_EVENT_OUT]] = (
            self.ox_achieved, self.ox_available, self.ox_status, self.ox_event)
        xi = np.array([[*self.ix_phase[k], self.ix_gate_fault[k], *self.ox_duty[k],
                        self.ox_gates[k], self.ox_reset[k]]
                       for k in range(len(cfg.inverter_names))], dtype=np.int64)
        xm = np.array(list(zip(self.ix_count, self.ix_temp, strict=True)), dtype=np.int64)
        xl = np.zeros((len(cfg.link_names), pp.N_XL), dtype=np.int64)
        xl[:, pp.XL_VOLTAGE] = self.ix_link_v
        xc = np.zeros((0, pp.N_XC), dtype=np.int64)
        if cfg.line_side:
            x[[pp.X_LINE_V, pp.X_BREAKER, pp.X_LINE_TRIP, pp.X_BREAKER_OUT]] = (
                self.ix_line_v, self.ix_breaker, self.ix_line_trip, self.ox_breaker)
            xl[:, pp.XL_OVERVOLTAGE] = self.ix_ovp
            xl[:, pp.XL_CHOPPER_OUT] = self.ox_chopper
            rows = []
            for link, (isec, mod, gates) in enumerate(zip(self.ix_isec, self.ox_mod,
                                                          self.ox_lc_gates, strict=True)):
                rows += [[link, a, 0, 0, b, c, 0, 0] for a, b, c in zip(isec, mod, gates,
                                                                        strict=True)]
            # the converters in the order of the links, as the contactors' lists are
            order = [k for i in range(len(cfg.link_names))
                     for k, lk in enumerate(cfg.line_converter_links) if lk == i]
            for row, k in zip(rows, order, strict=True):
                row[pp.XC_PRECHARGE], row[pp.XC_LINE] = self.ix_pre[k], self.ix_line[k]
                row[pp.XC_PRECHARGE_OUT], row[pp.XC_LINE_OUT] = self.ox_pre[k], self.ox_line[k]
            xc = np.array(rows, dtype=np.int64).reshape(-1, pp.N_XC)
        return x, xi, xm, xl, xc

    # --- telegrams and the period -------------------------------------------------------
    def answer(self, payload: bytes) -> bytes:
        """The command telegram for a measurement telegram."""
        if type(payload) is not bytes:  # (read as bytes: telegram.TelegramCodec.decode)
            payload = memoryview(payload).tobytes()
        args = (payload, self.adhesion.enabled, self._head, self._y, self._scratch,
                self._m_scale, self._last_seq, self._reply_head, self._c_inv, self._wire,
                self._commands, *self._period_arrays)
        answer_plain = self._answer_plain
        if answer_plain is None:  # for these arrays (kernel_cache.entry_point)
            answer_plain = self._answer_plain = entry_point(_answer_plain, *args)
        n = answer_plain(*args)
        if n == ANSWER_SAID_AGAIN:
            return self._last_reply
        if n == ANSWER_NOT_PLAIN:  # the msgpack package reads it, or says why not
            seq, period_us, flags = self._read_checked(payload, self._y)
            if seq == self._last_seq:
                return self._last_reply
            self._period(self._y, flags, period_us * 1e-6, self._commands)
            self._reply_head[1] = seq
            n = msgpack_array.pack(self._reply_head, self._commands, self._c_inv,
                                   self._wire)
        if n < 0:
            raise ValueError(f"command {self.c_names[-1 - n]} = {self._commands[-1 - n]!r} "
                             "is not finite: no answer")
        self._last_seq, self._last_reply = self._reply_items[1], self._wire_bytes[:n].tobytes()
        return self._last_reply

    def _read_checked(self, payload: bytes, y: np.ndarray) -> tuple[int, int, int]:
        """A telegram the compiled reader left (another type, a length, a value past
        int64, a non-finite float) read through the msgpack package into y (SI units);
        raises TypeError or ValueError for what no board would send, before anything
        reaches the compiled period."""
        m = msgpack.unpackb(payload)
        if not isinstance(m, list) or len(m) < 6:
            raise ValueError("a measurement telegram is a msgpack array of 6 + n numbers")
        seq, period_us, flags = m[1], m[3], m[4]
        for name, value in (("sequence", seq), ("period_us", period_us), ("flags", flags)):
            if type(value) is not int or not 0 <= value < 1 << 63:
                raise TypeError(f"{name} must be an integer 0 .. 2^63 - 1, got {value!r}")
        values = [b * sc for b, sc in zip(m[6:], self.m_scale, strict=True)]
        for v in values:
            if type(v) is not float or not math.isfinite(v):
                raise ValueError(f"measurement {v!r} is not a finite number")
        y[:] = values
        return seq, period_us, flags

    def step(self, y, flags: int, period_s: float, out) -> None:
        """The control laws, compiled: y the measurements in SI units (map order), out
        the commands (lists or arrays)."""
        y_arr = np.asarray(y, dtype=float)
        out_arr = np.zeros(len(self.c_names))
        self._period(y_arr, flags, period_s, out_arr)
        out[:] = out_arr.tolist() if isinstance(out, list) else out_arr

    def _period(self, y: np.ndarray, flags: int, period_s: float, out: np.ndarray) -> None:
        self._g[pp.G_ADH_ENABLED] = 1.0 if self.adhesion.enabled else 0.0  # (tests switch it)
        pk.period(y, flags, period_s, out, *self._period_arrays)

    @property
    def events(self) -> Counter:
        """The events raised so far, by code. The period counts them in its state
        (``_counts``, the total at 0); the Counter is made from the counts when they
        changed since it was last asked for."""
        counts = self._counts
        if counts[0] != self._events_total:
            self._events = Counter({c: int(n) for c, n in enumerate(counts) if n and c})
            self._events_total = int(counts[0])
        return self._events

    @events.setter
    def events(self, value: Counter) -> None:
        """(Set where the counts are zero: the base class's start, the warm-up.)"""
        self._events, self._events_total = value, 0

    t = _state_attribute(pp.G_T)
    event = _state_attribute(pp.G_EVENT, whole=True)
    effort_n = _state_attribute(pp.G_EFFORT)
    achieved_n = _state_attribute(pp.G_ACHIEVED)
    available_n = _state_attribute(pp.G_AVAILABLE)
    rolled_back_m = _state_attribute(pp.G_ROLLED_BACK)

    def clear_events(self) -> None:
        """Forget the events counted so far (the counts and the Counter made of them)."""
        self._counts[:] = 0
        self.events = Counter()


#: _answer_plain's codes beside a reply's length (>= 0) and pack's -1 - i (command i not
#: finite): a telegram the compiled reader left, and a measurement already answered
ANSWER_NOT_PLAIN = -(1 << 40)
ANSWER_SAID_AGAIN = ANSWER_NOT_PLAIN - 1


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _answer_plain(data, adhesion_enabled, head, y, scratch, m_scale, last_seq, reply_head,
                  c_inv, wire, out, g, k, counts, recent, mot, inv, lnk, u_applied,
                  sc_state, sc_consts, circuit, vc_state, vc_consts, curve_i, curve_psi, x,
                  xi, xm, xl, xc, per_motor, per_link):
    """CompiledController.answer in one call, in its plain case: the measurement telegram
    read (msgpack_array.unpack_scaled into head and y), the period (period_kernel.period,
    with adhesion_enabled, the Python part's switch, put into its state; unless head's
    sequence is last_seq: ANSWER_SAID_AGAIN) and the command telegram
    packed into wire (msgpack_array.pack: its length, or -1 - i). ANSWER_NOT_PLAIN,
    nothing run, when the reader leaves the telegram to the msgpack package. (The
    period's arrays are spelled out, as CompiledController._period_arrays holds them:
    taken as ``*period_arrays`` the answer was about 0.5 us slower, replaying 20 s of
    the demo's telegrams three times each way.)"""
    if msgpack_array.unpack_scaled(data, head, y, scratch, m_scale) != 0:
        return ANSWER_NOT_PLAIN
    seq = head[1]
    if seq == last_seq:
        return ANSWER_SAID_AGAIN
    g[pp.G_ADH_ENABLED] = 1.0 if adhesion_enabled else 0.0
    pk.period(y, head[4], head[3] * 1e-6, out, g, k, counts, recent, mot, inv, lnk,
              u_applied, sc_state, sc_consts, circuit, vc_state, vc_consts, curve_i,
              curve_psi, x, xi, xm, xl, xc, per_motor, per_link)
    reply_head[1] = seq
    return msgpack_array.pack(reply_head, out, c_inv, wire)
