"""Scenario files: TOML in, typed and checked scenario out.

A scenario names a trainset profile and gives the track, the driver, the faults and the
checks. Every key is read once and checked; an unknown key is an error (a misspelling),
and every error names the file, the line and the key. Nothing in a file is evaluated:
conditions and check expressions are parsed by small grammars.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from emulator.plant.drivetrain import RAIL_CONDITIONS
from emulator.profiles.table import ProfileError, Table, read_toml_lines

from .checks import CheckSpec, read_check
from .driver import STOPPED, DemandPoint, DriverSpec, DriverStep, read_driver

ScenarioError = ProfileError


@dataclass(frozen=True)
class Stretch:
    """A value over a stretch of track, from_m <= x < to_m (to_m may be infinite)."""

    from_m: float
    to_m: float
    value: float


@dataclass(frozen=True)
class NeutralSection:
    """A dead section of catenary; the train is told notice_m before it."""

    from_m: float
    to_m: float
    notice_m: float
    label: str


@dataclass(frozen=True)
class AdhesionZone:
    """Low adhesion between from_m and to_m on some or all motored axles."""

    from_m: float
    to_m: float
    rail: str  # a rail condition of the plant (dry, wet, contaminated, sanded)
    factor: float  # scales mu0 on top of the rail condition
    axles: tuple[str, ...]  # motor names; empty: every motored axle
    label: str
    # each motored axle that has rolled over a point of the zone takes this fraction of
    # what is left between the zone's friction and the line's own (rail conditioning);
    # by default 0.1 on a contaminated rail (a film the wheels wipe off), 0 on a wet or
    # sanded one (the water or sand stays): invented demo values, no source
    cleaning_per_axle: float = 0.0


@dataclass(frozen=True)
class TrackSpec:
    """The line as the train meets it."""

    gradients: tuple[Stretch, ...] = ()  # value: rise over run (0.01 = 10 per mille)
    curves: tuple[Stretch, ...] = ()  # value: radius, m
    speed_limits: tuple[Stretch, ...] = ()  # value: m/s
    neutral_sections: tuple[NeutralSection, ...] = ()
    adhesion_zones: tuple[AdhesionZone, ...] = ()


@dataclass(frozen=True)
class FaultSpec:
    """One entry of the fault schedule (see emulator.faults.CATALOGUE)."""

    name: str
    target: str
    params: dict[str, float]
    label: str
    at_s: float | None = None
    at_m: float | None = None
    when: str | None = None
    until_s: float | None = None
    line: int | None = None  # where it is written, for errors raised later


@dataclass(frozen=True)
class Scenario:
    """A whole scenario file."""

    name: str
    description: str
    path: Path
    text: str
    trainset: Path
    duration_s: float
    seed: int
    end_when_stopped: bool
    initial_speed_mps: float
    track: TrackSpec
    driver: DriverSpec
    faults: tuple[FaultSpec, ...]
    checks: tuple[CheckSpec, ...]
    labels: tuple[str, ...] = field(default=())  # names a check's `after` may use


def load_scenario(path: str | Path, *, trainset: str | Path | None = None) -> Scenario:
    """Read and check a scenario file; trainset overrides the profile it names."""
    path = Path(path)
    data, lines, text = read_toml_lines(path)
    root = Table(data, path, "", lines)
    head = root.table("scenario")
    name = head.string("name")
    description = head.string("description") if head.optional("description") else ""
    written = head.string("trainset")
    if trainset is None:
        trainset = (path.parent / written).resolve()
        if not trainset.is_file():
            raise head.error("trainset", f"no trainset profile at {trainset}")
    duration = head.number("duration_s", "s", 0.0, 3600.0, lo_open=True)
    seed = head.integer("seed", 0, 2**31 - 1) if head.optional("seed") else 0
    end = head.boolean("end_when_stopped") if head.optional("end_when_stopped") else True
    v0 = head.number("initial_speed_kmh", "km/h", 0.0, 400.0, scale=1 / 3.6) if head.optional(
        "initial_speed_kmh") else 0.0
    head.finish()
    track = _track(root.table("track")) if root.optional("track") else TrackSpec()
    driver = read_driver(root.table("driver"))
    faults = tuple(_fault(t) for t in root.tables("fault")) if root.optional("fault") else ()
    labels = ([f.label for f in faults] + [s.name for s in driver.steps if s.name]
              + [n.label for n in track.neutral_sections]
              + [z.label for z in track.adhesion_zones] + [STOPPED])
    dupes = {x for x in labels if labels.count(x) > 1}
    if dupes:
        raise root.error("fault", f"labels must be unique, {sorted(dupes)[0]!r} is used twice")
    checks = tuple(read_check(t, labels) for t in root.tables("check"))
    root.finish()
    return Scenario(name, description, path, text, Path(trainset), duration, seed, end, v0,
                    track, driver, faults, checks, tuple(labels))


def _stretches(t: Table, key: str, value_key: str, unit: str, lo: float, hi: float,
               scale: float, *, open_end: bool) -> tuple[Stretch, ...]:
    out = []
    for s in t.tables(key):
        x0 = s.number("from_m", "m", -1e6, 1e6)
        x1 = (s.number("to_m", "m", x0, 1e6, lo_open=True) if s.optional("to_m")
              else (float("inf") if open_end else s.number("to_m", "m", x0, 1e6)))
        out.append(Stretch(x0, x1, s.number(value_key, unit, lo, hi, scale=scale)))
        s.finish()
    out.sort(key=lambda st: st.from_m)
    return tuple(out)


def _track(t: Table) -> TrackSpec:
    grad = (_stretches(t, "gradient", "permille", "per mille", -100.0, 100.0, 1e-3,
                       open_end=True) if t.optional("gradient") else ())
    curves = (_stretches(t, "curve", "radius_m", "m", 100.0, 1e5, 1.0, open_end=False)
              if t.optional("curve") else ())
    limits = (_stretches(t, "speed_limit", "kmh", "km/h", 5.0, 400.0, 1 / 3.6,
                         open_end=False) if t.optional("speed_limit") else ())
    neutral = []
    for i, s in enumerate(t.tables("neutral_section") if t.optional("neutral_section")
                          else ()):
        x0 = s.number("from_m", "m", -1e6, 1e6)
        length = s.number("length_m", "m", 1.0, 2000.0)
        notice = s.number("notice_m", "m", 0.0, 5000.0) if s.optional("notice_m") else 300.0
        label = s.string("label") if s.optional("label") else f"neutral section {i + 1}"
        neutral.append(NeutralSection(x0, x0 + length, notice, label))
        s.finish()
    zones = []
    for i, s in enumerate(t.tables("low_adhesion") if t.optional("low_adhesion") else ()):
        x0 = s.number("from_m", "m", -1e6, 1e6)
        x1 = s.number("to_m", "m", x0, 1e6, lo_open=True)
        rail = s.string("rail", tuple(RAIL_CONDITIONS)) if s.optional("rail") else "dry"
        factor = s.number("factor", "1", 0.0, 2.0) if s.optional("factor") else 1.0
        axles = ()
        if s.optional("axles"):
            raw = s.raw("axles")
            if not (isinstance(raw, list) and raw and all(isinstance(a, str) for a in raw)):
                raise s.error("axles", "expected a list of motor names, e.g. ['INV-A1.m1']")
            axles = tuple(raw)
        label = s.string("label") if s.optional("label") else f"low adhesion {i + 1}"
        cleaning = (s.number("cleaning_per_axle", "1", 0.0, 1.0)
                    if s.optional("cleaning_per_axle")
                    else 0.1 if rail == "contaminated" else 0.0)
        zones.append(AdhesionZone(x0, x1, rail, factor, axles, label, cleaning))
        s.finish()
    t.finish()
    return TrackSpec(grad, curves, limits, tuple(neutral), tuple(zones))


def _fault(t: Table) -> FaultSpec:
    from emulator.faults.catalogue import CATALOGUE

    name = t.string("name", tuple(sorted(CATALOGUE)))
    target = t.string("target")
    params: dict[str, float] = {}
    if t.optional("params"):
        p = t.table("params")
        for key in p.written_keys():
            params[key] = p.number(key, "the unit of the catalogue", -1e9, 1e9)
        p.finish()
    label = t.string("label") if t.optional("label") else f"{name}@{target}"
    at_s = t.number("at_s", "s", 0.0, 1e5) if t.optional("at_s") else None
    at_m = t.number("at_m", "m", -1e6, 1e6) if t.optional("at_m") else None
    when = t.string("when") if t.optional("when") else None
    until = t.number("until_s", "s", 0.0, 1e5) if t.optional("until_s") else None
    if sum(x is not None for x in (at_s, at_m, when)) > 1:
        raise t.error("at_s", "give one trigger: at_s, at_m or when")
    line = t.line_of("name")
    t.finish()
    return FaultSpec(name, target, params, label, at_s, at_m, when, until, line)


__all__ = ["AdhesionZone", "CheckSpec", "DemandPoint", "DriverSpec", "DriverStep",
           "FaultSpec", "NeutralSection", "Scenario", "ScenarioError", "Stretch",
           "TrackSpec", "load_scenario"]
