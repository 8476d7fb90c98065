"""The scalar control's compiled circuit against the same code in plain Python (numba's
``py_func``) and against the textbook circuit of tests/oracles.py.

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
    assert _close([sc.slip_for_torque(c, torque, end, w_r, u_room, lm, BISECTIONS)],
                  [sc.slip_for_torque.py_func(c, torque, end, w_r, u_room, lm, BISECTIONS)])
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
    for slip in (0.005, 0.0124, 0.03):
        w_sl = slip * w
        u_peak = cfg.rated_voltage_v * math.sqrt(2 / 3)
        torque = sc.operating_point(c, w_sl, w - w_sl, u_peak, lm)[0]
        assert torque == pytest.approx(oracle.torque(slip), rel=1e-9)
