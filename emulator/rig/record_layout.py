"""How a recording stores each of the rig's columns, and the unit a column's name says.

Measurements are kept as the integers the telegrams carried ("sent"), commands exactly
as applied ("wire"), plant time and the states that accumulate (positions, energies) as
float64, other plant states as float32 (emulator/recording/blocks.py).
"""

from __future__ import annotations

import fnmatch
from typing import Any

import numba as nb
import numpy as np

from emulator.kernel_cache import WITHOUT_RUNTIME
from emulator.protocol.signal_map import SignalMap

#: recorded plant states with these in their names are kept at float64 (they accumulate)
EXACT_STATE_WORDS = ("position", "energy", "time")
#: the unit a column's name ends in (names carry their units: DESIGN.md)
UNIT_SUFFIXES = (("_rad_s", "rad/s"), ("_mps2", "m/s^2"), ("_mps", "m/s"), ("_kmh", "km/h"),
                 ("_degc", "degC"), ("_nm", "N m"), ("_kn", "kN"), ("_hz", "Hz"),
                 ("_v", "V"), ("_a", "A"), ("_w", "W"), ("_n", "N"), ("_m", "m"),
                 ("_s", "s"), ("_k", "K"), ("_j", "J"), ("_pct", "%"))


def unit_from_name(name: str) -> str:
    """The unit a recorded column's name says (``p.motor.speed_rad_s[3]`` -> rad/s)."""
    base = name.split("[", 1)[0]
    for suffix, unit in UNIT_SUFFIXES:
        if base.endswith(suffix):
            return unit
    return ""


def storage_of(sm: SignalMap, columns: list[str]) -> tuple[list[str], list[float], list[str]]:
    """Per column: storage kind, wire scale (1 where unused) and unit."""
    wire = {f"y.{s.name}": s for s in sm.measurements} | {f"u.{s.name}": s
                                                          for s in sm.commands}
    kinds, scales, units = [], [], []
    for name in columns:
        if name in wire:  # y as the telegram carried it, u exactly as applied
            kinds.append("sent" if name.startswith("y.") else "wire")
            scales.append(wire[name].scale)
            units.append(wire[name].unit)
            continue
        exact = name == "time_s" or any(w in name for w in EXACT_STATE_WORDS)
        kinds.append("f64" if exact else "f32")
        scales.append(1.0)
        units.append(unit_from_name(name))
    return kinds, scales, units


class RecordsFrames:
    """The rig's recording: which columns a frame's row holds, how each is stored, and
    starting a recorder (a part of emulator.rig.frame_loop.Rig, which fills the row
    each frame and hands it to ``self.recorder``)."""

    def record_columns(self, states: list[str] = (), extras: list[str] = ()) -> list[str]:
        """Columns of a recording: plant time, the measurements, the commands applied,
        then any plant states asked for (``p.<state>``, ``p.<state>[i]`` per element),
        then ``extras``: values a driver program keeps in ``rig.extras`` (a frame late)."""
        sm = self.signal_map
        cols = (["time_s"] + [f"y.{s.name}" for s in sm.measurements]
                + [f"u.{s.name}" for s in sm.commands])
        # the states as (which array, row, column) for the compiled gather; a state of
        # the train or the supply is a row of its own (a 1 x n view of its array)
        arrays: list[np.ndarray] = []
        plan: list[tuple[int, int, int]] = []
        for name in states:
            array, col = self.plant.state_column(name)
            which = next((i for i, a in enumerate(arrays) if a is array), len(arrays))
            if which == len(arrays):
                arrays.append(array)
            if array.ndim == 2:  # one element per motor, inverter or link
                plan += [(which, i, col) for i in range(array.shape[0])]
                cols += [f"p.{name}[{i}]" for i in range(array.shape[0])]
            else:
                plan.append((which, 0, col))
                cols.append(f"p.{name}")
        self._state_arrays = tuple(a if a.ndim == 2 else a.reshape(1, -1)
                                   for a in arrays) or (np.zeros((1, 1)),)
        self._state_plan = np.array(plan, dtype=np.int64).reshape(-1, 3)
        self.extras = np.zeros(len(extras))
        cols += [f"p.{name}" for name in extras]
        self._row = np.zeros(len(cols))
        # compile or load the gather for this layout now, not in the first frame
        _fill_row(self._row, 0.0, np.zeros(len(sm.measurements)), np.zeros(len(sm.commands)),
                  self._state_arrays, self._state_plan, self.extras)
        self._record_pick = None  # all columns, unless start_recording chose some
        return cols

    def fill_row(self, time_s: float, y: np.ndarray, u: np.ndarray) -> np.ndarray:
        """The frame's row: plant time, y_k as the controller saw it, the command that
        acted in the frame, the plant's states now, the driver program's extras."""
        _fill_row(self._row, time_s, y, u, self._state_arrays, self._state_plan,
                  self.extras)
        return self._row

    @property
    def records_in_background(self) -> bool:
        """Whether this rig's recordings are written by a thread of their own: only
        where frames have deadlines (emulator/recording/recorder.py says why)."""
        return self.mode == "realtime"

    def record_storage(self, columns: list[str]) -> tuple[list[str], list[float], list[str]]:
        """How each recorded column is stored and its unit (record_layout.py)."""
        return storage_of(self.signal_map, columns)

    def start_recording(self, path: str, *, exclusive: bool = False,
                        channels: list[str] | None = None, states: list[str] = (),
                        decimate: dict[str, int] | None = None, **meta: Any):
        """Record every frame from now on to ``path`` (time, y, u), headed with what a
        reader needs to know of the run; returns the emulator.recording.recorder.Recorder.
        ``exclusive``: refuse (FileExistsError) rather than overwrite a file.
        ``channels``: channel set names and globs (emulator/recording/channels.py);
        every column when None. ``states``: plant states to record beside y and u.
        ``decimate``: glob -> n, the matching columns kept every n-th frame only."""
        from emulator import __version__
        from emulator.recording.channels import select_channels
        from emulator.recording.recorder import Recorder

        columns = self.record_columns(states)
        pick = select_channels(columns, channels) if channels else list(range(len(columns)))
        chosen = [columns[i] for i in pick]
        kinds, scales, units = self.record_storage(chosen)
        every = [1] * len(chosen)
        for pattern, n in (decimate or {}).items():
            for i, name in enumerate(chosen):
                if name != "time_s" and fnmatch.fnmatchcase(name, pattern):
                    every[i] = n
        self.recorder = Recorder(path, chosen, {
            "profile": self.plant.params.source, "seed": self.seed, "mode": self.mode,
            "period_us": self.period_us, "version": __version__,
            "started_at_s": self.plant.time_s, "channels": channels or ["all"], **meta},
            exclusive=exclusive, kinds=kinds, scales=scales, units=units, every=every,
            background=self.records_in_background)
        self._record_pick = None if len(pick) == len(columns) else np.array(pick)
        return self.recorder


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _fill_row(row, time_s, y, u, arrays, plan, extras):
    """row = [t, y, u, the states by plan (array, row, column), extras]."""
    if 1 + y.shape[0] + u.shape[0] + plan.shape[0] + extras.shape[0] != row.shape[0]:
        raise ValueError("the recorded row's parts do not add up to its columns")
    row[0] = time_s
    i = 1
    for j in range(y.shape[0]):
        row[i + j] = y[j]
    i += y.shape[0]
    for j in range(u.shape[0]):
        row[i + j] = u[j]
    i += u.shape[0]
    for j in range(plan.shape[0]):
        row[i + j] = arrays[plan[j, 0]][plan[j, 1], plan[j, 2]]
    i += plan.shape[0]
    for j in range(extras.shape[0]):
        row[i + j] = extras[j]
