"""The reference controller's compiled parts (the scalar control's circuit and searches,
the magnetising curve, the modulation) against the same code in plain Python (numba's
``py_func``), and the circuit against the textbook one of tests/oracles.py.

Compiled without fastmath, the arithmetic is IEEE 754 as Python's: the two agree to the
last bit, or to a few units in the last place where numba's complex division and
``abs`` take another (equally correct) path than CPython's; 1e-12 relative bounds that.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from emulator.controller import flux_curve, modulation
from emulator.controller import slip_circuit as sc
from emulator.controller.config import config_from_profile
from emulator.controller.motor_scalar import BISECTIONS, ScalarControl
from tests.oracles import EquivalentCircuit

from .conftest import TRAINSET


@pytest.fixture(scope="module")
def control() -> ScalarControl:
    return ScalarControl(config_from_profile(TRAINSET), 2)


def _close(a, b) -> bool:
    return all(abs(complex(x) - complex(y)) <= 1e-12 * max(abs(complex(y)), 1e-300)
               for x, y in zip(a, b, strict=True))


@settings(max_examples=200, deadline=None)
@given(w_sl=st.floats(-60.0, 60.0), w_r=st.floats(-900.0, 900.0),
       u_room=st.floats(1.0, 1500.0), lm=st.floats(0.01, 0.05))
def test_compiled_and_plain_python_agree(control, w_sl, w_r, u_room, lm) -> None:
    c = control.circuit
    assert _close(sc.operating_point(c, w_sl, w_r, u_room, lm),
                  sc.operating_point.py_func(c, w_sl, w_r, u_room, lm))
    end = math.copysign(40.0, w_sl or 1.0)
    torque = abs(sc.operating_point(c, 0.5 * end, w_r, u_room, lm)[0])
    t_end = abs(sc.operating_point(c, end, w_r, u_room, lm)[0])
    args = (c, torque, end, t_end, 0.3 * end, w_r, u_room, lm, BISECTIONS)
    assert _close([sc.slip_for_torque(*args)], [sc.slip_for_torque.py_func(*args)])
    assert _close([sc.breakdown_slip(c, 1.0, w_r, u_room, lm, BISECTIONS)],
                  [sc.breakdown_slip.py_func(c, 1.0, w_r, u_room, lm, BISECTIONS)])


def test_torque_is_the_textbook_circuits(control) -> None:
    """At the rated voltage below the flux cap the compiled torque is the T-circuit's
    (Fitzgerald, Kingsley & Umans, ch. 6: tests/oracles.EquivalentCircuit), whose
    voltage is then the flux the circuit gives: solve at the oracle's flux."""
    cfg = control.cfg
    lm = cfg.magnetising_h
    w = 2 * math.pi * cfg.rated_frequency_hz
    oracle = EquivalentCircuit(cfg.stator_resistance_ohm, w * cfg.stator_leakage_h, w * lm,
                               w * cfg.rotor_leakage_h, cfg.rotor_resistance_ohm,
                               cfg.rated_voltage_v / math.sqrt(3), cfg.rated_frequency_hz,
                               2 * cfg.pole_pairs)
    c = control.circuit.copy()
    c[sc.CIRCUIT_PSI_RATED] = np.inf  # the flux from the voltage alone
    for slip in (0.005, 0.0124, 0.03, -0.005, -0.0124, -0.03):  # motoring, generating
        w_sl = slip * w
        u_peak = cfg.rated_voltage_v * math.sqrt(2 / 3)
        torque = sc.operating_point(c, w_sl, w - w_sl, u_peak, lm)[0]
        assert torque == pytest.approx(oracle.torque(slip), rel=1e-9)


@settings(max_examples=200, deadline=None)
@given(x=st.floats(0.0, 400.0))
def test_magnetising_curve_compiled_and_plain_agree(control, x) -> None:
    curve = control.curve
    assert flux_curve.interpolate(x, curve.i, curve.psi) == flux_curve.interpolate.py_func(
        x, curve.i, curve.psi)
    psi = x / 100.0
    assert flux_curve.secant_lm(psi, curve.i, curve.psi) == flux_curve.secant_lm.py_func(
        psi, curve.i, curve.psi)


def test_magnetising_curve_on_the_profiles_points(control) -> None:
    """At the type test's points the curve gives their fluxes, and half way between two
    points the mean of theirs (linear interpolation)."""
    cfg = control.cfg
    for i_m, psi in zip(cfg.saturation_current_a, cfg.saturation_flux_vs, strict=True):
        assert control.curve.flux(i_m) == pytest.approx(psi, rel=1e-12)
        assert control.curve.lm(psi) == pytest.approx(psi / i_m, rel=1e-12)
    i0, i1 = cfg.saturation_current_a[1:3]
    p0, p1 = cfg.saturation_flux_vs[1:3]
    assert control.curve.flux(0.5 * (i0 + i1)) == pytest.approx(0.5 * (p0 + p1), rel=1e-12)


@settings(max_examples=200, deadline=None)
@given(u_re=st.floats(-1500.0, 1500.0), u_im=st.floats(-1500.0, 1500.0),
       u_dc=st.floats(0.0, 4000.0), i_re=st.floats(-3000.0, 3000.0),
       i_im=st.floats(-3000.0, 3000.0), compensate=st.booleans())
def test_modulation_compiled_and_plain_agree(u_re, u_im, u_dc, i_re, i_im, compensate) -> None:
    args = (complex(u_re, u_im), u_dc, complex(i_re, i_im), compensate, 3e-6 * 1000 * u_dc,
            20.0)
    assert _close(modulation.leg_duties(*args), modulation.leg_duties.py_func(*args))


def test_modulation_gives_the_asked_line_voltages() -> None:
    """Within the linear range the duties' differences times U_dc are the asked vector's
    line-to-line voltages (the zero sequence cancels; Holmes & Lipo, ch. 6)."""
    u, u_dc = cmath_rect(900.0, 0.7), 2000.0
    d = modulation.duties(u, u_dc)
    phases = [(u * complex(math.cos(k * 2 * math.pi / 3), -math.sin(k * 2 * math.pi / 3))).real
              for k in range(3)]
    for a, b in ((0, 1), (1, 2), (2, 0)):
        assert (d[a] - d[b]) * u_dc == pytest.approx(phases[a] - phases[b], rel=1e-12)


def cmath_rect(r: float, phi: float) -> complex:
    return complex(r * math.cos(phi), r * math.sin(phi))


def _start(ripple_hz: float, periods: int = 400):
    """Inputs of a start, one tuple a 1 ms period: rising torque and speed, currents
    turning with the stator frequency, a link rippling at ripple_hz, the rotor angle."""
    theta = 0.0
    for n in range(periods):
        t = n * 1e-3
        torque, speed = 1500.0 * min(t / 0.1, 1.0), 40.0 * t
        u_d = 1800.0 + 40.0 * math.sin(2 * math.pi * ripple_hz * t)
        theta += 2 * math.pi * (2 * speed / (2 * math.pi) + 1.0) * 1e-3
        ia, ib, ic = (300.0 * math.cos(theta - k * 2 * math.pi / 3) for k in range(3))
        yield torque, speed, u_d, ia, ib, ic, speed * t / 2


def test_scalar_torque_step_compiled_and_plain_agree_over_a_start(control) -> None:
    """The scalar control's period (scalar_kernel.torque_step and estimated_torque) run
    compiled and as plain Python side by side over 400 periods of a start: rising torque
    and speed, sampled currents turning with the stator frequency, a rippling link. The
    two states stay together to 1e-12 (see the module's note)."""
    from emulator.controller import scalar_kernel as sk

    args = (control.consts, control.circuit, control.curve.i, control.curve.psi)
    a, b = control.state.copy(), control.state.copy()
    for n, (torque, speed, u_d, ia, ib, ic, angle) in enumerate(_start(100.0)):
        e1 = sk.estimated_torque(a, *args, ia, ib, ic)
        e2 = sk.estimated_torque.py_func(b, *args, ia, ib, ic)
        d1, f1 = sk.torque_step(a, *args, torque, speed, u_d, ia, ib, ic, True, angle, True)
        d2, f2 = sk.torque_step.py_func(b, *args, torque, speed, u_d, ia, ib, ic, True,
                                         angle, True)
        assert _close([e1, f1, *d1], [e2, f2, *d2]), n
        assert _close(a, b), n


def test_vector_step_compiled_and_plain_agree_over_a_start() -> None:
    """The vector control's period (vector_kernel.vector_step) compiled and as plain
    Python over 400 periods of a start with the same inputs (not closed through a plant).
    They may part in the last bits (x ** 2 is libm's pow in Python and x * x in numba,
    and plain Python reads the state array as numpy scalars); over 400 periods of the
    flux model, the observer and the offset filter that stays below 1e-9 relative."""
    from emulator.controller import vector_kernel as vk
    from emulator.controller.motor_vector import VectorControl

    profile = TRAINSET.with_name("tern-15kv.toml")
    control = VectorControl(config_from_profile(profile), 2)
    args = (control.consts, control.curve.i, control.curve.psi)
    a, b = control.state.copy(), control.state.copy()
    for torque, speed, u_d, ia, ib, ic, angle in _start(33.4):
        d1 = vk.vector_step(a, *args, torque, angle, speed, u_d, ia, ib, ic)
        d2 = vk.vector_step.py_func(b, *args, torque, angle, speed, u_d, ia, ib, ic)
        np.testing.assert_allclose(d1, d2, rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-9)
    # the paths ran: the flux model, the observer and the prediction moved
    assert a[vk.V_PSI_R] > 0.0 and a[vk.V_HAS_EXPECTED] == 1.0
    assert abs(complex(a[vk.V_DU_RE], a[vk.V_DU_IM])) > 1.0
    # then 300 periods with the gates blocked (vector_kernel.coast): the same again, and
    # the flux decays as the rotor circuit's exponential with the stator current zero,
    # psi (1 - T / tau_r) per period with tau_r = (L_m + L_lr) / R_r at the secant L_m
    # (Novotny & Lipo, ch. 5); the angle and the field-weakening correction are kept
    a[vk.V_PSI_R] = b[vk.V_PSI_R] = start = control.psi_rated  # (the start's is small)
    a[vk.V_DPSI] = b[vk.V_DPSI] = -0.1  # (a start below base speed has none)
    kept = a[[vk.V_THETA_SLIP, vk.V_DPSI]].copy()
    for _ in range(300):
        psi = a[vk.V_PSI_R]
        lm = vk.machine(control.consts, *args[1:], psi)[0]
        tau_r = (lm + control.cfg.rotor_leakage_h) / control.rr
        vk.coast(a, *args)
        vk.coast.py_func(b, *args)
        np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-9)
        assert a[vk.V_PSI_R] == pytest.approx(psi * (1.0 - control.T / tau_r), rel=1e-12)
    assert a[vk.V_PSI_R] < 0.8 * start  # (it decayed)
    assert np.array_equal(a[[vk.V_THETA_SLIP, vk.V_DPSI]], kept) and kept[0] != 0.0
    assert a[vk.V_HAS_EXPECTED] == a[vk.V_DU_RE] == a[vk.V_U_SENT_RE] == 0.0


def test_the_kernel_knows_the_trips_the_protocol_names() -> None:
    """period_parts.is_trip against emulator.protocol.events.TRIPS, code by code (the
    kernel cannot import the set, so it spells it out)."""
    from emulator.controller import period_parts as pp
    from emulator.protocol import events

    assert [c for c in range(pp.N_EVENT_CODES) if pp.is_trip(c)] == sorted(events.TRIPS)


def test_a_trip_is_not_overwritten_in_its_period() -> None:
    """One code a period reaches the wire: a trip raised in a period stays the period's
    code whatever is raised after it in the same period; the next period starts anew."""
    import numpy as np

    from emulator.controller import period_parts as pp
    from emulator.protocol import events

    g = np.zeros(pp.N_G)
    counts = np.zeros(pp.N_EVENT_CODES, dtype=np.int64)
    pp.raise_event(g, counts, events.HARDWARE_TRIP)
    pp.raise_event(g, counts, events.LINE_UNDERVOLTAGE)
    assert g[pp.G_EVENT] == events.HARDWARE_TRIP
    assert counts[events.LINE_UNDERVOLTAGE] == 1 and counts[0] == 2
    g[pp.G_TRIP_NOW] = 0.0  # what period() does when a period begins
    pp.raise_event(g, counts, events.LINE_UNDERVOLTAGE)
    assert g[pp.G_EVENT] == events.LINE_UNDERVOLTAGE
