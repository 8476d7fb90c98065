"""Field-oriented control: a torque step on the test bench (shaft on a dynamometer).

The controller runs as on a board and on the rig: it samples the currents at t_k and its
duties act from t_(k+1) (the rig's one-frame command delay), never in the frame they were
computed. Checks: the torque reaches 90 % of the step (the crossing must exist) within
15 ms at a 1 ms period (this project's target); no overshoot beyond 10 %; rotor flux held
within 3 % through the step; steady torque within 5 % of the reference, the accuracy
commonly expected of field-oriented control without a torque sensor (common practice, no
source). Reference for the method: Novotny & Lipo (1996).
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
    acting = (0.5, 0.5, 0.5)  # the duties held in the frame now: computed a frame ago
    for k in range(frames):
        t_ref = cfg.rated_torque_nm if k >= step_at else 0.0
        currents = tuple(float(plant.read(f"inverter.phase_current_{x}_a")[0]) for x in "abc")
        computed = ctl.step(t_ref, speed_rad_s, cfg.link_nominal_v, currents)
        plant.advance(Commands(np.array([acting]), np.array([True])))
        acting = computed  # the board's answer to y_k acts from t_(k+1)
        torque.append(float(plant.read("motor.torque_nm")[0]))
        flux.append(abs(plant.flux_linkages(0)[1]))
    torque = np.array(torque)
    after = torque[step_at:]
    target = cfg.rated_torque_nm
    reached = np.flatnonzero(after >= 0.9 * target)
    assert reached.size, f"torque never reached 90 % (at most {after.max() / target:.1%})"
    t90 = (reached[0] + 1) * cfg.period_s
    overshoot = max(after.max() / target - 1.0, 0.0)
    flux = np.array(flux)
    flux_change = np.abs(flux[step_at:] / flux[step_at - 1] - 1).max()
    return t90, overshoot, flux_change, float(after[-50:].mean())


# Known defect, measured with the one-frame delay: overshoot 11 % and 15 %, flux dip 6 % at
# 150 rad/s, steady torque 5 % and 13 % low (the current loop is tuned as if duties acted at
# once, and the flux model ignores saturation). Strict: the marker must go when it is mended.
@pytest.mark.xfail(strict=True, reason="reference FOC not yet designed for the rig's "
                   "one-frame command delay; steady torque low (flux model without saturation)")
@pytest.mark.parametrize("speed", [60.0, 150.0])  # below base speed (about 193 rad/s)
def test_torque_step(speed: float) -> None:
    t90, overshoot, flux_change, final = torque_step(speed)
    assert t90 <= 0.015
    assert overshoot <= 0.10
    assert flux_change <= 0.03
    assert final == pytest.approx(config_from_profile(TRAINSET).rated_torque_nm, rel=0.05)
    print(f"speed {speed}: 90 % in {t90 * 1e3:.0f} ms, overshoot {overshoot:.1%}, "
          f"flux change {flux_change:.1%}, final torque {final:.0f} N m")
    assert math.isfinite(final)
