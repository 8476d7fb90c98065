"""Campaign files: the matrix they expand to, and errors that name file, line and key.

The expected values are the campaign's own definition (the product of the value lists of
the sweeps that apply, times the seeds) and what the scenario file says once varied, read
back by the scenario loader (the same reader ``railrig run`` uses).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from emulator.campaign.spec import CampaignError, load_campaign
from emulator.campaign.variation import parse_address
from emulator.scenario.spec import load_scenario
from emulator.scenario.texts import rebuild

from .conftest import ROOT, short_start

TRAINSETS = ROOT / "profiles" / "trainsets"

DIP = '''
[[fault]]
name = "catenary-dip"
target = "catenary"
params = { voltage_pu = 0.8 }
at_s = 7.0
until_s = 8.0
label = "dip"
'''


def _write(where: Path, campaign: str, scenario: str | None = None) -> Path:
    (where / "start.toml").write_text(scenario or short_start() + DIP, encoding="utf-8")
    path = where / "c.toml"
    path.write_text(campaign, encoding="utf-8")
    return path


def _loaded(run, where: Path):
    """A run's scenario as a worker reads it (from its texts, in a folder of its own)."""
    folder = where / f"run{run.run}"
    folder.mkdir()
    scenario, trainset = rebuild(run.texts, folder)
    return load_scenario(scenario, trainset=trainset)


HEAD = '''[campaign]
name = "t"
scenarios = ["start.toml"]
'''


def test_the_matrix_is_the_product_of_the_lists_and_the_seeds(tmp_path: Path) -> None:
    path = _write(tmp_path, HEAD + '''seeds = [3, 4, 5]
[[vary]]
set = "adhesion[wet rail].factor"
values = [0.5, 0.7]
[[vary]]
set = "fault[dip].voltage_pu"
from = 0.6
to = 0.9
steps = 4
[[vary]]
set = "driver[start].to_kmh"
values = [30.0]
''')
    campaign = load_campaign(path)
    assert len(campaign.runs) == 2 * 4 * 1 * 3
    assert len({r.digest for r in campaign.runs}) == len(campaign.runs)
    assert {r.seed for r in campaign.runs} == {3, 4, 5}
    # the range: both ends exactly, evenly spaced
    assert sorted({r.values["fault[dip].voltage_pu"] for r in campaign.runs}) == [
        0.6, 0.7, 0.8, 0.9]
    for run in campaign.runs[::5]:  # what each run's scenario says, read back
        scenario = _loaded(run, tmp_path)
        (zone,) = scenario.track.adhesion_zones
        assert zone.factor == run.values["adhesion[wet rail].factor"]
        (dip,) = [f for f in scenario.faults if f.label == "dip"]
        assert dip.params["voltage_pu"] == run.values["fault[dip].voltage_pu"]
        start = next(s for s in scenario.driver.steps if s.name == "start")
        assert start.to_kmh == 30.0


def test_a_run_is_keyed_by_its_inputs_not_its_place(tmp_path: Path) -> None:
    text = HEAD + '[[vary]]\nset = "adhesion[wet rail].factor"\nvalues = [0.5, 0.7]\n'
    a = load_campaign(_write(tmp_path, text))
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    b = load_campaign(_write(elsewhere, text.replace('name = "t"', 'name = "renamed"')))
    assert [r.digest for r in a.runs] == [r.digest for r in b.runs]  # place, campaign name
    c = load_campaign(_write(tmp_path, text.replace("0.7", "0.71")))
    assert a.runs[0].digest == c.runs[0].digest and a.runs[1].digest != c.runs[1].digest
    # the same text under another scenario name is another entry of the library
    (tmp_path / "start.toml").rename(tmp_path / "copy.toml")
    d = load_campaign(_write(tmp_path, text.replace("start.toml", "copy.toml")))
    assert not {r.digest for r in d.runs} & {r.digest for r in a.runs}
    assert [r.values for r in d.runs] == [r.values for r in a.runs]


def test_trainsets_replace_the_scenarios_own_and_multiply_the_matrix(tmp_path: Path) -> None:
    path = _write(tmp_path, HEAD + 'trainsets = ["{}", "{}"]\nseeds = [1, 2]\n'.format(
        TRAINSETS / "tern-15kv.toml", TRAINSETS / "tern-25kv.toml"))
    runs = load_campaign(path).runs
    assert sorted((r.trainset, r.seed) for r in runs) == [
        ("tern-15kv", 1), ("tern-15kv", 2), ("tern-25kv", 1), ("tern-25kv", 2)]
    for run in runs:  # the run carries the trainset's text, and reads it back
        assert run.texts["trainset"]["text"] == (TRAINSETS / f"{run.trainset}.toml"
                                                 ).read_text(encoding="utf-8")
        loaded = _loaded(run, tmp_path)  # shipped under a fixed name, read back whole
        assert loaded.trainset.read_text(encoding="utf-8") == run.texts["trainset"]["text"]


def test_the_line_level_is_a_catenary_fault_from_the_start(tmp_path: Path) -> None:
    path = _write(tmp_path, HEAD + '[[vary]]\nset = "line.voltage_pu"\nvalues = [0.9]\n'
                  '[[vary]]\nset = "line.frequency_hz"\nvalues = [49.5]\n')
    (run,) = load_campaign(path).runs
    faults = {f.label: f for f in _loaded(run, tmp_path).faults}
    level = faults["line voltage (campaign)"]
    assert level.name == "catenary-dip" and level.params == {"voltage_pu": 0.9}
    assert level.at_s == 0.0 and level.until_s is None
    assert faults["line frequency (campaign)"].params == {"frequency_hz": 49.5}
    assert faults["dip"].params == {"voltage_pu": 0.8}  # the scenario's own dip stays


def test_a_sweep_limited_to_some_scenarios_leaves_the_others_alone(tmp_path: Path) -> None:
    (tmp_path / "other.toml").write_text(short_start(0.9), encoding="utf-8")
    path = _write(tmp_path, '''[campaign]
name = "t"
scenarios = ["*.toml"]
seeds = [1]
[[vary]]
set = "fault[dip].voltage_pu"
values = [0.6, 0.7]
''')
    (tmp_path / "c.toml").rename(tmp_path / "c.campaign")
    path = tmp_path / "c.campaign"
    runs = load_campaign(path).runs
    # the dip is in start.toml only: two runs of it, one of other.toml
    assert sorted((r.scenario, tuple(r.values.values())) for r in runs) == [
        ("other", ()), ("start", (0.6,)), ("start", (0.7,))]


def test_a_sweep_limited_by_name_applies_there_only(tmp_path: Path) -> None:
    (tmp_path / "other.toml").write_text(short_start(0.9) + DIP, encoding="utf-8")
    path = _write(tmp_path, '''[campaign]
name = "t"
scenarios = ["start.toml", "other.toml"]
[[vary]]
set = "fault[dip].voltage_pu"
values = [0.6, 0.7]
scenarios = ["other"]
''')
    runs = load_campaign(path).runs
    assert sorted((r.scenario, tuple(r.values.values())) for r in runs) == [
        ("other", (0.6,)), ("other", (0.7,)), ("start", ())]


@pytest.mark.parametrize(("campaign", "line", "key", "says"), [
    (HEAD + "colour = 'red'\n", 4, "colour", "unknown key"),
    ('[campaign]\nname = "t"\nscenarios = ["nothing-*.toml"]\n', 3, "scenarios",
     "matches no file"),
    (HEAD + '[[vary]]\nset = "fault[no such].voltage_pu"\nvalues = [0.5]\n', 5, "set",
     "fault[no such].voltage_pu is in none of the campaign's scenarios"),
    (HEAD + '[[vary]]\nset = "fault[dip].angle_deg"\nvalues = [5.0]\n', 5, "set",
     "no parameter 'angle_deg'"),
    (HEAD + '[[vary]]\nset = "adhesion[wet rail].colour"\nvalues = [5.0]\n', 5, "set",
     "has no 'colour'"),
    (HEAD + '[[vary]]\nset = "driver[start].for_s"\nvalues = [5.0]\n', 5, "set",
     "has no 'for_s' written"),
    (HEAD + '[[vary]]\nset = "wheel.radius"\nvalues = [5.0]\n', 5, "set",
     "not an address"),
    (HEAD + '\n[[vary]]\nset = "adhesion[wet rail].factor"\nvalues = [0.5, 2.5]\n', 7,
     "values", "factor = 2.5"),
    (HEAD + '[[vary]]\nset = "adhesion[wet rail].factor"\nvalues = []\n', 6, "values",
     "expected a list"),
    (HEAD + '[[vary]]\nset = "adhesion[wet rail].factor"\nvalues = [0.5]\n'
     'scenarios = ["nope"]\n', 7, "scenarios", "no scenario 'nope'"),
    (HEAD + '[[vary]]\nset = "adhesion[wet rail].factor"\nfrom = 0.5\nto = 0.9\n', 4,
     "steps", "missing"),  # a missing key: the line of its table
    (HEAD + "seeds = [1, 1.5]\n", 4, "seeds", "whole numbers"),
    (HEAD + '[[vary]]\nset = "fault[dip].at_s"\nvalues = [1.0]\n'
     '[[vary]]\nset = " fault[dip].at_s"\nvalues = [2.0]\n', 8, "set", "swept twice"),
    (HEAD + 'controller = "udp://{rig}?peer={bind}"\n', 4, "controller",
     "needs controller_command"),
    (HEAD + 'controller = "udp://{rig}"\ncontroller_command = "x {bind}"\n', 4,
     "controller", "both {rig}"),
    (HEAD + 'controller = "udp://{rig}?peer={bind}"\ncontroller_command = "x {port}"\n', 5,
     "controller_command", "unknown placeholder {port}"),
    (HEAD + 'controller = "udp://{rig}?peer={bind}"\ncontroller_command = "x \'{bind}"\n',
     5, "controller_command", "cannot split it"),
    (HEAD + 'controller = "udp://127.0.0.1:5000?peer=127.0.0.1:5001"\n'
     'controller_command = "x {bind}"\n', 5, "controller_command", "this URL is fixed"),
    (HEAD + 'plot = ["gets awya"]\n', 4, "plot", "no check of the campaign's scenarios"),
    (HEAD + 'trainsets = ["a/tern.toml", "b/tern.toml"]\n', 4, "trainsets",
     "two trainset files are named 'tern'"),
])
def test_campaign_file_errors_name_file_line_and_key(tmp_path: Path, campaign: str,
                                                     line: int, key: str, says: str) -> None:
    for twin in ("a", "b"):  # two trainsets of one name, in two folders
        (tmp_path / twin).mkdir()
        (tmp_path / twin / "tern.toml").write_text(
            (TRAINSETS / "tern-15kv.toml").read_text(encoding="utf-8").replace(
                "../machines/", str(TRAINSETS.parent / "machines") + "/"), encoding="utf-8")
    path = _write(tmp_path, campaign)
    with pytest.raises(CampaignError) as err:
        load_campaign(path)
    message = str(err.value)
    assert message.startswith(f"{path}:{line}: "), message
    assert f"] {key}: " in message and says in message, message


def test_an_address_says_its_forms() -> None:
    assert str(parse_address(" fault[dip 2].voltage_pu ")) == "fault[dip 2].voltage_pu"
    with pytest.raises(ValueError, match=r"the forms: fault\[LABEL\]"):
        parse_address("fault.dip.voltage_pu")


def test_a_matrix_too_large_is_refused_before_anything_is_loaded(tmp_path: Path) -> None:
    sweeps = "".join(f'[[vary]]\nset = "scenario.{key}"\nfrom = 1\nto = 10\nsteps = 1000\n'
                     for key in ("initial_speed_kmh", "duration_s"))
    path = _write(tmp_path, HEAD + "seeds = [1, 2]\n" + sweeps)
    with pytest.raises(CampaignError, match=r"up to 2000000 runs, more than 100000"):
        load_campaign(path)


def test_a_file_that_is_not_utf8_is_an_error_naming_it(tmp_path: Path) -> None:
    path = _write(tmp_path, HEAD)
    path.write_bytes(HEAD.replace('"t"', '"caf\xe9"').encode("latin-1"))
    with pytest.raises(CampaignError, match=f"{path}: not UTF-8"):
        load_campaign(path)
