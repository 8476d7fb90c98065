"""Steady state of the textbook machines on an ideal source against the equivalent circuit.

Oracle: Thevenin form of the per-phase equivalent circuit (Fitzgerald, Kingsley & Umans,
Electric Machinery, 6th ed., ch. 6; from memory), computed in tests/oracles.py from the
published parameters of Krause, Wasynczuk & Sudhoff (2002). The issue asked for 0.5 %;
the plant's zero-order-hold solution is exact for a sinusoidal source at a held speed, so
once the start's transient has died away the two agree to the rounding (about 1e-9
measured). Checked to 1e-6: a rotor resistance 0.4 % off, which passed at 0.5 %, fails.
The slowest transient, the 2250 hp machine at standstill, falls by e every 2.8 s
(measured: 7.7e-4 after 20 s, 2.1e-5 after 30 s): standstill gets 60 s.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from emulator.plant import Plant
from tests.oracles import EquivalentCircuit, krause_circuit

from .conftest import machine_profile, steady_on_dynamometer

MACHINES = ["textbook-3hp", "textbook-50hp", "textbook-500hp", "textbook-2250hp"]


def bench(name: str) -> tuple[Plant, EquivalentCircuit]:
    """The machine on a dynamometer, fed at rated voltage and 60 Hz."""
    circuit = krause_circuit(name)
    plant = Plant.test_bench(machine_profile(name), refresh_each_substep=False,
                             frame_s=10e-3)
    plant.drive_from_sine(0, circuit.v_phase_rms * math.sqrt(2), circuit.f_hz)
    return plant, circuit


@pytest.mark.parametrize("name", MACHINES)
@pytest.mark.parametrize("slip", [0.01, 0.05, 0.3, 1.0, -0.03])
def test_torque_and_current_match_equivalent_circuit(name: str, slip: float) -> None:
    plant, circuit = bench(name)
    steady_on_dynamometer(plant, slip, circuit.f_hz, settle_s=60.0 if slip == 1.0 else 20.0)
    torque = float(plant.read("motor.torque_nm")[0])
    current_rms = abs(plant.stator_current(0)) / math.sqrt(2)  # space-vector amplitude = peak
    assert torque == pytest.approx(circuit.torque(slip), rel=1e-6)
    assert current_rms == pytest.approx(circuit.stator_current_rms(slip), rel=1e-6)


def test_published_check_values_of_the_3hp_machine() -> None:
    # REFERENCES.md [derived]: T(s=0.05) = 14.03 N m, s_k = 0.5268, T_k = 61.87 N m,
    # T_start = 52.97 N m for the 3 hp machine at 220 V 60 Hz; the oracle must reproduce them.
    circuit = krause_circuit("textbook-3hp")
    s_k, t_k = circuit.breakdown()
    assert circuit.torque(0.05) == pytest.approx(14.03, abs=0.01)
    assert s_k == pytest.approx(0.5268, abs=1e-4)
    assert t_k == pytest.approx(61.87, abs=0.01)
    assert circuit.torque(1.0) == pytest.approx(52.97, abs=0.01)


def _golden_max(f, lo: float, hi: float, tol: float) -> float:
    """Maximiser of a unimodal f on [lo, hi] by golden-section search."""
    g = (math.sqrt(5) - 1) / 2
    a, b = lo, hi
    c, d = b - g * (b - a), a + g * (b - a)
    fc, fd = f(c), f(d)
    while b - a > tol:
        if fc > fd:
            b, d, fd = d, c, fc
            c = b - g * (b - a)
            fc = f(c)
        else:
            a, c, fc = c, d, fd
            d = a + g * (b - a)
            fd = f(d)
    return 0.5 * (a + b)


@pytest.mark.parametrize("name", MACHINES)
def test_breakdown_found_by_sweeping_the_plant(name: str) -> None:
    plant, circuit = bench(name)
    s_k_ref, t_k_ref = circuit.breakdown()
    torques: dict[float, float] = {}

    def plant_torque(slip: float) -> float:
        steady_on_dynamometer(plant, slip, circuit.f_hz, settle_s=6.0)
        torques[slip] = float(plant.read("motor.torque_nm")[0])
        return torques[slip]

    # search in log(slip) so that small and large breakdown slips resolve alike
    log_s = _golden_max(lambda x: plant_torque(math.exp(x)), math.log(0.005), math.log(1.0),
                        tol=2e-3)
    s_k = math.exp(log_s)
    # the search stops within 2e-3 in log(slip): s_k to 2e-3 relative (a rotor resistance
    # 0.4 % off moves s_k, proportional to it, by 0.4 %); the torque is flat at its
    # maximum, so the best point found is within (2e-3)^2 of T_k, and each point settles
    # for 6 s: 1e-4
    assert s_k == pytest.approx(s_k_ref, rel=2e-3)
    assert max(torques.values()) == pytest.approx(t_k_ref, rel=1e-4)


@given(
    r_s=st.floats(0.01, 2.0), x_ls=st.floats(0.05, 2.0), x_m=st.floats(5.0, 80.0),
    x_lr=st.floats(0.05, 2.0), r_r=st.floats(0.01, 2.0), slip=st.floats(1e-3, 1.0),
)
def test_extended_kloss_form_is_an_identity_of_the_thevenin_torque(r_s, x_ls, x_m, x_lr,
                                                                   r_r, slip) -> None:
    # REFERENCES.md: the extended Kloss form with a = R_th/r'_r equals the Thevenin torque
    # for motoring slips [derived]; a property of the oracle the other tests rely on.
    circuit = EquivalentCircuit(r_s, x_ls, x_m, x_lr, r_r, 127.0, 60.0, 4)
    _, t_k = circuit.breakdown()
    assert circuit.torque(slip) / t_k == pytest.approx(circuit.kloss(slip), rel=1e-9)


def test_no_load_runs_at_synchronous_speed() -> None:
    # n_s = 120 f / P (common practice); a free shaft with no load settles there.
    plant, circuit = bench("textbook-3hp")
    plant.free_shaft(0, 0.0)
    for _ in range(300):
        plant.advance(None)
    n_rpm = float(plant.read("motor.speed_rad_s")[0]) * 60 / (2 * math.pi)
    assert n_rpm == pytest.approx(120 * circuit.f_hz / circuit.poles, rel=1e-6)


def test_dc_injection_settles_to_ohms_law() -> None:
    # a 0 Hz source is DC: the steady stator current is U / R_s (Ohm's law), no torque
    # at standstill; a test the particular-solution path must also pass at zero frequency
    machine = machine_profile("textbook-3hp")
    plant = Plant.test_bench(machine, refresh_each_substep=False, frame_s=10e-3)
    plant.drive_from_sine(0, 10.0, 0.0)
    plant.impose_speed(0, 0.0)
    for _ in range(1000):  # 10 s, some 40 time constants of the slowest mode
        plant.advance(None)
    assert plant.stator_current(0) == pytest.approx(10.0 / machine.stator_resistance_ohm,
                                                    rel=1e-9)
    assert float(plant.read("motor.torque_nm")[0]) == pytest.approx(0.0, abs=1e-9)
