"""The PWM ripple the gate drivers' overcurrent comparator sees on top of the plant's
switching-period averages (emulator/plant/inverter.py, ripple_peaks).

Oracle: the switching itself, simulated here the long way: three legs compared with a
symmetric triangular carrier (each leg high where the carrier lies below its duty:
centre-aligned, regular-sampled PWM, Holmes & Lipo, *Pulse Width Modulation for Power
Converters*, 2003, ch. 3), the star point's voltage (v_a0 + v_b0 + v_c0) / 3, and the
phase current of an inductance under a back-EMF that holds the average current steady,
integrated over a carrier period on 100 000 points; the ripple is the current less its
mean over the period. Its discretisation error is below U T / (L 100 000) (measured:
2.4e-5 relative), under the tolerance of 0.1 % or 1e-4 U T / L.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from emulator.plant import Commands, Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.plant.inverter import RIPPLE_BOUND, ripple_inductance, ripple_peaks
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET

POINTS = 100_000


def switched_ripple(duties: tuple[float, float, float], udc: float, l_h: float,
                    f_sw: float) -> np.ndarray:
    """The largest |i - mean i| of each phase over a carrier period, simulated."""
    t = (np.arange(POINTS) + 0.5) / POINTS  # a carrier period, in periods
    carrier = np.abs(2.0 * t - 1.0)  # 1 at the period's edges, 0 at its middle
    legs = np.array([(carrier < d).astype(float) for d in duties]) * udc  # v_x- (low rail)
    phase = legs - legs.mean(axis=0)  # against the star point
    # the back-EMF is each phase voltage's mean: the average current does not move
    di = (phase - phase.mean(axis=1, keepdims=True)) / l_h / (f_sw * POINTS)
    current = np.cumsum(di, axis=1)
    return np.abs(current - current.mean(axis=1, keepdims=True)).max(axis=1)


@pytest.mark.parametrize("duties", [
    (0.5, 0.5, 0.5),  # the zero vector only: no ripple
    (0.95, 0.2, 0.05),  # a high modulation
    (0.7, 0.3, 0.5),
    (0.6, 0.6, 0.1),  # two legs switching together
    (1.0, 0.0, 0.0),  # no switching at all
    (0.8, 0.35, 0.2),
])
def test_the_ripple_is_the_switched_circuits(duties) -> None:
    udc, l_h, f_sw = 1800.0, 1.0e-3, 800.0
    simulated = switched_ripple(duties, udc, l_h, f_sw)
    ours = np.array(ripple_peaks(*duties, udc, l_h, f_sw))
    assert ours == pytest.approx(simulated, rel=1e-3, abs=1e-4 * udc / (l_h * f_sw))


@settings(max_examples=300, deadline=None)
@given(st.tuples(*[st.floats(0.0, 1.0)] * 3))
def test_the_shortcuts_bound_holds_for_any_duties(duties) -> None:
    """The comparator works the ripple out only where RIPPLE_BOUND U / (f L) could reach
    its threshold: that bound must hold for any duties, or a trip would be missed (its
    derivation: inverter.RIPPLE_BOUND)."""
    udc, l_h, f_sw = 1800.0, 1.0e-3, 800.0
    bound = RIPPLE_BOUND * udc / (f_sw * l_h)
    assert max(ripple_peaks(*duties, udc, l_h, f_sw)) <= bound * (1 + 1e-12)


def test_the_shortcuts_bound_is_reached() -> None:
    """... and it is the largest there is, not a loose one: the switched circuit reaches
    it at duties (0, 0, 1/2)."""
    udc, l_h, f_sw = 1800.0, 1.0e-3, 800.0
    simulated = switched_ripple((0.0, 0.0, 0.5), udc, l_h, f_sw).max()
    assert simulated == pytest.approx(RIPPLE_BOUND * udc / (f_sw * l_h), rel=1e-3)


def test_the_ripple_inductance_is_the_motors_transient_inductances_in_parallel() -> None:
    params = load_trainset(TRAINSET)
    plant = Plant(params, ideal_dc_links=True)
    m = params.machine
    sigma_ls = m.stator_leakage_h + (m.magnetising_h * m.rotor_leakage_h
                                     / (m.magnetising_h + m.rotor_leakage_h))
    first = 0
    for k, converter in enumerate(params.converters):  # every inverter, its own motors
        n = len(converter.wheel_diameters_m)
        assert plant.ipar[k, L.IP_L_RIPPLE] == pytest.approx(sigma_ls / n, rel=1e-12)
        assert ripple_inductance(plant.mpar[first:first + n]) == plant.ipar[k, L.IP_L_RIPPLE]
        first += n
    assert first == plant.n_motors


def test_the_gate_drivers_see_the_ripples_peak() -> None:
    """Duties (0.6, 0.4, 0.4) on inverter 0 drive its phase-a current up, switching all
    the while (about 16 A a sub-step under a ripple of 54.5 A at the duties the dead time
    leaves): the drivers trip in the sub-step whose average plus the simulated ripple
    first passes the threshold, while the average is still short of it."""
    params = load_trainset(TRAINSET)
    plant = Plant(params, ideal_dc_links=True)
    limit, ip = params.inverter.hardware_trip_a, params.inverter
    duty = np.full((plant.n_inverters, 3), 0.5)
    duty[0] = (0.6, 0.4, 0.4)
    gates = np.zeros(plant.n_inverters, bool)
    gates[0] = True
    # the dead time shortens a leg's pulses by t_d f_sw against its current (a: +; b, c: -)
    shift = ip.dead_time_s * ip.switching_frequency_hz
    effective = (0.6 - shift, 0.4 + shift, 0.4 + shift)
    udc = plant.lst[0, L.LS_UDC]
    ripple = switched_ripple(effective, udc, plant.ipar[0, L.IP_L_RIPPLE],
                             ip.switching_frequency_hz)
    assert ripple[0] > 50.0  # (enough to tell the two comparators apart)
    average, tripped = [], []
    for _ in range(400):
        plant.advance(Commands(duty, gates), 125e-6)
        average.append(plant.ist[0, L.IS_IA])
        tripped.append(plant.ist[0, L.IS_HW_TRIP] > 0.5)
    average, tripped = np.array(average), np.array(tripped)
    first = int(np.argmax(tripped))
    assert tripped[first] and not tripped[:first].any()
    assert average[first] + ripple[0] > limit  # the peak passed the threshold ...
    assert average[first] < limit  # ... before the average did
    assert average[first - 1] + ripple[0] * (1 + 1e-3) <= limit  # and not a step earlier
