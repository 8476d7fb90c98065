"""Low-adhesion zones reach each motored axle at its own place; the axles ahead condition
the rail for those behind (the documented model in emulator/scenario/track.py)."""

from __future__ import annotations

import pytest

from emulator.plant import Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.plant.drivetrain import RAIL_CONDITIONS
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.scenario.spec import AdhesionZone, TrackSpec
from emulator.scenario.track import Track

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"


def _mu0(plant: Plant) -> list[float]:
    return list(plant.mpar[:, L.MP_MU0] * plant.mpar[:, L.MP_ADHESION_FACTOR])


def _at(track: Track, plant: Plant, x: float) -> list[float]:
    plant.ts[L.TS_POSITION] = x
    track.update(None)
    return _mu0(plant)


def test_axles_enter_a_zone_one_after_another() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    zone = AdhesionZone(100.0, 110.0, "wet", 1.0, (), "wet patch")
    track = Track(TrackSpec(adhesion_zones=(zone,)), plant)
    dry, wet = RAIL_CONDITIONS["dry"][2], RAIL_CONDITIONS["wet"][2]
    # front end at 103 m: only the first axle (2.5 m behind it, at 100.5 m) is in
    assert _at(track, plant, 103.0) == pytest.approx([wet] + [dry] * 7)
    # at 124 m: axles at 2.5 / 5.0 m behind are past the zone, 19.5 / 22.0 m are in it
    assert _at(track, plant, 124.0) == pytest.approx([dry, dry, wet, wet] + [dry] * 4)
    assert _at(track, plant, 300.0) == pytest.approx([dry] * 8)


def test_zone_edges_from_in_to_out() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    zone = AdhesionZone(100.0, 110.0, "wet", 1.0, (), "wet patch")
    track = Track(TrackSpec(adhesion_zones=(zone,)), plant)
    dry, wet = RAIL_CONDITIONS["dry"][2], RAIL_CONDITIONS["wet"][2]
    assert _at(track, plant, 102.5)[0] == pytest.approx(wet)  # axle at from_m: in
    assert _at(track, plant, 112.5)[0] == pytest.approx(dry)  # axle at to_m: out


def test_each_axle_ahead_cleans_a_contaminated_rail() -> None:
    """A check of the documented model (its formula and its invented rate, no outside
    source): mu_n = mu_line - (mu_line - mu_zone) (1 - c)^n, n the motored axles ahead."""
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    zone = AdhesionZone(0.0, 1000.0, "contaminated", 1.0, (), "leaf film", 0.1)
    track = Track(TrackSpec(adhesion_zones=(zone,)), plant)
    line, film = RAIL_CONDITIONS["dry"][2], RAIL_CONDITIONS["contaminated"][2]
    mu = _at(track, plant, 500.0)
    # the model's formula by hand: mu_n = mu_line - (mu_line - mu_zone) 0.9^n
    assert mu == pytest.approx([line - (line - film) * 0.9 ** n for n in range(8)])


def test_running_backwards_the_rear_axle_leads() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.set_speed(-2.0)
    zone = AdhesionZone(0.0, 1000.0, "contaminated", 1.0, (), "leaf film", 0.1)
    track = Track(TrackSpec(adhesion_zones=(zone,)), plant)
    line, film = RAIL_CONDITIONS["dry"][2], RAIL_CONDITIONS["contaminated"][2]
    mu = _at(track, plant, 500.0)
    assert mu == pytest.approx([line - (line - film) * 0.9 ** n for n in range(7, -1, -1)])
