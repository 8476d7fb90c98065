"""The reference controller's telegrams (a part of tcu.ReferenceController): where each
value it reads and writes sits in them, the measurement's and the command's positions
looked up once by name in the signal map (emulator/protocol/signal_map.py), and the
answer to a measurement telegram."""

from __future__ import annotations

import msgpack

from emulator.protocol.header import CFLAG_REPEAT_REQUEST, H_FLAGS

from .config import ControllerConfig


class SignalPositions:
    """The positions (``ix_*`` in the measurement, ``ox_*`` in the command) of the
    reference controller's values; needs ``m_index`` (name -> position in the
    measurement), ``c_names`` (the command's names in order) and ``motors`` (each
    inverter's motor names). The answer needs the scales, the last reply and ``step``
    (tcu.ReferenceController's)."""

    # --- telegrams ----------------------------------------------------------------------
    def answer(self, payload: bytes) -> bytes:
        """The command telegram for a measurement telegram."""
        m = msgpack.unpackb(payload)
        seq, period_us, flags = m[1], m[3], m[4]
        if seq == self._last_seq:  # said again (the rig lost our answer): not a new period
            return self._last_reply
        y = [b * sc for b, sc in zip(m[6:], self.m_scale, strict=True)]
        out = self._out
        self.step(y, flags, period_us * 1e-6, out)
        wire = [round(v * k) for v, k in zip(out, self._c_inv_scale, strict=True)]
        self._last_seq = seq
        self._last_reply = msgpack.packb([self.version, seq, 0, 0, 0, self.map_digest, *wire])
        return self._last_reply

    def repeat_request(self) -> bytes | None:
        """A telegram asking the rig for the current measurement again (a damaged frame
        came in, lockstep): the last answer with the request bit (its values must be
        valid, they are not applied), or None before the first answer."""
        if not self._last_reply:
            return None
        items = msgpack.unpackb(self._last_reply)
        items[H_FLAGS] = CFLAG_REPEAT_REQUEST
        return msgpack.packb(items)

    def _index_signals(self, cfg: ControllerConfig) -> None:
        """Positions of every value the control reads and writes (looked up once)."""
        mi = self.m_index.__getitem__
        ci = {n: i for i, n in enumerate(self.c_names)}.__getitem__
        self.ix_link_v = [mi(f"{n}.voltage_v") for n in cfg.link_names]
        self.ix_mode, self.ix_demand = mi("train.mode"), mi("train.effort_demand")
        self.ix_direction = mi("train.direction")
        self.ix_neutral = mi("train.neutral_section_ahead")
        self.ix_regen = mi("train.regeneration_allowed")
        self.ix_cruise = mi("train.cruise_speed_kmh")
        self.ix_count = [mi(f"{mo}.encoder_count") for ms in self.motors for mo in ms]
        self.ix_temp = [mi(f"{mo}.stator_temperature_degc") for ms in self.motors for mo in ms]
        self.ix_phase = [[mi(f"{inv}.current_{x}_a") for x in "abc"]
                         for inv in cfg.inverter_names]
        self.ox_duty = [[ci(f"{inv}.duty_{x}") for x in "abc"] for inv in cfg.inverter_names]
        self.ox_gates = [ci(f"{inv}.gates_enabled") for inv in cfg.inverter_names]
        self.ix_gate_fault = [mi(f"{inv}.gate_fault") for inv in cfg.inverter_names]
        self.ox_reset = [ci(f"{inv}.fault_reset") for inv in cfg.inverter_names]
        self.ox_achieved, self.ox_available = ci("tcu.achieved_effort_kn"), ci(
            "tcu.available_effort_kn")
        self.ox_status, self.ox_event = ci("tcu.status"), ci("tcu.event_code")
        if cfg.line_side:
            names = cfg.line_converter_names
            self.ix_line_v, self.ix_breaker = mi("line.voltage_v"), mi("line.breaker_closed")
            self.ix_line_trip = mi("line.overcurrent_trip")
            self.ix_ovp = [mi(f"{n}.overvoltage") for n in cfg.link_names]
            self.ix_pre = [mi(f"{n}.precharge_closed") for n in names]
            self.ix_line = [mi(f"{n}.line_contactor_closed") for n in names]
            self.ox_breaker = ci("line.breaker_close")
            self.ox_pre = [ci(f"{n}.precharge_close") for n in names]
            self.ox_line = [ci(f"{n}.line_contactor_close") for n in names]
            by_link = [[k for k, lk in enumerate(cfg.line_converter_links) if lk == i]
                       for i in range(len(cfg.link_names))]
            self.ix_isec = [[mi(f"{names[k]}.current_a") for k in ks] for ks in by_link]
            self.ox_mod = [[ci(f"{names[k]}.modulation") for k in ks] for ks in by_link]
            self.ox_lc_gates = [[ci(f"{names[k]}.gates_enabled") for k in ks] for ks in by_link]
            self.ox_chopper = [ci(f"{n}.chopper_duty") for n in cfg.link_names]
