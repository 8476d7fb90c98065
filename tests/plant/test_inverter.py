"""Inverter average model, blocked gates and command validation."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from emulator.plant import CommandError, Commands, Plant
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET, SlipFrequencyDrive


def applied_voltage(plant: Plant) -> complex:
    return complex(plant.read("inverter.voltage_alpha_v")[0],
                   plant.read("inverter.voltage_beta_v")[0])


def test_applied_voltage_is_clarke_of_leg_voltages_at_zero_current() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    duty = np.array([[0.8, 0.4, 0.3]] * plant.n_inverters)
    plant.advance(Commands(duty, np.ones(plant.n_inverters, dtype=bool)), 50e-6)
    udc = 1800.0
    v = (duty[0] - 0.5) * udc  # no current yet: no dead-time or drop term
    expected = complex((2 * v[0] - v[1] - v[2]) / 3, (v[1] - v[2]) / math.sqrt(3))
    got = applied_voltage(plant)
    assert got == pytest.approx(expected, rel=1e-12)


def _leg_errors_after_one_substep(params) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Run the demo machines to a loaded steady state, then hold one command for one
    sub-step: (phase currents at its start, its duties, applied minus ideal voltage as
    a space vector split back into legs by the inverse Clarke transform)."""
    plant = Plant(params, ideal_dc_links=True)
    drive = SlipFrequencyDrive(plant, slip_hz=1.2, volts_per_hz=15.8)
    for _ in range(500):
        plant.advance(drive.commands())
    cmd = drive.commands()
    i = np.array([plant.read(f"inverter.phase_current_{x}_a")[0] for x in "abc"])
    plant.advance(cmd, 50e-6)  # shorter than the sub-step: one sub-step, held as stated
    udc = plant.read("dc_link.voltage_v")[0]
    ideal = (cmd.duty[0] - 0.5) * udc
    err = applied_voltage(plant) - complex((2 * ideal[0] - ideal[1] - ideal[2]) / 3,
                                           (ideal[1] - ideal[2]) / math.sqrt(3))
    # a zero-sequence-free space vector back to legs (inverse amplitude-invariant Clarke)
    legs = np.array([err.real, -0.5 * err.real + 0.5 * math.sqrt(3) * err.imag,
                     -0.5 * err.real - 0.5 * math.sqrt(3) * err.imag])
    return i, cmd.duty[0], legs


def _zero_sequence_free(v: np.ndarray) -> np.ndarray:
    return v - v.mean()  # what a floating star point sees of three leg voltages


def test_dead_time_error_is_td_fsw_udc_against_the_current(trainset_params) -> None:
    # dead-time voltage error per leg: -t_d f_sw U_dc sgn(i) (common practice; Holmes &
    # Lipo, PWM for Power Converters, dead-time section, from memory), the drops removed
    inv = dataclasses.replace(trainset_params.inverter, igbt_threshold_v=0.0,
                              igbt_slope_ohm=0.0, diode_threshold_v=0.0, diode_slope_ohm=0.0)
    i, _, legs = _leg_errors_after_one_substep(dataclasses.replace(trainset_params,
                                                                   inverter=inv))
    assert np.all(np.abs(i) > 4 * inv.sign_band_a)  # every leg outside the sign band
    expected = -inv.dead_time_s * inv.switching_frequency_hz * 1800.0 * np.sign(i)
    assert abs(expected[0]) == pytest.approx(14.4)  # 10 us x 800 Hz x 1800 V
    np.testing.assert_allclose(legs, _zero_sequence_free(expected), rtol=1e-9, atol=1e-9)


def test_conduction_drop_is_told_apart_from_the_dead_time(trainset_params) -> None:
    # on-state drops, dead time removed: i > 0 -> IGBT (V_CE0 + r_CE i) during d, diode
    # (V_F0 + r_F i) during 1 - d; i < 0 mirrored (any power-electronics text, e.g.
    # Mohan, Undeland & Robbins, ch. on losses)
    # the machine unsaturated: with saturation the plant takes the sub-step's starting
    # current from the fluxes through inductances refreshed for the frame, a few tenths of
    # an ampere from the current read after the last frame
    inv = dataclasses.replace(trainset_params.inverter, dead_time_s=0.0)
    linear = dataclasses.replace(trainset_params.machine, saturation_current_a=(),
                                 saturation_flux_vs=())
    i, d, legs = _leg_errors_after_one_substep(dataclasses.replace(
        trainset_params, inverter=inv, machine=linear))
    assert np.all(np.abs(i) > 4 * inv.sign_band_a)
    a = np.abs(i)
    v_igbt = inv.igbt_threshold_v + inv.igbt_slope_ohm * a
    v_diode = inv.diode_threshold_v + inv.diode_slope_ohm * a
    mag = np.where(i > 0, d * v_igbt + (1 - d) * v_diode, d * v_diode + (1 - d) * v_igbt)
    expected = -np.sign(i) * mag
    np.testing.assert_allclose(legs, _zero_sequence_free(expected), rtol=1e-9, atol=1e-9)
    assert np.abs(legs).max() < 5.0  # a few volts: far below the dead time's 14.4 V


def test_blocked_gates_stop_the_current_at_zero_without_chatter() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    drive = SlipFrequencyDrive(plant, slip_hz=1.2, volts_per_hz=15.8)
    for _ in range(1500):
        plant.advance(drive.commands())
    assert abs(plant.read("inverter.phase_current_a_a")).max() > 50
    blocked = Commands.blocked(plant.n_inverters)
    peaks = []
    for _ in range(200):
        plant.advance(blocked)
        peaks.append(max(abs(plant.read(f"inverter.phase_current_{x}_a")).max() for x in "abc"))
    assert max(peaks[50:]) < 1e-6  # decayed to zero and stays there
    assert np.all(np.isfinite(plant.read("motor.torque_nm")))


def test_back_emf_above_the_link_drives_current_into_it() -> None:
    # a fluxed machine spinning fast with blocked gates and a low link: uncontrolled
    # rectification through the freewheeling diodes
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.set_speed(40.0)
    drive = SlipFrequencyDrive(plant, slip_hz=0.0, volts_per_hz=15.8)
    for _ in range(300):
        plant.advance(drive.commands())
    plant.set_dc_link_voltage(0, 300.0)
    plant.advance(Commands.blocked(plant.n_inverters))
    assert plant.read("dc_link.current_a")[0] < -10.0


@pytest.mark.parametrize("bad", [np.nan, np.inf, -0.1, 1.5])
def test_non_finite_or_out_of_range_duty_is_rejected(bad: float) -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    cmd = Commands.blocked(plant.n_inverters)
    cmd.duty[1, 2] = bad
    before = plant.ms.copy()
    with pytest.raises(CommandError):
        plant.advance(cmd)
    assert np.array_equal(plant.ms, before)  # nothing entered the state


def test_wrong_shape_and_bad_inputs_are_rejected() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    with pytest.raises(CommandError):
        plant.advance(Commands(np.full((2, 3), 0.5), np.ones(2, dtype=bool)))
    with pytest.raises(CommandError):
        plant.set_gradient(float("nan"))
    with pytest.raises(CommandError):
        plant.advance(None, float("inf"))


@pytest.mark.parametrize("first_good", [False, True])
@pytest.mark.parametrize("frame_s", [0.0, -0.0, float("nan"), 2.0, 1e-6])
def test_a_frame_length_outside_10_us_to_1_s_is_refused(frame_s: float,
                                                        first_good: bool) -> None:
    # checked on a fresh plant too (the length is checked only when it changes)
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    if first_good:
        plant.advance(None, 1e-3)
    before = (plant.frames, plant.ms.copy())
    with pytest.raises(CommandError, match="frame length"):
        plant.advance(None, frame_s)
    assert plant.frames == before[0] and np.array_equal(plant.ms, before[1])


def test_a_first_frame_length_of_another_number_type_changes_no_later_frame() -> None:
    """The plant's frame call is bound at the first frame (kernel_cache.entry_point): a
    first frame length given as a numpy float32 runs as the float it is, and every
    later frame (Python floats) runs as on a plant whose first length was that float
    (bound to float32, the later sub-steps had been narrowed to it)."""
    runs = []
    for first in (np.float32(5e-4), float(np.float32(5e-4))):
        plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
        plant.impose_speed(0, 50.0)
        plant.advance(None, first)
        for _ in range(5):
            plant.advance(None, 1e-3)
        runs.append((plant.time_ns, plant.ms.tobytes(), plant.mx.tobytes()))
    assert runs[0] == runs[1]
