"""The signal map: what each telegram carries, in which order, unit and scaling.

Built from a trainset profile, so that adding a motor or an inverter to the profile
adds its signals. Every value travels in wire units: physical = wire x scale. The rig
sends integers (cheap for a board to decode); a controller may send integers or floats.
``railrig protocol --profile P`` prints this map for board developers.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import asdict, dataclass
from typing import Any

from emulator.plant.params import TrainsetParams
from emulator.protocol.header import CONTROLLER_FLAGS, HEADER, PROTOCOL_VERSION, RIG_FLAGS

# the header, its flags and rules live in header.py; the flags' meanings by value
FLAG_NAMES = {f.value: f.meaning for f in RIG_FLAGS}

# train modes (train.mode)
MODES = {0: "off", 1: "accelerate", 2: "cruise", 3: "coast", 4: "brake"}


@dataclass(frozen=True)
class Signal:
    """One value of a telegram."""

    name: str
    unit: str
    scale: float  # physical value = wire value x scale
    lo: float  # physical range accepted (commands) or produced (measurements)
    hi: float
    kind: str  # analog, count, flag, enum
    description: str


@dataclass(frozen=True)
class SignalMap:
    """Both directions of the protocol for one trainset."""

    version: int
    measurements: tuple[Signal, ...]  # rig -> controller, after the header
    commands: tuple[Signal, ...]  # controller -> rig, after the header
    #: the trainset's constants a controller is built with (the board kit's header
    #: exports them): name -> number or tuple of numbers, SI units as the names say
    constants: tuple[tuple[str, Any], ...] = ()

    def index(self, direction: str, name: str) -> int:
        """Position of a signal in the body (0 = first after the header)."""
        table = self.measurements if direction == "measurement" else self.commands
        for i, s in enumerate(table):
            if s.name == name:
                return i
        raise KeyError(f"no {direction} signal {name!r}")

    def digest(self) -> int:
        """A 32-bit digest of what a controller is built for: the version, the header,
        each signal's name, unit, scale, range and kind in order (not the descriptions:
        a reworded one leaves the digest), and the trainset's constants (a board built
        for 25 kV 50 Hz differs from one for 15 kV 16.7 Hz with the same layout). The
        first four bytes of SHA-256 over that as compact JSON."""
        layout = [self.version, list(HEADER)] + [
            [[s.name, s.unit, s.scale, s.lo, s.hi, s.kind] for s in table]
            for table in (self.measurements, self.commands)] + [
            [[name, list(v) if isinstance(v, tuple) else v] for name, v in self.constants]]
        text = json.dumps(layout, separators=(",", ":"))
        return int.from_bytes(hashlib.sha256(text.encode()).digest()[:4], "big")

    def as_dict(self) -> dict:
        """JSON-ready form (what ``railrig protocol --json`` prints)."""
        return {
            "protocol_version": self.version,
            "header": list(HEADER),
            "map_digest": self.digest(),
            "constants": {name: list(v) if isinstance(v, tuple) else v
                          for name, v in self.constants},
            "flags": {str(bit): text for bit, text in FLAG_NAMES.items()},
            "controller_flags": {str(f.value): f.meaning for f in CONTROLLER_FLAGS},
            "measurements": [asdict(s) for s in self.measurements],
            "commands": [asdict(s) for s in self.commands],
        }


def _analog(name, unit, scale, lo, hi, description) -> Signal:
    return Signal(name, unit, scale, lo, hi, "analog", description)


def build_signal_map(params: TrainsetParams) -> SignalMap:
    """The signal map of a trainset: per inverter, link, motor, and the train interface."""
    meas: list[Signal] = []
    cmd: list[Signal] = []
    line_side = params.transformer is not None
    if line_side:
        meas += [
            _analog("line.voltage_v", "V", 1.0, -45000.0, 45000.0,
                    "pantograph voltage, instantaneous (sampled at the frame start)"),
            _analog("line.current_a", "A", 0.01, -2000.0, 2000.0,
                    "pantograph (primary) current, instantaneous"),
            Signal("line.breaker_closed", "1", 1.0, 0, 1, "flag", "main breaker feedback"),
            Signal("line.overcurrent_trip", "1", 1.0, 0, 1, "flag",
                   "the breaker's hardware overcurrent release has opened it; it stays open "
                   "until line.breaker_close is sent 0"),
        ]
        for unit in params.line_converters:
            meas += [
                _analog(f"{unit.name}.current_a", "A", 0.1, -3000.0, 3000.0,
                        f"secondary (AC) current of {unit.name}"),
                Signal(f"{unit.name}.precharge_closed", "1", 1.0, 0, 1, "flag",
                       "precharge contactor feedback"),
                Signal(f"{unit.name}.line_contactor_closed", "1", 1.0, 0, 1, "flag",
                       "line contactor feedback"),
            ]
    for link in params.dc_links:
        meas.append(_analog(f"{link.name}.voltage_v", "V", 0.1, 0.0, 6000.0,
                            f"DC-link voltage of {link.name}"))
        if line_side:
            meas.append(Signal(f"{link.name}.overvoltage", "1", 1.0, 0, 1, "flag",
                               "overvoltage protection flag"))
    for conv in params.converters:
        for phase in "abc":
            meas.append(_analog(f"{conv.name}.current_{phase}_a", "A", 0.1, -3000.0, 3000.0,
                                f"phase {phase} current of {conv.name} (sum of its motors)"))
        meas.append(_analog(f"{conv.name}.heatsink_temperature_degc", "degC", 0.1, -50.0,
                            250.0, f"heatsink temperature of {conv.name}"))
        meas.append(Signal(f"{conv.name}.gate_fault", "1", 1.0, 0, 15, "flag",
                           "gate-driver fault flags: bits 0-2 leg a, b, c; bit 3 the "
                           "hardware overcurrent/desaturation trip, latched (gates blocked) "
                           "until fault_reset"))
        for j in range(len(conv.wheel_diameters_m)):
            motor = f"{conv.name}.m{j + 1}"
            meas.append(Signal(f"{motor}.encoder_count", "count", 1.0, 0, 65535, "count",
                               "encoder edge counter (4 per line), unsigned 16 bit, wraps"))
            meas.append(Signal(f"{motor}.encoder_edge_time_us", "us", 1.0, 0, 65535, "count",
                               "time of the encoder's last edge on a free-running 1 MHz "
                               "timer, unsigned 16 bit, wraps (every 65.536 ms); kept "
                               "while no edge comes: for the period method"))
            meas.append(_analog(f"{motor}.speed_rad_s", "rad/s", 0.01, -1000.0, 1000.0,
                                "rotor speed from the speed sensor"))
            meas.append(_analog(f"{motor}.stator_temperature_degc", "degC", 0.1, -50.0, 250.0,
                                "stator winding temperature sensor"))
            if getattr(params.sensors, "shaft_torque", None) is not None:
                meas.append(_analog(f"{motor}.shaft_torque_nm", "N m", 1.0, -30000.0,
                                    30000.0, "motor shaft torque transducer (fitted in "
                                    "the profile's [sensors.shaft_torque])"))
    meas += [
        _analog("train.effort_demand", "1", 0.001, -1.0, 1.0,
                "driver's effort demand, fraction of maximum (negative: brake)"),
        Signal("train.direction", "1", 1.0, -1, 1, "enum", "-1 reverse, 0 neutral, 1 forward"),
        Signal("train.mode", "1", 1.0, 0, 4, "enum",
               "0 off, 1 accelerate, 2 cruise, 3 coast, 4 brake"),
        _analog("train.cruise_speed_kmh", "km/h", 0.1, 0.0, 400.0, "speed to hold in cruise"),
        Signal("train.neutral_section_ahead", "1", 1.0, 0, 1, "flag",
               "a neutral section is ahead: reduce and cut traction"),
        Signal("train.regeneration_allowed", "1", 1.0, 0, 1, "flag",
               "electric braking may feed energy back"),
        _analog("train.current_limit_a", "A", 1.0, 0.0, 5000.0,
                "line current limit from the train"),
        Signal("train.emergency_loop_closed", "1", 1.0, 0, 1, "flag",
               "1 while the emergency loop is healthy"),
    ]
    if line_side:
        cmd.append(Signal("line.breaker_close", "1", 1.0, 0, 1, "flag",
                          "1 closes the main breaker, 0 opens it"))
        for unit in params.line_converters:
            cmd += [
                _analog(f"{unit.name}.modulation", "1", 1e-4, -1.0, 1.0,
                        "converter AC voltage as a fraction of the link voltage, held "
                        "for the frame (as the inverters' duty cycles)"),
                Signal(f"{unit.name}.gates_enabled", "1", 1.0, 0, 1, "flag",
                       "1 releases the gates (0: a diode bridge)"),
                Signal(f"{unit.name}.precharge_close", "1", 1.0, 0, 1, "flag",
                       "precharge contactor command"),
                Signal(f"{unit.name}.line_contactor_close", "1", 1.0, 0, 1, "flag",
                       "line contactor command"),
            ]
        for link in params.dc_links:
            cmd.append(_analog(f"{link.name}.chopper_duty", "1", 1e-4, 0.0, 1.0,
                               "brake chopper duty cycle"))
    for conv in params.converters:
        for phase in "abc":
            cmd.append(_analog(f"{conv.name}.duty_{phase}", "1", 1e-4, 0.0, 1.0,
                               f"duty cycle of leg {phase} of {conv.name}"))
        cmd.append(Signal(f"{conv.name}.gates_enabled", "1", 1.0, 0, 1, "flag",
                          f"1 releases the gates of {conv.name}"))
        cmd.append(Signal(f"{conv.name}.fault_reset", "1", 1.0, 0, 1, "flag",
                          "1 resets the gate drivers' latched hardware trip (it trips again "
                          "at once while the current is still past the threshold)"))
    cmd += [
        _analog("tcu.achieved_effort_kn", "kN", 0.1, -1000.0, 1000.0,
                "tractive (+) or electric braking (-) effort achieved, for blending"),
        _analog("tcu.available_effort_kn", "kN", 0.1, -1000.0, 1000.0,
                "effort the drive could give now"),
        Signal("tcu.status", "1", 1.0, 0, 65535, "flag", "controller status bits (free use)"),
        Signal("tcu.event_code", "1", 1.0, 0, 65535, "enum", "last protective event code"),
    ]
    return SignalMap(PROTOCOL_VERSION, tuple(meas), tuple(cmd), controller_constants(params))


def controller_constants(params: TrainsetParams) -> tuple[tuple[str, Any], ...]:
    """The trainset's constants a controller is built with, in a fixed order."""
    mp, dt = params.machine, params.drivetrain
    lines = int(getattr(params.sensors, "encoder_lines", 256)) if params.sensors else 256
    out: list[tuple[str, Any]] = [
        ("period_us", round(params.frame_s * 1e6)), ("encoder_lines", lines),
        ("pole_pairs", int(mp.pole_pairs)), ("rated_voltage_v", float(mp.rated_voltage_v)),
        ("rated_frequency_hz", float(mp.rated_frequency_hz)),
        ("rated_power_w", float(mp.rated_power_w)), ("gear_ratio", float(dt.gear_ratio)),
        ("wheel_diameters_m", tuple(float(d) for c in params.converters
                                    for d in c.wheel_diameters_m)),
        ("inverter_trip_a", float(params.inverter.hardware_trip_a)),
        ("link_nominal_v", tuple(float(k.voltage_v) for k in params.dc_links)),
        ("inverter_links", tuple(int(c.dc_link) for c in params.converters)),
    ]
    if params.transformer is not None:
        out += [("line_nominal_v", float(params.supply.nominal_voltage_v)),
                ("line_frequency_hz", float(params.supply.frequency_hz)),
                ("secondary_voltage_v", float(params.transformer.secondary_voltage_v)),
                ("line_converter_links", tuple(int(lc.dc_link)
                                               for lc in params.line_converters))]
    return tuple(out)
