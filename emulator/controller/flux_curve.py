"""The motor's magnetising curve as the controller holds it (from the type test data
in the profile): main flux against magnetising current, and the secant inductance.

Looked up several times a period per inverter: the interpolation is compiled (numba,
``py_func`` its plain-Python twin, compared in the tests)."""

from __future__ import annotations

import math

import numba as nb
import numpy as np

from emulator.kernel_cache import WITHOUT_RUNTIME

compiled = nb.njit(cache=True, error_model="numpy", **WITHOUT_RUNTIME)


@compiled
def interpolate(x, xs, ys):
    """ys at x >= 0 on the table (xs rising): linear through the origin below the first
    point, linear between points, extrapolated with the last slope past the end."""
    if x <= xs[0] or xs.shape[0] < 2:
        return ys[0] * x / xs[0]
    k = min(max(np.searchsorted(xs, x), 1), xs.shape[0] - 1)
    slope = (ys[k] - ys[k - 1]) / (xs[k] - xs[k - 1])
    return ys[k - 1] + slope * (x - xs[k - 1])


@compiled
def secant_lm(psi, currents, fluxes):
    """Secant magnetising inductance psi / i_m(psi) at a main flux (V s), H."""
    psi = max(abs(psi), 1e-6)
    return psi / interpolate(psi, fluxes, currents)


class MagnetisingCurve:
    """Main flux against magnetising current from the motor's data (type test), with the
    secant inductance L_m = psi / i_m; linear with the first point's secant below it."""

    def __init__(self, lm_linear: float, currents_a: tuple[float, ...] = (),
                 fluxes_vs: tuple[float, ...] = ()) -> None:
        self.i = np.array(list(currents_a) or [1.0], dtype=float)
        self.psi = np.array(list(fluxes_vs) or [lm_linear], dtype=float)

    def flux(self, i_m: float) -> float:
        """Main flux (V s) a magnetising current (A, peak) holds."""
        return math.copysign(interpolate(abs(i_m), self.i, self.psi), i_m)

    def current(self, psi: float) -> float:
        """Magnetising current (A, peak) for a main flux (V s)."""
        return math.copysign(interpolate(abs(psi), self.psi, self.i), psi)

    def lm(self, psi: float) -> float:
        """Secant magnetising inductance at a main flux, H."""
        return secant_lm(psi, self.i, self.psi)
