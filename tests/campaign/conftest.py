"""A short scenario and campaign files for the campaign tests (test data, invented)."""

from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).parents[2]
TRAINSET = ROOT / "profiles" / "trainsets" / "tern-15kv.toml"

#: a 9 s start on a 30 per mille gradient on wet rail: on the dry-rail side of the wet
#: rail's friction (factor 1.0) the train gets away within 5 s of the start; at a factor
#: of 0.6 it does not (it is adhesion-limited, as the shipped wet-start scenario shows at
#: 0.68 over its 40 s): one passing and one failing run, so comparisons see both verdicts
SHORT_START = '''
[scenario]
name = "short wet start"
trainset = "{trainset}"
duration_s = 9.0

[track]
[[track.gradient]]
from_m = -100.0
permille = 30.0
[[track.low_adhesion]]
from_m = -100.0
to_m = 1000.0
rail = "wet"
factor = {factor}
label = "wet rail"

[driver]
[[driver.step]]
mode = "hold"
name = "switch-on"
for_s = 3.0
[[driver.step]]
mode = "accelerate"
name = "start"
effort = 1.0
to_kmh = 40.0

[[check]]
name = "gets away: 5 km/h within 5 s"
signal = "train.speed_kmh"
rises_to = 5.0
by_s = 5.0
after = "start"

[[check]]
name = "no protective trip"
not_raised = "trip"
'''

CAMPAIGN = '''
[campaign]
name = "two by two"
scenarios = ["start.toml"]
controller = "reference"
seeds = [1, 2]
record = "all"
plot = ["gets away: 5 km/h within 5 s"]

[[vary]]
set = "adhesion[wet rail].factor"
values = [1.0, 0.6]
'''


def short_start(factor: float = 0.68) -> str:
    """The short start's text with the wet rail's factor written in."""
    return SHORT_START.format(trainset=TRAINSET, factor=factor)


@pytest.fixture
def campaign_dir(tmp_path: Path) -> Path:
    """A folder with the short start and a 2 x 2 campaign of it (factor x seed)."""
    (tmp_path / "start.toml").write_text(short_start(), encoding="utf-8")
    (tmp_path / "two.toml").write_text(CAMPAIGN, encoding="utf-8")
    return tmp_path
