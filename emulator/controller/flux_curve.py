"""The motor's magnetising curve as the controller holds it (from the type test data
in the profile): main flux against magnetising current, and the secant inductance."""

from __future__ import annotations

import bisect
import math


class MagnetisingCurve:
    """Main flux against magnetising current from the motor's data (type test), with the
    secant inductance L_m = psi / i_m; linear with the first point's secant below it."""

    def __init__(self, lm_linear: float, currents_a: tuple[float, ...] = (),
                 fluxes_vs: tuple[float, ...] = ()) -> None:
        self.i = list(currents_a) or [1.0]
        self.psi = list(fluxes_vs) or [lm_linear]

    @staticmethod
    def _interp(x: float, xs: list[float], ys: list[float]) -> float:
        if x <= xs[0]:
            return ys[0] * x / xs[0]  # linear through the origin below the first point
        k = min(max(bisect.bisect_left(xs, x), 1), len(xs) - 1) if len(xs) > 1 else 0
        if k == 0:
            return ys[0] * x / xs[0]
        slope = (ys[k] - ys[k - 1]) / (xs[k] - xs[k - 1])
        return ys[k - 1] + slope * (x - xs[k - 1])  # extrapolates past the last point

    def flux(self, i_m: float) -> float:
        """Main flux (V s) a magnetising current (A, peak) holds."""
        return math.copysign(self._interp(abs(i_m), self.i, self.psi), i_m)

    def current(self, psi: float) -> float:
        """Magnetising current (A, peak) for a main flux (V s)."""
        return math.copysign(self._interp(abs(psi), self.psi, self.i), psi)

    def lm(self, psi: float) -> float:
        """Secant magnetising inductance at a main flux, H."""
        psi = max(abs(psi), 1e-6)
        return psi / self.current(psi)
