"""Pantograph power quality over the last whole line periods: the kernel integrates
each frame's P, u^2, i^2 and the Fourier integrals of u and i (SS_PQ_*); a ring of frames
holds the last whole periods (>= 100 ms), its sums updated each frame.

Fundamentals by Fourier integrals over the window; true power factor P/(U I),
displacement factor cos(phi_u - phi_i) of the fundamentals, current THD (IEEE 1459
definitions; from memory).
"""

from __future__ import annotations

import math

import numpy as np

from .jit import compiled
from .layout import SS_PQ_T, SS_REVERSE_W


@compiled
def window_update(ss, ring, sums, row):
    """This frame's power-quality integrals (SS_PQ_T..SS_PQ_IS) into row ``row`` of the
    ring of the last whole line periods, the ring's running sums updated; a non-receptive
    line answers the mean reverse power over the window (SS_REVERSE_W)."""
    for j in range(sums.shape[0]):
        new = ss[SS_PQ_T + j]
        sums[j] += new - ring[row, j]
        ring[row, j] = new
    if sums[0] > 0.0:
        ss[SS_REVERSE_W] = max(-sums[1] / sums[0], 0.0)


def figures(ring: np.ndarray) -> dict[str, float]:
    """The window's figures from the ring of frames' integrals (SS_PQ_T..SS_PQ_IS)."""
    t_w, p, u2, i2, uc, us, ic, is_ = ring.sum(axis=0)
    if t_w <= 0:
        return {}
    u_rms, i_rms = math.sqrt(u2 / t_w), math.sqrt(i2 / t_w)
    # u = A sin(theta + phi): int u sin = A cos(phi) T/2, int u cos = A sin(phi) T/2
    au, phi_u = math.hypot(uc, us) * 2 / t_w, math.atan2(uc, us)
    ai, phi_i = math.hypot(ic, is_) * 2 / t_w, math.atan2(ic, is_)
    i1_rms = ai / math.sqrt(2)
    p_w = p / t_w
    s_va = u_rms * i_rms
    return {
        "voltage_rms_v": u_rms, "current_rms_a": i_rms, "active_power_w": p_w,
        "apparent_power_va": s_va,
        "reactive_power_var": 0.5 * au * ai * math.sin(phi_u - phi_i),
        "power_factor": p_w / s_va if s_va > 0 else 0.0,
        "displacement_factor": math.cos(phi_u - phi_i) if ai > 0 else 0.0,
        "current_thd": (math.sqrt(max(i_rms**2 - i1_rms**2, 0.0)) / i1_rms
                        if i1_rms > 1e-9 else 0.0),
        "voltage_fundamental_v": au, "voltage_phase_rad": phi_u,
        "current_fundamental_a": ai, "current_phase_rad": phi_i, "window_s": t_w,
    }
