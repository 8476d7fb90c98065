"""The plant's rail conditions against the literature, as `railrig adhesion` prints them.

Curtius & Kniffler (Elektrische Bahnen 20, 1950; REFERENCES.md): the adhesion a dry rail
offers, mu = 0.161 + 7.5 / (v + 44), v in km/h. The issue asks the dry creep curve's peak
to follow it within 20 % over 0-160 km/h. Wet rail lies below dry at every speed, and
within the 0.10-0.20 an industry adhesion manual gives for it (REFERENCES.md); the
contaminated rail below the wet one.
"""

from __future__ import annotations

import itertools
import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).parents[2]
SPEEDS = [0.0, 20.0, 40.0, 80.0, 120.0, 160.0]


@pytest.fixture(scope="module")
def curves() -> dict:
    out = subprocess.run(
        [sys.executable, "-m", "emulator.cli", "adhesion", "--profile", "trainsets/tern-25kv",
         "--json"], cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    return json.loads(out.stdout)["conditions"]


def curtius_kniffler(v_kmh: float) -> float:
    return 0.161 + 7.5 / (v_kmh + 44.0)


def test_every_condition_at_the_six_speeds(curves) -> None:
    assert set(curves) >= {"dry", "wet", "contaminated", "sanded"}
    for rows in curves.values():
        assert [r["speed_kmh"] for r in rows] == SPEEDS
        assert all(r["creep_at_peak_mps"] > 0 for r in rows)


def test_dry_peak_follows_curtius_kniffler_within_20_percent(curves) -> None:
    for r in curves["dry"]:
        assert r["mu_peak"] == pytest.approx(curtius_kniffler(r["speed_kmh"]), rel=0.20), r
    # and falls with speed as the law does (0.331 at standstill to 0.198 at 160 km/h;
    # the plant's falls less, about 29 % against 40 %, within the 20 % at each speed)
    peaks = [r["mu_peak"] for r in curves["dry"]]
    assert all(b < a for a, b in itertools.pairwise(peaks)), peaks


def test_wet_below_dry_and_within_the_manuals_range(curves) -> None:
    for dry, wet, dirty in zip(curves["dry"], curves["wet"], curves["contaminated"],
                               strict=True):
        assert dirty["mu_peak"] < wet["mu_peak"] < dry["mu_peak"]
        assert 0.10 <= wet["mu_peak"] <= 0.20, wet


def test_the_peak_is_where_the_force_turns_down() -> None:
    # the peak found is the curve's maximum: a little more or less slip gives less force
    from emulator.plant.drivetrain import RAIL_CONDITIONS, creep_curve_peak, polach_force

    q, k, v_ref = 15500 * 9.81, 1.7e7, 0.1
    for name in RAIL_CONDITIONS:
        for v in (0.0, 20.0 / 3.6, 160.0 / 3.6):
            mu, w = creep_curve_peak(name, v, q, k, v_ref)
            for other in (0.9 * w, 1.1 * w):
                assert polach_force(other, v, q, k, *RAIL_CONDITIONS[name], v_ref)[0] / q < mu


def test_the_plot_and_a_wrong_condition(tmp_path) -> None:
    png = tmp_path / "creep.png"
    out = subprocess.run(
        [sys.executable, "-m", "emulator.cli", "adhesion", "--condition", "wet", "--png",
         str(png)], cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "wet" in out.stdout
    bad = subprocess.run([sys.executable, "-m", "emulator.cli", "adhesion", "--condition",
                          "icy"], cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert bad.returncode == 2
    assert "no rail condition 'icy'" in bad.stderr
