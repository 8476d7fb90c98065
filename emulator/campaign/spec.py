"""Campaign files: TOML in, a checked matrix of runs out.

A campaign names its scenarios (paths or globs, relative to the campaign file), the
controller, optional trainsets that replace the scenarios' own, seeds, and ``[[vary]]``
tables that sweep a scenario value (see ``variation``) over a list or an evenly spaced
range. The matrix of a scenario is the product of the value lists of the sweeps that
apply to it, its trainsets and the seeds. Each run is keyed by a digest of its inputs
(the scenario, trainset and machine texts, the seed, the controller): the same inputs
give the same run, which is how ``--resume`` knows what is done.

Every run's inputs are loaded and checked here, before anything is started: an error
names the campaign file, its line and its key.
"""

from __future__ import annotations

import copy
import glob
import hashlib
import itertools
import json
import math
import re
import shlex
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from emulator.profiles.table import ProfileError, Table, read_toml_lines
from emulator.scenario.spec import load_scenario
from emulator.scenario.texts import UnsafeTextsError, rebuild, scenario_texts

from .variation import Address, NotInScenarioError, apply, locate, parse_address, scenario_text

CampaignError = ProfileError
RECORD = ("failed", "all", "none")
MODES = ("lockstep", "realtime")
MAX_RUNS = 100_000
_PLACEHOLDER = re.compile(r"\{(\w*)\}")


@dataclass(frozen=True)
class Sweep:
    """One ``[[vary]]`` table."""

    address: Address
    values: tuple[Any, ...]
    scenarios: tuple[str, ...]  # file stems it is limited to; () = all that have the value
    table: Table = field(compare=False, repr=False)  # for errors found while expanding


@dataclass(frozen=True)
class ControllerSpec:
    """Who answers the rig: "reference" (in the run's process), or a link URL, with a
    command that starts one controller a run where the URL has ``{rig}``/``{bind}``."""

    url: str
    command: str | None = None

    @property
    def per_run(self) -> bool:
        """Each run gets its own ports (and controller process): runs may go in parallel."""
        return self.url == "reference" or "{rig}" in self.url

    def as_dict(self) -> dict:
        return {"url": self.url, "command": self.command}


@dataclass(frozen=True)
class RunCase:
    """One run of the matrix, as shipped to a worker (``as_dict``): texts, not paths."""

    run: int
    scenario: str  # the scenario file's stem
    trainset: str  # the trainset file's stem
    seed: int
    values: dict[str, Any]  # address -> value, of the sweeps applied to this run
    texts: dict
    duration_s: float
    digest: str
    controller: ControllerSpec
    mode: str

    @property
    def label(self) -> str:
        """The name a CI server shows: scenario[trainset, seed, varied values]."""
        varied = "".join(f", {k}={_plain(v)}" for k, v in self.values.items())
        return f"{self.scenario}[{self.trainset}, seed={self.seed}{varied}]"

    def as_dict(self) -> dict:
        return {"run": self.run, "scenario": self.scenario, "trainset": self.trainset,
                "seed": self.seed, "values": self.values, "texts": self.texts,
                "duration_s": self.duration_s, "digest": self.digest,
                "controller": self.controller.as_dict(), "mode": self.mode,
                "label": self.label}


@dataclass(frozen=True)
class Campaign:
    """A whole campaign file, expanded."""

    name: str
    path: Path
    controller: ControllerSpec
    mode: str
    record: str  # which runs' recordings are kept: failed, all, none
    plot: tuple[str, ...]  # check names whose figures are plotted against the sweeps
    sweeps: tuple[Sweep, ...]
    runs: tuple[RunCase, ...]

    @property
    def addresses(self) -> list[str]:
        """The swept addresses, in file order (the results' columns)."""
        return [str(s.address) for s in self.sweeps]


def _plain(value: Any) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def run_digest(name: str, texts: dict, seed: int, controller: ControllerSpec,
               mode: str) -> str:
    """SHA-256 of what makes a run: the scenario's name in the campaign (its file's stem),
    the three texts, the seed, the controller, the mode. Folders and the campaign's own
    name are not in it: the same run from another place, or in a renamed campaign, is
    the same run."""
    key = {"name": name, "scenario": texts["scenario"]["text"],
           "trainset": texts["trainset"]["text"],
           "machine": (texts["machine"] or {}).get("text"), "seed": seed,
           "controller": controller.as_dict(), "mode": mode}
    return hashlib.sha256(json.dumps(key, sort_keys=True).encode()).hexdigest()


def load_campaign(path: str | Path) -> Campaign:
    """Read a campaign file and expand its matrix, checking every run's inputs."""
    path = Path(path)
    data, lines, _text = read_toml_lines(path)
    root = Table(data, path, "", lines)
    head = root.table("campaign")
    name = head.string("name")
    if head.optional("description"):
        head.string("description")
    scenarios = _scenario_paths(head, path.parent)
    controller = _controller(head, path.parent)
    trainsets: list[Path | None] = [None]
    if head.optional("trainsets"):
        trainsets = list(dict.fromkeys(_existing(head, "trainsets", path.parent, p)
                                       for p in _strings(head, "trainsets")))
        stems = [t.stem for t in trainsets]
        twice = sorted({s for s in stems if stems.count(s) > 1})
        if twice:
            raise head.error("trainsets", f"two trainset files are named {twice[0]!r}: runs "
                             "are told apart by file name")
    seeds: list[int | None] = [None]
    if head.optional("seeds"):
        raw = head.raw("seeds")
        if not (isinstance(raw, list) and raw and all(
                isinstance(s, int) and not isinstance(s, bool) and 0 <= s < 2**31
                for s in raw)):
            raise head.error("seeds", "expected a list of whole numbers in [0, 2**31)")
        seeds = list(dict.fromkeys(raw))
    mode = head.string("mode", MODES) if head.optional("mode") else "lockstep"
    record = head.string("record", RECORD) if head.optional("record") else "failed"
    plot = tuple(_strings(head, "plot")) if head.optional("plot") else ()
    head.finish()
    sweeps = tuple(_sweep(t) for t in root.tables("vary")) if root.optional("vary") else ()
    for i, s in enumerate(sweeps):
        if s.address in [o.address for o in sweeps[:i]]:
            raise s.table.error("set", f"{s.address} is swept twice: give one [[vary]] "
                                "its values")
    root.finish()
    runs, checks = _expand(head, scenarios, trainsets, seeds, sweeps, controller, mode)
    for check in plot:
        if check not in checks:
            raise head.error("plot", f"no check of the campaign's scenarios is named "
                             f"{check!r}")
    return Campaign(name, path, controller, mode, record, plot, sweeps, tuple(runs))


def _strings(t: Table, key: str) -> list[str]:
    raw = t.raw(key)
    if isinstance(raw, str):
        raw = [raw]
    if not (isinstance(raw, list) and raw and all(isinstance(s, str) and s for s in raw)):
        raise t.error(key, "expected a non-empty list of strings")
    return raw


def _existing(t: Table, key: str, base: Path, written: str) -> Path:
    p = (base / written).resolve()
    if not p.is_file():
        raise t.error(key, f"no file at {p}")
    return p


def _scenario_paths(head: Table, base: Path) -> list[Path]:
    found: list[Path] = []
    for pattern in _strings(head, "scenarios"):
        full = str(base / pattern)
        hits = sorted(Path(p).resolve() for p in glob.glob(full, recursive=True))
        hits = [h for h in hits if h.is_file()]
        if not hits:
            raise head.error("scenarios", f"{pattern!r} matches no file (looked in {base})")
        found += [h for h in hits if h not in found]
    stems = [p.stem for p in found]
    twice = sorted({s for s in stems if stems.count(s) > 1})
    if twice:
        raise head.error("scenarios", f"two scenario files are named {twice[0]!r}: runs "
                         "are told apart by file name")
    return found


def placeholders(text: str) -> set[str]:
    """The {name} placeholders of a template ({{ and }} stand for literal braces)."""
    return set(_PLACEHOLDER.findall(text.replace("{{", "").replace("}}", "")))


def _controller(head: Table, base: Path) -> ControllerSpec:
    url = head.string("controller") if head.optional("controller") else "reference"
    command = head.string("controller_command") if head.optional(
        "controller_command") else None
    allowed = {"controller": {"rig", "bind"}, "controller_command": {"rig", "bind", "trainset"}}
    for key, text in (("controller", url), ("controller_command", command or "")):
        unknown = placeholders(text) - allowed[key]
        if unknown:
            raise head.error(key, f"unknown placeholder {{{sorted(unknown)[0]}}}: use "
                             f"{', '.join('{' + a + '}' for a in sorted(allowed[key]))} "
                             "(and {{ }} for a literal brace)")
    if url == "reference":
        if command:
            raise head.error("controller_command", "the reference controller runs in the "
                             "rig's process: give a link URL as controller to start one")
        return ControllerSpec(url)
    if ("{rig}" in url) != ("{bind}" in url):
        raise head.error("controller", "a URL template has both {rig} (the rig's address) "
                         "and {bind} (the controller's), e.g. udp://{rig}?peer={bind}")
    if "{rig}" in url and not url.startswith("udp://"):
        raise head.error("controller", "ports are found per run for udp:// links only")
    if "{rig}" in url and not command:
        raise head.error("controller", "a URL template needs controller_command, the "
                         "command that starts the controller for each run")
    if command is not None:
        if "{rig}" not in url and placeholders(command) & {"rig", "bind"}:
            raise head.error("controller_command", "{rig} and {bind} come from a URL "
                             "template (udp://{rig}?peer={bind}); this URL is fixed")
        try:
            args = shlex.split(command)
        except ValueError as exc:
            raise head.error("controller_command", f"cannot split it as a shell would: "
                             f"{exc}") from None
        if not args:
            raise head.error("controller_command", "expected a command")
        if "/" in args[0] and not Path(args[0]).is_absolute():  # ./my-tcu: beside the file
            args[0] = str((base / args[0]).resolve())
            command = shlex.join(args)
    return ControllerSpec(url, command)


def _sweep(t: Table) -> Sweep:
    try:
        address = parse_address(t.raw("set"))
    except ValueError as exc:
        raise t.error("set", str(exc)) from None
    if t.optional("values"):
        if t.has("from") or t.has("to") or t.has("steps"):
            raise t.error("values", "give values or from/to/steps, not both")
        raw = t.raw("values")
        if not (isinstance(raw, list) and raw and (
                all(isinstance(v, int | float) and not isinstance(v, bool) for v in raw)
                or all(isinstance(v, str) for v in raw))):
            raise t.error("values", "expected a list of numbers (or of strings, for a rail "
                          "condition)")
        values = tuple(dict.fromkeys(raw))
    else:
        lo = t.number("from", "the value's unit", -1e9, 1e9)
        hi = t.number("to", "the value's unit", -1e9, 1e9)
        steps = t.integer("steps", 2, 1000)
        # evenly spaced, both ends included; rounded to 12 significant digits so 0.3 is
        # 0.3 in names and files, not 0.30000000000000004
        values = tuple(float(f"{lo + (hi - lo) * i / (steps - 1):.12g}") for i in range(steps))
    scenarios = tuple(_strings(t, "scenarios")) if t.optional("scenarios") else ()
    t.finish()
    return Sweep(address, values, scenarios, t)


def _expand(head: Table, scenarios: list[Path], trainsets: list[Path | None],
            seeds: list[int | None], sweeps: tuple[Sweep, ...], controller: ControllerSpec,
            mode: str) -> tuple[list[RunCase], set[str]]:
    """The runs, and the names of the checks their scenarios hold."""
    stems = {p.stem for p in scenarios}
    for s in sweeps:
        for stem in s.scenarios:
            if stem not in stems:
                raise s.table.error("scenarios", f"no scenario {stem!r} in this campaign "
                                    f"(it has: {', '.join(sorted(stems))})")
    # an upper bound (a sweep may not hold in a scenario), said before anything is loaded
    size = sum(len(trainsets) * len(seeds) * math.prod(
        len(s.values) for s in sweeps if not s.scenarios or p.stem in s.scenarios)
        for p in scenarios)
    if size > MAX_RUNS:
        raise head.error("scenarios", f"the matrix would have up to {size} runs, more "
                         f"than {MAX_RUNS}")
    runs: list[RunCase] = []
    checks: set[str] = set()
    used: dict[int, str] = {}  # sweep index -> why it applied to none (if it did not)
    seen: set[str] = set()
    folders = itertools.count()
    with tempfile.TemporaryDirectory(prefix="railrig-campaign-") as tmp:
        for path in scenarios:
            own = load_scenario(path)  # the file is sound before its values are looked up
            data, _lines, text = read_toml_lines(path)
            applied = []
            for i, s in enumerate(sweeps):
                if s.scenarios and path.stem not in s.scenarios:
                    continue
                try:
                    locate(copy.deepcopy(data), s.address)
                except NotInScenarioError as exc:
                    if s.scenarios:
                        raise s.table.error("set", f"{path.name}: {exc}") from None
                    used.setdefault(i, f"{path.name}: {exc}")
                    continue
                used[i] = ""
                applied.append(s)
            for trainset in trainsets:
                base = own if trainset is None else load_scenario(path, trainset=trainset)
                checks |= {c.name for c in base.checks}
                key = "trainsets" if trainset is not None else "scenarios"

                def made(changes, base=base, data=data, text=text, path=path, key=key):
                    varied = text
                    if changes:
                        note = "varied by a campaign: " + ", ".join(
                            f"{a} = {_plain(v)}" for a, v in changes)
                        varied = scenario_text(apply(data, changes), note)
                    texts = scenario_texts(path, varied, base.trainset)
                    # fixed file names: a worker writes the texts under these, whatever
                    # the files were called here
                    texts["scenario"]["path"] = "scenario.toml"
                    texts["trainset"]["path"] = "trainset.toml"
                    try:
                        return texts, _check_run(texts, Path(tmp) / str(next(folders)),
                                                 changes, path)
                    except UnsafeTextsError as exc:
                        raise head.error(key, f"{path.name} on {base.trainset.name}: "
                                         f"{exc}; campaigns ship texts, so a trainset "
                                         "names its machine profile by a plain relative "
                                         "path") from None

                for s in applied:  # each value alone first: an error is its own
                    for v in s.values:
                        try:
                            made([(s.address, v)])
                        except _ValuesError as exc:
                            raise s.table.error("values", str(exc)) from None
                for combo in itertools.product(*(s.values for s in applied)):
                    changes = [(s.address, v) for s, v in zip(applied, combo, strict=True)]
                    try:
                        texts, scenario = made(changes)
                    except _ValuesError as exc:  # values that are fine alone, not together
                        raise applied[-1].table.error("values", str(exc)) from None
                    for seed in seeds:
                        seed = scenario.seed if seed is None else seed
                        digest = run_digest(path.stem, texts, seed, controller, mode)
                        if digest in seen:
                            continue
                        seen.add(digest)
                        runs.append(RunCase(
                            len(runs) + 1, path.stem, base.trainset.stem, seed,
                            {str(a): v for a, v in changes}, texts,
                            scenario.duration_s, digest, controller, mode))
    for i, s in enumerate(sweeps):
        if used.get(i):
            raise s.table.error("set", f"{s.address} is in none of the campaign's "
                                f"scenarios (first: {used[i]})")
    return runs, checks


class _ValuesError(ValueError):
    """A run's scenario does not load with the values a campaign set in it."""


def _check_run(texts: dict, where: Path, changes, path: Path):
    """Load a run's scenario as a worker will (from its texts, in a folder of its own).
    _ValuesError naming the scenario file and the values for an error the values made;
    UnsafeTextsError for texts a worker would not write."""
    where.mkdir(parents=True)
    scenario_path, trainset = rebuild(texts, where)
    try:
        return load_scenario(scenario_path, trainset=trainset)
    except ProfileError as exc:
        if not changes:
            raise
        said = re.sub(r"^.*?:\d+: ", "", str(exc), count=1)
        values = ", ".join(f"{a} = {_plain(v)}" for a, v in changes)
        raise _ValuesError(f"{path.name} with {values}: {said}") from None
