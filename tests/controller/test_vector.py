"""Field-oriented control: a torque step on the test bench (shaft on a dynamometer).

Checks from the issue: torque to 90 % of a step within a stated time (measured and
stated in the README: 5 ms at a 1 ms period; checked against 15 ms), rotor flux held
during the step (within 3 %), no torque overshoot beyond 10 %. References: Novotny &
Lipo (1996) for the method; the figures are this project's targets.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from emulator.controller.config import config_from_profile
from emulator.controller.motor_vector import VectorControl
from emulator.plant import Commands, Plant
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET


def torque_step(speed_rad_s: float) -> tuple[float, float, float, float]:
    """(time to 90 % in s, overshoot fraction, flux change fraction, final torque N m)."""
    cfg = config_from_profile(TRAINSET)
    plant = Plant.test_bench(load_trainset(TRAINSET).machine, dc_link_v=cfg.link_nominal_v,
                             refresh_each_substep=False, frame_s=cfg.period_s,
                             substep_s=125e-6)
    plant.impose_speed(0, speed_rad_s)
    ctl = VectorControl(cfg, 1)
    step_at, frames = 3000, 3200  # magnetise for 3 s: about five rotor time constants
    torque, flux = [], []
    for k in range(frames):
        t_ref = cfg.rated_torque_nm if k >= step_at else 0.0
        currents = tuple(float(plant.read(f"inverter.phase_current_{x}_a")[0]) for x in "abc")
        duties = ctl.step(t_ref, speed_rad_s, cfg.link_nominal_v, currents)
        plant.advance(Commands(np.array([duties]), np.array([True])))
        torque.append(float(plant.read("motor.torque_nm")[0]))
        flux.append(abs(plant.flux_linkages(0)[1]))
    torque = np.array(torque)
    after = torque[step_at:]
    target = cfg.rated_torque_nm
    t90 = (np.argmax(after >= 0.9 * target) + 1) * cfg.period_s
    overshoot = max(after.max() / target - 1.0, 0.0)
    flux = np.array(flux)
    flux_change = np.abs(flux[step_at:] / flux[step_at - 1] - 1).max()
    return t90, overshoot, flux_change, float(after[-50:].mean())


@pytest.mark.parametrize("speed", [60.0, 150.0])  # below base speed (about 193 rad/s)
def test_torque_step(speed: float) -> None:
    t90, overshoot, flux_change, final = torque_step(speed)
    assert t90 <= 0.015
    assert overshoot <= 0.10
    assert flux_change <= 0.03
    # steady torque: the controller's flux model ignores main-flux saturation and differs
    # from the plant's flux by up to ~10 % near rated flux (a known limitation: a TCU
    # adapts its flux model; ours does not yet), so the bound here is 15 %
    assert final == pytest.approx(config_from_profile(TRAINSET).rated_torque_nm, rel=0.15)
    print(f"speed {speed}: 90 % in {t90 * 1e3:.0f} ms, overshoot {overshoot:.1%}, "
          f"flux change {flux_change:.1%}, final torque {final:.0f} N m")
    assert math.isfinite(final)
