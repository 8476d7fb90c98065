"""The texts a scenario run is made from, and writing them back as files.

A run is repeatable from three texts: the scenario, its trainset and the trainset's
machine profile. A recording holds them (``railrig replay``), and a campaign ships them
to its workers, which may be other machines: paths are not shared, texts are.
``scenario_texts`` collects them; ``rebuild`` writes them into a folder, refusing any
path that would leave it.
"""

from __future__ import annotations

import re
from pathlib import Path, PurePosixPath
from typing import Any

from emulator.profiles.table import read_toml


def scenario_texts(scenario_path: Path, scenario_text: str, trainset: Path) -> dict:
    """{"scenario", "trainset", "machine"}: each {"path", "text"}, the machine also with
    the path its trainset gives ("relative"), or None for a trainset without one."""
    trainset_text = trainset.read_text(encoding="utf-8")
    machine = read_toml(trainset).get("trainset", {}).get("machine_profile")
    machine_path = (trainset.parent / machine).resolve() if machine else None
    return {"scenario": {"path": str(scenario_path), "text": scenario_text},
            "trainset": {"path": str(trainset), "text": trainset_text},
            "machine": ({"path": str(machine_path), "relative": machine,
                         "text": machine_path.read_text(encoding="utf-8")}
                        if machine_path else None)}


FILE_NAME = re.compile(r"[A-Za-z0-9_][A-Za-z0-9._-]{0,127}")
MAX_UP = 8  # leading ".." a recorded machine path may climb (trainsets/ -> machines/ is 1)


class UnsafeTextsError(ValueError):
    """Texts (a recording's, a campaign run's) that name a path we will not write to."""


def _file_name(text: Any, what: str) -> str:
    name = PurePosixPath(str(text)).name
    if not FILE_NAME.fullmatch(name):
        raise UnsafeTextsError(f"the recording's {what} has no usable file name: {text!r}")
    return name


def _machine_parts(relative: Any) -> tuple[int, list[str]]:
    """(how many folders up, the folders and name below) of the recorded machine path:
    leading ``..`` only, then plain names; absolute paths refused."""
    path = PurePosixPath(str(relative))
    if path.is_absolute() or "\\" in str(relative):
        raise UnsafeTextsError(f"the recording names an absolute machine path {relative!r}: "
                              "refusing to write there")
    parts = list(path.parts)
    up = 0
    while parts and parts[0] == "..":
        parts.pop(0)
        up += 1
    if up > MAX_UP or not parts or any(not FILE_NAME.fullmatch(p) for p in parts):
        raise UnsafeTextsError(f"the recording names a machine path {relative!r} that climbs "
                              "out of its folder or is not plain names: refusing it")
    return up, parts


def rebuild(meta: dict, where: Path) -> tuple[Path, Path]:
    """Write the recorded scenario, trainset and machine texts inside ``where`` and
    nowhere else: (scenario, trainset). Raises UnsafeTextsError for a path that would
    leave it (an absolute path, ``..`` after a name, an odd file name)."""
    machine = meta.get("machine")
    up, below = _machine_parts(machine["relative"]) if machine else (0, [])
    trainset = where.joinpath(*["t"] * (up + 1), _file_name(meta["trainset"]["path"],
                                                             "trainset"))
    scenario = where / _file_name(meta["scenario"]["path"], "scenario")
    target = trainset.parent.joinpath(*[".."] * up, *below) if machine else None
    for path in (trainset, scenario, target):
        if path is not None and not path.resolve().is_relative_to(where.resolve()):
            raise UnsafeTextsError(f"the recording would write {path}, outside {where}")
    trainset.parent.mkdir(parents=True)
    trainset.write_text(meta["trainset"]["text"], encoding="utf-8")
    if target is not None:
        target = target.resolve()
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text(machine["text"], encoding="utf-8")
    scenario.write_text(meta["scenario"]["text"], encoding="utf-8")
    return scenario, trainset
