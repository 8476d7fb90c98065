"""From a stator voltage vector to the three duty cycles of a two-level inverter.

Space-vector equivalent modulation by min-max zero-sequence injection: the phase
voltages u cos(angle - k 2 pi/3) plus the common-mode voltage -(max + min)/2, linear up to
U_dc / sqrt(3) per phase (Holmes & Lipo, *Pulse Width Modulation for Power Converters*,
2003, ch. 6). The duty is computed with the link voltage measured at the sample, which
follows the link's slow changes; its 2f ripple it follows only in part, the duty acting a
period later (at 100 Hz and 1 ms about a tenth of the ripple is taken out, at 33 Hz about
two thirds).

Dead-time compensation: during the blanking time t_d the diode conducts, so each leg's
mean voltage falls short by t_d f_sw U_dc sgn(i) (same book, ch. 2 on dead time): the
command adds it back, the sign taken from the current expected while the command acts,
changing linearly within a band around zero (a sample near a zero crossing says little).
"""

from __future__ import annotations

import math

import numba as nb

from emulator.kernel_cache import WITHOUT_RUNTIME

TWO_PI_3 = 2 * math.pi / 3
_COS = tuple(complex(math.cos(x * TWO_PI_3), -math.sin(x * TWO_PI_3)) for x in range(3))


@nb.njit(cache=True, error_model="numpy", **WITHOUT_RUNTIME)
def clarke(a, b, c):
    """The amplitude-invariant space vector of three phase values (Clarke):
    (2a - b - c) / 3 + j (b - c) / sqrt(3)."""
    return complex((2 * a - b - c) / 3, (b - c) / math.sqrt(3))


def space_vector(phases: tuple[float, float, float]) -> complex:
    """The space vector of a tuple of three phase values (see clarke)."""
    return clarke(*phases)


def duties(u: complex, u_dc: float, *, current: complex | None = None,
           dead_time_s: float = 0.0, switching_frequency_hz: float = 0.0,
           sign_band_a: float = 1.0) -> list[float]:
    """Duties (0..1) that give the stator-frame voltage vector u (amplitude-invariant,
    V) from a link at u_dc, with the dead time compensated for the current vector
    expected while they act (A, the inverter's total)."""
    compensate = current is not None and dead_time_s > 0.0
    return list(leg_duties(u, u_dc, current if compensate else 0j, compensate,
                           dead_time_s * switching_frequency_hz * u_dc, sign_band_a))


@nb.njit(cache=True, error_model="numpy", **WITHOUT_RUNTIME)
def leg_duties(u, u_dc, current, compensate, du, sign_band_a):
    """The three legs' duties (compiled: a few calls a period per inverter; ``py_func``
    is its plain-Python twin). du: the dead time's voltage, t_d f_sw U_dc."""
    v0 = (u * _COS[0]).real  # phase voltages, u cos(angle - k 2 pi / 3)
    v1 = (u * _COS[1]).real
    v2 = (u * _COS[2]).real
    if compensate:
        v0 += du * min(max((current * _COS[0]).real / sign_band_a, -1.0), 1.0)
        v1 += du * min(max((current * _COS[1]).real / sign_band_a, -1.0), 1.0)
        v2 += du * min(max((current * _COS[2]).real / sign_band_a, -1.0), 1.0)
    v_cm = -0.5 * (max(v0, v1, v2) + min(v0, v1, v2))
    scale = max(u_dc, 1.0)
    return (min(max(0.5 + (v0 + v_cm) / scale, 0.0), 1.0),
            min(max(0.5 + (v1 + v_cm) / scale, 0.0), 1.0),
            min(max(0.5 + (v2 + v_cm) / scale, 0.0), 1.0))
