"""SOGI-PLL (Ciobotaru, Teodorescu & Blaabjerg, PESC 2006) against the known signal."""

from __future__ import annotations

import math

import pytest

from emulator.controller.pll import SogiPll


@pytest.mark.parametrize("f_hz", [50.0, 49.5, 50.5, 16.7, 16.5, 17.0])
def test_locks_on_phase_and_frequency_with_harmonics(f_hz: float) -> None:
    nominal = 50.0 if f_hz > 30 else 16.7
    pll = SogiPll(nominal, 1e-3)
    errors = []
    for k in range(4000):
        t = k * 1e-3
        theta = 2 * math.pi * f_hz * t + 0.7
        v = 35355 * (math.sin(theta) + 0.015 * math.sin(3 * theta))  # a 1.5 % third harmonic
        est = pll.update(v)
        if k > 3000:
            errors.append((est - theta + math.pi) % (2 * math.pi) - math.pi)
    assert max(abs(e) for e in errors) < math.radians(2.0)  # the harmonic wobbles it a little
    assert abs(sum(errors) / len(errors)) < math.radians(0.2)
    assert pll.amplitude == pytest.approx(35355, rel=0.02)
