"""Open-loop slip-frequency V/f modulation: the simplest source of duty cycles.

Stator frequency f_s = p n / 60 + f_slip (measured rotor speed plus a commanded slip
frequency), stator voltage U = U_boost + (U/f) f_s limited to the linear range of
sine-triangle modulation, leg duties d_x = 1/2 + 1/2 m cos(theta - x 2 pi/3) with
m = U / (U_dc/2) (Mohan, Undeland & Robbins, *Power Electronics*, ch. 8; Bose, *Modern
Power Electronics and AC Drives*, scalar control). Positive slip motors, negative slip
brakes. It keeps no current loop and no protection: a signal source for plant checks and
the plant benchmark, not a controller to learn from. ``OpenLoopLineSide`` attaches the
diode-bridge switch-on sequence and the chopper to plant commands, for checks that need a
charged line side without a controller or a link.
"""

from __future__ import annotations

import math

import numpy as np

from emulator.plant import Commands, Plant
from emulator.plant.stepper import LineCommands


class SlipFrequencyVf:
    """Duty cycles for n inverters from rotor speed, slip frequency and link voltage."""

    def __init__(self, n_inverters: int, pole_pairs: int, volts_per_hz: float,
                 boost_v: float = 20.0, max_modulation: float = 1.0) -> None:
        self.n_inverters = n_inverters
        self.pole_pairs = pole_pairs
        self.volts_per_hz = volts_per_hz
        self.boost_v = boost_v
        self.max_modulation = max_modulation
        self.theta = 0.0
        self.duty = np.full((n_inverters, 3), 0.5)

    def step(self, rotor_speed_rad_s: float, slip_hz: float, dc_link_v: float,
             period_s: float) -> np.ndarray:
        """Advance the angle by one period and return the duties, shape (n, 3)."""
        f_s = self.pole_pairs * rotor_speed_rad_s / (2 * math.pi) + slip_hz
        amplitude = self.boost_v + self.volts_per_hz * abs(f_s)
        m = min(amplitude / (0.5 * dc_link_v), self.max_modulation) if dc_link_v > 0 else 0.0
        self.theta = (self.theta + 2 * math.pi * f_s * period_s) % (2 * math.pi)
        for x in range(3):
            self.duty[:, x] = 0.5 + 0.5 * m * math.cos(self.theta - x * 2 * math.pi / 3)
        return self.duty


class DiodeBridgeSequencer:
    """Switch-on sequence of the line side, with the line converters left as diode bridges.

    Main breaker and precharge contactors close at once; the line contactors close once
    the link has charged to ``charged_fraction`` of the secondary peak (or after
    ``max_precharge_s``), and the precharge contactors open ``overlap_s`` later. The brake
    chopper follows a hysteresis between ``chopper_on_v`` and ``chopper_off_v``: with diode
    bridges nothing else can take regenerated energy. Common practice of a switch-on
    sequence, no line-current control (that is the reference controller's job).
    """

    def __init__(self, n_converters: int, n_links: int, secondary_peak_v: float,
                 chopper_on_v: float = 1950.0, chopper_off_v: float = 1850.0,
                 charged_fraction: float = 0.9, max_precharge_s: float = 3.0,
                 overlap_s: float = 0.1) -> None:
        self.n_converters, self.n_links = n_converters, n_links
        self.charged_v = charged_fraction * secondary_peak_v
        self.chopper_on_v, self.chopper_off_v = chopper_on_v, chopper_off_v
        self.max_precharge_s, self.overlap_s = max_precharge_s, overlap_s
        self.t = 0.0
        self.line_closed_at: float | None = None
        self.chopper = np.zeros(n_links)

    def step(self, link_voltages: np.ndarray, period_s: float) -> dict:
        """Commands for this period: breaker, precharge, line contactor, chopper duty."""
        self.t += period_s
        charged = bool(np.min(link_voltages) >= self.charged_v)
        if self.line_closed_at is None and (charged or self.t >= self.max_precharge_s):
            self.line_closed_at = self.t
        line = self.line_closed_at is not None
        precharge = not line or self.t < self.line_closed_at + self.overlap_s
        on = link_voltages > self.chopper_on_v
        off = link_voltages < self.chopper_off_v
        self.chopper = np.where(on, 1.0, np.where(off, 0.0, self.chopper))
        return {"breaker": True, "precharge": precharge, "line_contactor": line,
                "chopper": self.chopper}

    @property
    def ready(self) -> bool:
        """Whether the line contactors are (commanded) closed."""
        return self.line_closed_at is not None and self.t >= self.line_closed_at + self.overlap_s


class OpenLoopLineSide:
    """The diode-bridge switch-on sequence and chopper, attached to plant commands."""

    def __init__(self, plant: Plant) -> None:
        self.plant = plant
        tr = plant.params.transformer
        peak = tr.secondary_voltage_v * math.sqrt(2) if tr else 0.0
        self.seq = DiodeBridgeSequencer(plant.n_line_converters, plant.n_links, peak)
        self.line = LineCommands.open(plant.n_line_converters, plant.n_links)

    @property
    def ready(self) -> bool:
        return self.seq.ready

    def commands(self, command: Commands) -> Commands:
        c = self.seq.step(self.plant.read("dc_link.voltage_v"), self.plant.params.frame_s)
        self.line.breaker = c["breaker"]
        self.line.precharge[:] = c["precharge"]
        self.line.line_contactor[:] = c["line_contactor"]
        self.line.chopper[:] = c["chopper"]
        return Commands(command.duty, command.gates_enabled, self.line)
