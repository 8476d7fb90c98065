"""The compiled reference controller against its plain-Python description on random
measurements, period by period and bit for bit: paths a shipped run seldom or never
takes (the sequence's trips and retries, the watchdog flag, overspeed, motor
temperature, every encoder of an inverter failing, repeated hardware trips, a dead line,
neutral sections) and topologies the shipped trainsets do not have (line converters
interleaved across links, inverters of one and three motors, no line side).

The inputs are random but shaped as a drive gives them (counters that move with a
speed, a sine on the line, switchgear feedback that follows the commands), so the
controller walks through its states; both controllers get the same telegram values."""

from __future__ import annotations

import dataclasses
import math
from collections import Counter

import numpy as np
import pytest

from emulator.controller.compiled_tcu import CompiledController
from emulator.controller.config import config_from_params
from emulator.controller.sequence import TRIPPED
from emulator.profiles.reader import load_trainset
from emulator.protocol import events
from emulator.protocol.signal_map import build_signal_map

from .conftest import TRAINSET
from .twin import Twin


def _interleaved(params):
    """Line converters across the links 1 + 3, inverters of 1, 3, 2 and 2 motors with
    the second on the other link (an invented layout for the index tables)."""
    lcs = params.line_converters
    links = (1, 0, 0, 0)
    lcs = tuple(dataclasses.replace(u, dc_link=k) for u, k in zip(lcs, links, strict=True))
    convs = list(params.converters)
    d = convs[0].wheel_diameters_m[0]
    convs[0] = dataclasses.replace(convs[0], wheel_diameters_m=(d,), axle_positions_m=(),
                                   machine_factors=())
    convs[1] = dataclasses.replace(convs[1], dc_link=1 - convs[1].dc_link,
                                   wheel_diameters_m=(d, d, d), axle_positions_m=(),
                                   machine_factors=())
    return dataclasses.replace(params, line_converters=lcs, converters=tuple(convs))


def _dc_fed(params):
    return dataclasses.replace(params, transformer=None)


class _Drive:
    """Random measurements shaped as a drive gives them."""

    def __init__(self, cfg, signal_map: dict, seed: int, *, line_trip=(3.0, 3.001),
                 breaker_stuck=(0.0, 0.0), quiet_line: bool = False) -> None:
        """line_trip: when the breaker's overcurrent release reads tripped (s, s);
        breaker_stuck: when its feedback stays open whatever it is told; quiet_line: no
        neutral sections or dead line."""
        self.line_trip, self.breaker_stuck, self.quiet_line = (line_trip, breaker_stuck,
                                                               quiet_line)
        self.cfg = cfg
        self.rng = np.random.default_rng(seed)
        self.mi = {s["name"]: i for i, s in enumerate(signal_map["measurements"])}
        self.ci = {s["name"]: i for i, s in enumerate(signal_map["commands"])}
        self.y = np.zeros(len(self.mi))
        self.motors = [f"{inv}.m{j + 1}" for inv, n in zip(
            cfg.inverter_names, cfg.n_motors_per_inverter, strict=True) for j in range(n)]
        self.speed = dict.fromkeys(self.motors, 0.0)
        self.count = {m: float(self.rng.integers(0, 65536)) for m in self.motors}
        self.hold = self.dead = self.neutral = 0

    def _set(self, name: str, value: float) -> None:
        if name in self.mi:
            self.y[self.mi[name]] = value

    def measurements(self, t: float, commands: list[float]) -> np.ndarray:
        rng, cfg, put = self.rng, self.cfg, self._set
        if self.hold <= 0:  # the driver: a mode and a demand for a while
            self.hold = int(rng.integers(50, 2000))
            put("train.mode", float(rng.choice([0, 1, 1, 2, 3, 4, 4])))
            put("train.effort_demand", rng.uniform(-1, 1))
            put("train.direction", float(rng.choice([1.0, 1.0, -1.0, 0.0])))
            put("train.cruise_speed_kmh", rng.uniform(0, 170))
            put("train.regeneration_allowed", float(rng.random() < 0.8))
        self.hold -= 1
        if 5.0 <= t < 5.5:  # asks for effort past the top speed: overspeed
            put("train.mode", 1.0)
            put("train.effort_demand", 0.8)
        if self.neutral <= 0 and rng.random() < 0.0005 and not self.quiet_line:
            self.neutral = int(rng.integers(100, 1500))
        self.neutral -= 1
        put("train.neutral_section_ahead", float(self.neutral > 0))
        if self.dead <= 0 and rng.random() < 0.0008 and not self.quiet_line:
            self.dead = int(rng.integers(5, 600))
        self.dead -= 1
        amplitude = cfg.line_nominal_v * math.sqrt(2) * (1.0 + 0.3 * math.sin(0.3 * t))
        live = self.dead <= 0
        f_line = 1.004 * cfg.line_frequency_hz  # a little off nominal
        put("line.voltage_v", round(amplitude * math.sin(2 * math.pi * f_line * t)) * live)
        if "line.breaker_closed" in self.mi:  # the switchgear follows its commands
            stuck = self.breaker_stuck[0] <= t < self.breaker_stuck[1]
            put("line.breaker_closed", 0.0 if stuck else commands[self.ci["line.breaker_close"]])
            put("line.overcurrent_trip", float(self.line_trip[0] <= t < self.line_trip[1]))
            for u in cfg.line_converter_names:
                put(f"{u}.precharge_closed", commands[self.ci[f"{u}.precharge_close"]])
                put(f"{u}.line_contactor_closed",
                    commands[self.ci[f"{u}.line_contactor_close"]])
                put(f"{u}.current_a", round(rng.normal(0, 300), 1))
            for lk in cfg.link_names:
                put(f"{lk}.overvoltage", float(6.0 <= t < 6.001))  # once
        for lk in cfg.link_names:
            base = cfg.link_nominal_v if rng.random() > 0.003 else rng.uniform(0, 2300)
            put(f"{lk}.voltage_v", round(base + rng.normal(0, 40), 1))
        for n, inv in enumerate(cfg.inverter_names):
            # the first inverter's drivers trip three times (isolated), the others' once
            pulses = (1.0, 1.5, 2.0) if n == 0 else (2.5 + 0.5 * n,)
            trip = any(p <= t < p + 0.05 for p in pulses)
            put(f"{inv}.gate_fault", 8 * trip + int(rng.random() < 0.01))
            spread = 1400 if rng.random() < 0.001 else 300
            for x in "abc":
                put(f"{inv}.current_{x}_a", round(rng.normal(0, spread), 1))
        w_top = 1.2 * cfg.max_speed_mps * cfg.gear_ratio / cfg.wheel_radius_m
        for j, m in enumerate(self.motors):
            # up past the top speed by 6 s, then down; the encoders of the second
            # inverter's motors all jump at 7 s (failed: the fallback angle)
            w = w_top * (t / 6.0 if t < 6.0 else max(2.0 - t / 6.0, 0.0))
            self.speed[m] = w + rng.normal(0.0, 0.5)
            second = cfg.n_motors_per_inverter[0] <= j < sum(cfg.n_motors_per_inverter[:2])
            jump = 3000 if second and 7.0 <= t < 7.001 else 0
            self.count[m] = (self.count[m] + self.speed[m] * cfg.period_s * 4
                             * cfg.encoder_lines / (2 * math.pi) + jump) % 65536
            put(f"{m}.encoder_count", math.floor(self.count[m]))
            hot = rng.uniform(150, 200) if rng.random() < 0.002 else 60.0
            put(f"{m}.stator_temperature_degc", hot)
        return self.y


def _twin_and_drive(params, cfg, seed: int, **drive_kw) -> tuple[Twin, _Drive]:
    """The compiled controller for cfg with its plain-Python twin installed (tests/
    controller/twin.py: both take every period, compared bit for bit), and a drive."""
    signal_map = build_signal_map(params).as_dict()
    twin = Twin()
    twin.install(CompiledController(cfg, signal_map))
    return twin, _Drive(cfg, signal_map, seed, **drive_kw)


@pytest.mark.parametrize("control", ["scalar", "vector"])
@pytest.mark.parametrize("layout", ["shipped", "shipped-15kv", "interleaved", "dc-fed"])
def test_random_drive_gives_the_same_commands(layout: str, control: str) -> None:
    if layout == "shipped-15kv":  # 16.7 Hz: another notch, PLL and dead-line window
        params = load_trainset(TRAINSET.with_name("tern-15kv.toml"))
    else:
        params = load_trainset(TRAINSET)
        params = {"shipped": params, "interleaved": _interleaved(params),
                  "dc-fed": _dc_fed(params)}[layout]
    cfg = dataclasses.replace(config_from_params(params), motor_control=control)
    twin, drive = _twin_and_drive(params, cfg, seed=7)
    out = np.zeros(len(drive.ci))
    states = Counter()
    for k in range(10000):
        y = drive.measurements(k * cfg.period_s, out)
        twin.compiled._period(y, int(drive.rng.random() < 0.002), cfg.period_s, out)
        states[twin.plain.sequence.state] += 1
        states["active"] += any(out[drive.ci[f"{i}.gates_enabled"]] > 0.5
                                for i in cfg.inverter_names)
    twin.assert_identical(at_least=10000)
    plain = twin.plain
    # the run went where it was meant to: motors driven, trips and faults on the way
    assert states["active"] > 200, states  # (2 % of the periods: the active paths ran;
    # a V/f drive that stops at speed then waits 1.9 s for its flux, so fewer than a
    # vector drive's)
    if control == "scalar" and layout == "dc-fed":  # the V/f slip trim learned, the same
        assert any(c.slip_trim != 0.0 for c in twin.plain.scalar)  # in both twins
    assert {11, 30, 41, 50, 80} <= set(plain.events), plain.events
    assert any(math.isinf(b) for b in plain.guards.block_until)  # an inverter isolated
    if cfg.line_side:
        assert {20, 61} <= set(plain.events) and states[5] > 0, (plain.events, states)
        assert states[4] > 500 and states[6] > 0, states  # running, neutral section


def test_the_sequence_times_out_retries_and_gives_up() -> None:
    """Breaker feedback that stays open: the sequence times out (5 s) and retries (2 s
    later). Then an overcurrent release that reads tripped at every re-close: after
    max_retries retries in a row the sequence stays tripped. Compared period by period."""
    params = load_trainset(TRAINSET)
    cfg = config_from_params(params)
    twin, drive = _twin_and_drive(params, cfg, seed=11, breaker_stuck=(0.0, 6.0),
                                  line_trip=(9.0, 30.0), quiet_line=True)
    out = np.zeros(len(drive.ci))
    reasons = set()
    timeout_codes = []  # periods whose event code on the wire is the sequence timeout
    for k in range(18000):
        y = drive.measurements(k * cfg.period_s, out)
        twin.compiled._period(y, 0, cfg.period_s, out)
        reasons.add(twin.plain.sequence.trip_reason)
        if out[drive.ci["tcu.event_code"]] == events.SEQUENCE_TIMEOUT:
            timeout_codes.append(k)
    twin.assert_identical(at_least=18000)
    seq = twin.plain.sequence
    assert {1, 61} <= reasons, reasons  # the timeout, then the overcurrent release
    # the timeout is a trip a scenario's checks must see (not_raised = "trip" reads the
    # event codes): counted once, and on the wire (the last event's code) from the period
    # it tripped, 5 s after the first close
    assert twin.plain.events[events.SEQUENCE_TIMEOUT] == 1
    assert timeout_codes and 5.0 <= timeout_codes[0] * cfg.period_s <= 5.2, timeout_codes
    assert seq.state == TRIPPED and seq.retries == seq.max_retries + 1, (seq.state,
                                                                         seq.retries)
    assert out[drive.ci["line.breaker_close"]] == 0.0  # and stays open


def test_events_cleared_then_raised_again_are_counted_as_the_plain_python_counts() -> None:
    """The compiled controller's events are made from its counts when read: after
    clear_events, the same events raised again (as many as were read before the clear:
    the characteristic's measurement clears at every point) are there, as in the plain
    controller, and a clear with nothing raised after it leaves none."""
    params = load_trainset(TRAINSET)
    cfg = config_from_params(params)
    twin = Twin()
    twin.install(CompiledController(cfg, build_signal_map(params).as_dict()))
    y = np.zeros(len(twin.compiled.m_scale))
    out = np.zeros(len(twin.compiled.c_names))
    for _ in range(3):  # (not read between the clear and the next period: a read
        # there would make the Counter anew whatever the clear left)
        twin.compiled._period(y, 1, cfg.period_s, out)  # the link watchdog's flag
        assert twin.compiled.events == twin.plain.events
        assert twin.compiled.events[events.LINK_WATCHDOG] >= 1, twin.compiled.events
        twin.compiled.clear_events()
        twin.plain.clear_events()
    assert twin.compiled.events == twin.plain.events == Counter()
    twin.assert_identical(at_least=3)
