"""The kernel's passes over motors laid out as columns (plant/columns.py) against the
per-motor functions they were written from, to the last bit.

The column passes exist only for speed: the same arithmetic in the same order, on a
layout the compiler vectorises. The per-motor functions (machine.step_flux,
currents_frozen, stator_current_integral, torque; drivetrain.polach_core) are the
readable description, and machine.py's docstring gives their equations and sources.
Inputs are random, in the ranges a traction machine and a wheel-rail contact have.
"""

from __future__ import annotations

import numpy as np
import pytest

from emulator.bench.plant import _frame, _loaded_plant, replicated
from emulator.plant import Commands, Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.plant.columns import (
    C_CRR,
    C_CSR,
    C_CSS,
    C_E_CU_R,
    C_E_CU_S,
    C_E_IN,
    C_G1_RE,
    C_G2_RE,
    C_INT_RE,
    C_IR_RE,
    C_IS_RE,
    C_KI1_RE,
    C_KI2_RE,
    C_N,
    C_P11_RE,
    C_P12_RE,
    C_P21_RE,
    C_P22_RE,
    C_PP,
    C_PR_RE,
    C_PS_RE,
    C_RR,
    C_RS,
    C_T1,
    C_U_RE,
    K_DF,
    K_F,
    W,
    column_buffer,
)
from emulator.plant.drivetrain import polach_core
from emulator.plant.machine import (
    currents_frozen,
    stator_current_integral,
    step_flux,
    torque,
)
from emulator.plant.machine_columns import held_voltage_step
from emulator.plant.probe import SRC_INVERTER, SRC_MOTOR, SRC_SUPPLY
from emulator.plant.shaft import contact_forces, load_contact_columns
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET, machine_profile


def _complex(rng, n, scale):
    return scale * (rng.uniform(-1, 1, n) + 1j * rng.uniform(-1, 1, n))


def _put(c, f, values):
    c[f * W: f * W + len(values)] = values.real
    c[(f + 1) * W: (f + 1) * W + len(values)] = values.imag


def _get(c, f, n):
    return c[f * W: f * W + n] + 1j * c[(f + 1) * W: (f + 1) * W + n]


def _bits(x) -> tuple[int, ...]:
    """A float's or complex's bit patterns: equal bits, not merely equal values (0.0 and
    -0.0 differ here)."""
    z = complex(x)
    return tuple(int(np.float64(v).view(np.uint64)) for v in (z.real, z.imag))


def same(a, b) -> bool:
    return _bits(a) == _bits(b)


@pytest.mark.parametrize("seed", range(4))
def test_the_held_voltage_pass_is_the_per_motor_step_to_the_bit(seed: int) -> None:
    rng = np.random.default_rng(seed)
    n, h = 37, 125e-6
    mx = np.zeros((n, L.MX_N), dtype=np.complex128)
    ms = np.zeros((n, L.MS_N))
    for f, scale in ((L.MX_PSI_S, 2.5), (L.MX_PSI_R, 2.5), (L.MX_IS, 800.0),
                     (L.MX_IR, 800.0), (L.MX_PHI11, 1.0), (L.MX_PHI12, 0.05),
                     (L.MX_PHI21, 0.05), (L.MX_PHI22, 1.0), (L.MX_G1, 1.2e-4),
                     (L.MX_G2, 1e-5), (L.MX_KI1, 400.0), (L.MX_KI2, 400.0)):
        mx[:, f] = _complex(rng, n, scale)
    ms[:, L.MS_CSS] = rng.uniform(50, 400, n)
    ms[:, L.MS_CSR] = rng.uniform(50, 400, n)
    ms[:, L.MS_CRR] = rng.uniform(50, 400, n)
    ms[:, L.MS_RS] = rng.uniform(0.01, 0.1, n)
    ms[:, L.MS_RR] = rng.uniform(0.01, 0.1, n)
    pole_pairs = rng.integers(1, 4, n).astype(float)
    u = _complex(rng, n, 1500.0)

    c = column_buffer(n, 1)
    for f, col in ((C_PS_RE, L.MX_PSI_S), (C_PR_RE, L.MX_PSI_R), (C_IS_RE, L.MX_IS),
                   (C_IR_RE, L.MX_IR), (C_P11_RE, L.MX_PHI11), (C_P12_RE, L.MX_PHI12),
                   (C_P21_RE, L.MX_PHI21), (C_P22_RE, L.MX_PHI22), (C_G1_RE, L.MX_G1),
                   (C_G2_RE, L.MX_G2), (C_KI1_RE, L.MX_KI1), (C_KI2_RE, L.MX_KI2)):
        _put(c, f, mx[:, col])
    for f, col in ((C_CSS, L.MS_CSS), (C_CSR, L.MS_CSR), (C_CRR, L.MS_CRR), (C_RS, L.MS_RS),
                   (C_RR, L.MS_RR)):
        c[f * W: f * W + n] = ms[:, col]
    c[C_PP * W: C_PP * W + n] = pole_pairs
    _put(c, C_U_RE, u)
    held_voltage_step(c, n, h)

    for m in range(n):
        ps0, pr0 = mx[m, L.MX_PSI_S], mx[m, L.MX_PSI_R]
        is0, ir0 = mx[m, L.MX_IS], mx[m, L.MX_IR]
        ps1, pr1 = step_flux(mx, m, u[m])
        is1, ir1 = currents_frozen(ms, m, ps1, pr1)
        int_is = stator_current_integral(mx, m, ps0, pr0, ps1, pr1, u[m], h)
        e_in = 1.5 * (u[m] * int_is.conjugate()).real
        assert same(_get(c, C_PS_RE, n)[m], ps1)
        assert same(_get(c, C_PR_RE, n)[m], pr1)
        assert same(_get(c, C_IS_RE, n)[m], is1)
        assert same(_get(c, C_IR_RE, n)[m], ir1)
        assert same(_get(c, C_INT_RE, n)[m], int_is)
        assert same(c[C_E_IN * W + m], e_in)
        assert same(c[C_T1 * W + m], torque(ps1, is1, pole_pairs[m]))
        assert same(c[C_E_CU_S * W + m], 0.75 * h * ms[m, L.MS_RS] * (
            (is0.real * is0.real + is0.imag * is0.imag)
            + (is1.real * is1.real + is1.imag * is1.imag)))
        assert same(c[C_E_CU_R * W + m], 0.75 * h * ms[m, L.MS_RR] * (
            (ir0.real * ir0.real + ir0.imag * ir0.imag)
            + (ir1.real * ir1.real + ir1.imag * ir1.imag)))


@pytest.mark.parametrize("seed", range(4))
def test_the_contact_passes_are_polach_core_to_the_bit(seed: int) -> None:
    rng = np.random.default_rng(seed)
    n = 41
    mpar = np.zeros((n, L.MP_N))
    ms = np.zeros((n, L.MS_N))
    v = float(rng.uniform(0.0, 45.0))
    mpar[:, L.MP_WHEEL_R] = rng.uniform(0.4, 0.5, n)
    # slip velocities from -3 to +3 m/s about the train's speed, some exactly rolling
    w = rng.uniform(-3.0, 3.0, n) * rng.choice([0.0, 0.01, 1.0], n)
    ms[:, L.MS_OMEGA_W] = (v + w) / mpar[:, L.MP_WHEEL_R]
    load = rng.uniform(50e3, 110e3, n)
    mpar[:, L.MP_POL_KAPPA] = 0.25 * np.pi * rng.uniform(1e8, 3e8, n) / load
    mpar[:, L.MP_POL_SCALE] = 2.0 * load / np.pi
    mpar[:, L.MP_KA] = rng.uniform(0.1, 1.0, n)
    mpar[:, L.MP_KS] = rng.uniform(0.1, 1.0, n)
    mpar[:, L.MP_MU0] = rng.choice([0.0, 0.2, 0.3, 0.55], n)  # no friction, some
    mpar[:, L.MP_ADHESION_FACTOR] = rng.uniform(0.2, 1.0, n)
    mpar[:, L.MP_POL_A] = rng.uniform(0.2, 0.5, n)
    mpar[:, L.MP_POL_B] = rng.uniform(0.2, 0.7, n)
    mpar[:, L.MP_CREEP_VREF] = rng.uniform(0.5, 2.0, n)

    c = column_buffer(n, 1)
    load_contact_columns(mpar, c)
    contact_forces(mpar, ms, c, v)

    for m in range(n):
        slip = ms[m, L.MS_OMEGA_W] * mpar[m, L.MP_WHEEL_R] - v
        f, df = polach_core(slip, v, mpar[m, L.MP_POL_KAPPA], mpar[m, L.MP_POL_SCALE],
                            mpar[m, L.MP_KA], mpar[m, L.MP_KS],
                            mpar[m, L.MP_MU0] * mpar[m, L.MP_ADHESION_FACTOR],
                            mpar[m, L.MP_POL_A], mpar[m, L.MP_POL_B],
                            mpar[m, L.MP_CREEP_VREF])
        assert same(c[K_F * W + m], f), m
        assert same(c[K_DF * W + m], df), m
    # (not of nothing: forces both ways, and the frictionless axles give none)
    forces = c[K_F * W: K_F * W + n]
    assert (forces > 0).any() and (forces < 0).any()
    assert (forces[mpar[:, L.MP_MU0] == 0.0] == 0.0).all()


def test_after_a_frame_the_columns_hold_the_motors_state_and_coefficients() -> None:
    # what the refresh writes into the columns and the frame's end writes back: the
    # same quantities, to the bit, as mx and ms hold (the demo trainset under load)
    plant, vf = _loaded_plant(load_trainset(TRAINSET))
    for _ in range(3):
        _frame(plant, vf)
    c, n = plant.cols, plant.n_motors
    for f, col in ((C_PS_RE, L.MX_PSI_S), (C_PR_RE, L.MX_PSI_R), (C_IS_RE, L.MX_IS),
                   (C_IR_RE, L.MX_IR), (C_P11_RE, L.MX_PHI11), (C_P12_RE, L.MX_PHI12),
                   (C_P21_RE, L.MX_PHI21), (C_P22_RE, L.MX_PHI22), (C_G1_RE, L.MX_G1),
                   (C_G2_RE, L.MX_G2), (C_KI1_RE, L.MX_KI1), (C_KI2_RE, L.MX_KI2)):
        assert all(same(a, b) for a, b in zip(_get(c, f, n), plant.mx[:, col], strict=True)), f
    for f, col in ((C_CSS, L.MS_CSS), (C_CSR, L.MS_CSR), (C_CRR, L.MS_CRR), (C_RS, L.MS_RS),
                   (C_RR, L.MS_RR)):
        assert all(same(a, b) for a, b in zip(c[f * W: f * W + n], plant.ms[:, col],
                                              strict=True)), f
    assert (c[C_PP * W: C_PP * W + n] == plant.mpar[:, L.MP_POLE_PAIRS]).all()
    assert (np.abs(plant.mx[:, L.MX_IS]) > 100.0).all()  # (under load: not of zeros)


@pytest.mark.parametrize("refresh_each", [False, True])
def test_an_open_phase_on_an_inverter_keeps_its_current_and_copper_loss(
        refresh_each: bool) -> None:
    # a motor with phase b open on a (ideal) inverter, not a sine source: the open
    # phase carries no current (Fitzgerald, Kingsley and Umans, single-phasing), and the
    # stator copper loss over each sub-step is the trapezoid of 3/2 R_s |i_s|^2 with
    # |i_s|^2 = 2/3 (i_a^2 + i_b^2 + i_c^2) (amplitude-invariant Clarke transform)
    machine = machine_profile("textbook-3hp")
    plant = Plant.test_bench(machine, dc_link_v=400.0, refresh_each_substep=refresh_each)
    plant.mpar[:, L.MP_G_CORE] = 0.0  # (the phase currents are the stator's alone)
    f_hz, slip = 60.0, 0.03
    plant.impose_speed(0, (1 - slip) * 2 * np.pi * f_hz / machine.pole_pairs)
    plant.set_open_phase(0, 1)
    plant.probes.set(np.full(3, SRC_INVERTER), np.zeros(3, dtype=int),
                     np.array([L.IS_IA, L.IS_IB, L.IS_IC]))
    amp = 0.8 * 200.0  # phase voltage amplitude within half the link
    gates = np.ones(1, dtype=bool)
    i2_before = 0.0
    for frame in range(120):
        theta = 2 * np.pi * f_hz * (plant.time_s + 0.5 * plant.params.frame_s)
        duty = 0.5 + amp / 400.0 * np.cos(theta - 2 * np.pi * np.arange(3) / 3)
        e0 = plant.ms[0, L.MS_E_CU_S]
        plant.advance(Commands(duty.reshape(1, 3), gates))
        trace = plant.probes.trace[:plant.probes.n_sub]
        i2 = 2.0 / 3.0 * (trace ** 2).sum(axis=1)
        starts = np.concatenate([[i2_before], i2[:-1]])
        expected = (0.75 * plant.probes.h * plant.ms[0, L.MS_RS] * (starts + i2)).sum()
        i2_before = i2[-1]
        if frame < 20:
            continue  # (the first frames start from the trace of none)
        assert plant.ms[0, L.MS_E_CU_S] - e0 == pytest.approx(expected, rel=1e-9)
        assert np.abs(trace[:, 1]).max() < 1e-9 * np.abs(trace).max()
    assert np.abs(trace).max() > 10.0  # (a current flows in the live phases)


def test_a_plant_has_at_most_the_columns_motors_and_inverters() -> None:
    assert column_buffer(W, W).shape == (C_N * W,)
    with pytest.raises(ValueError, match="at most"):
        column_buffer(W + 1, 1)
    with pytest.raises(ValueError, match="at most"):
        column_buffer(1, W + 1)
    with pytest.raises(ValueError, match=f"at most {W} motors"):
        Plant(replicated(load_trainset(TRAINSET), W + 1))


def test_a_probe_list_is_three_flat_lists_of_one_length() -> None:
    """The plant's frame call is bound to one-dimensional probe lists
    (kernel_cache.entry_point reads what it is given): a list of another shape is
    refused when set, and the plant runs on with the one it had."""
    plant = Plant.test_bench(machine_profile("textbook-3hp"), dc_link_v=400.0)
    plant.probes.set(np.full(2, SRC_INVERTER), np.zeros(2, dtype=int),
                     np.array([L.IS_IA, L.IS_IB]))
    for src, row, col in ((np.zeros((2, 1)), np.zeros(2), np.zeros(2)),
                          (np.zeros(2), np.zeros(3), np.zeros(2)),
                          (np.zeros(2), np.zeros(2), np.zeros((1, 2)))):
        with pytest.raises(ValueError, match="1-D"):
            plant.probes.set(src, row, col)
    plant.advance(Commands(np.full((1, 3), 0.5), np.ones(1, dtype=bool)))
    assert plant.probes.trace.shape == (plant.probes.n_sub, 2)


def test_a_probe_outside_the_state_arrays_is_refused_at_the_next_frame() -> None:
    """The compiled frame reads the probes' places unchecked (an out-of-range row read
    out of bounds and crashed the process): a place outside its state array, or an
    array that is none of the five, is refused at the next frame, before anything of
    the frame is done, until the list is mended."""
    plant = Plant.test_bench(machine_profile("textbook-3hp"), dc_link_v=400.0)
    plant.advance(None)
    state = (plant.frames, plant.ms.tobytes())
    motors, columns = plant.ms.shape
    for src, row, col in ((SRC_MOTOR, motors, 0), (SRC_MOTOR, 0, columns),
                          (SRC_MOTOR, -1, 0), (SRC_INVERTER, 10**12, 0), (7, 0, 0),
                          (SRC_SUPPLY, 0, len(plant.ss))):
        plant.probes.set([src], [row], [col])
        with pytest.raises(ValueError, match="probe 0"):
            plant.advance(None)
        assert (plant.frames, plant.ms.tobytes()) == state
    plant.probes.set([SRC_MOTOR, SRC_SUPPLY], [motors - 1, 0], [columns - 1, len(plant.ss) - 1])
    plant.advance(None)  # the last places of both shapes: read
    assert plant.frames == state[0] + 1


def test_the_benchs_long_trains_are_timed_with_their_line_side_live() -> None:
    """The plant bench's repeated trainsets load up with the breaker closed: a 128-motor
    train on the one transformer once tripped it on overcurrent and was timed dead."""
    for motors in (32, 128):
        plant, _ = _loaded_plant(replicated(load_trainset(TRAINSET), motors))
        assert plant.read("line.breaker_closed") == 1.0
        assert plant.read("line.overcurrent_trip") == 0.0
