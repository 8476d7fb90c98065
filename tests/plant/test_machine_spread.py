"""Motors on one inverter that differ: load sharing with a rotor-resistance difference.

Two motors on one inverter at one speed (one slip) share the torque by their circuits:
the torque of each from its T-equivalent circuit (Fitzgerald, Kingsley & Umans,
*Electric Machinery*, ch. 6; tests/oracles.py), each at its own saturation. The
first-order estimate near synchronous speed, T ~ s / R_r so dT/T ~ -dR_r/R_r, is the
limit for a vanishing slip; at the rated 1.24 % slip the circuit's sensitivity is -0.91
of it (it is shown, not the check).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from emulator.plant import Plant
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from tests.oracles import saturated_circuit

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
MACHINE = PROFILES_DIR / "machines" / "tern-tm310.toml"


def _with(tmp_path: Path, old: str, new: str) -> Path:
    text = TRAINSET.read_text()
    assert old in text
    (tmp_path / "trainsets").mkdir()
    (tmp_path / "machines").mkdir()
    (tmp_path / "machines" / MACHINE.name).write_text(MACHINE.read_text())
    out = tmp_path / "trainsets" / TRAINSET.name
    out.write_text(text.replace(old, new, 1))
    return out


def test_rotor_resistance_difference_shares_torque_as_s_over_r(tmp_path) -> None:
    first = 'wheel_diameters_m = [0.850, 0.850]\n'
    params = load_trainset(_with(tmp_path, first,
                                 first + "rotor_resistance_factors = [1.0, 1.05]\n"))
    assert params.converters[0].machine_factors == ((1.0, 1.0, 1.0), (1.0, 1.05, 1.0))
    plant = Plant(params, ideal_dc_links=True)
    # the rated point of the TM-310: 1200 V, 62 Hz, 1.24 % slip (its profile)
    m = params.machine
    plant.drive_from_sine(0, m.rated_voltage_v * math.sqrt(2 / 3), m.rated_frequency_hz)
    speed = (1 - 0.0124) * 2 * math.pi * m.rated_frequency_hz / m.pole_pairs
    plant.impose_speed(0, speed)
    plant.impose_speed(1, speed)
    for _ in range(3000):  # several rotor time constants (L_r / R_r = 0.62 s)
        plant.advance(None)
    t1, t2 = plant.read("motor.torque_nm")[:2]
    c1, c2 = saturated_circuit(m, 0.0124), saturated_circuit(m, 0.0124, r_r_factor=1.05)
    expected = c2.torque(0.0124) / c1.torque(0.0124) - 1
    # each torque within the plant's step error (~1e-4 relative): 1 % of the difference
    assert (t2 - t1) / t1 == pytest.approx(expected, rel=0.01)
    assert expected == pytest.approx(-0.91 * 0.05 / 1.05, rel=0.02)  # the first order


def test_a_seeded_spread_is_drawn_within_its_tolerance_and_repeats(tmp_path) -> None:
    spread = ("[machine_spread]\nseed = 11\nrotor_resistance_pct = 3.0\n"
              "magnetising_inductance_pct = 2.0\n\n[train]")
    a = load_trainset(_with(tmp_path, "[train]", spread))
    factors = [f for c in a.converters for f in c.machine_factors]
    assert len(factors) == 8
    assert all(f[0] == 1.0 and abs(f[1] - 1) <= 0.03 and abs(f[2] - 1) <= 0.02
               for f in factors)
    assert len({f[1] for f in factors}) == 8  # drawn, not all alike
    b = load_trainset(tmp_path / "trainsets" / TRAINSET.name)
    assert [c.machine_factors for c in b.converters] == [c.machine_factors
                                                          for c in a.converters]


def test_the_seeded_draws_are_uniform_over_the_tolerance(tmp_path) -> None:
    """Over 40 seeds (320 motors) the rotor-resistance factors follow the stated
    uniform(-3 %, +3 %) law: a Kolmogorov-Smirnov test (scipy.stats.kstest) does not
    reject it at the 0.1 % level, and rejects a law a tenth as wide or one-sided."""
    from scipy import stats

    path = _with(tmp_path, "[train]", "[machine_spread]\nseed = 0\nrotor_resistance_pct = "
                 "3.0\n\n[train]")
    text = path.read_text()
    draws = []
    for seed in range(40):
        path.write_text(text.replace("seed = 0\n", f"seed = {seed}\n"))
        draws += [f[1] - 1 for c in load_trainset(path).converters for f in c.machine_factors]
    assert len(draws) == 320
    assert stats.kstest(draws, stats.uniform(-0.03, 0.06).cdf).pvalue > 1e-3
    assert stats.kstest(draws, stats.uniform(-0.003, 0.006).cdf).pvalue < 1e-3
    assert stats.kstest(draws, stats.uniform(0.0, 0.03).cdf).pvalue < 1e-3
