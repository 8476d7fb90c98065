"""Phase-locked loop on the sampled single-phase line voltage.

Second-order generalised integrator (SOGI) as quadrature signal generator, then a
synchronous-frame PLL (Rodriguez, Teodorescu et al., "Advanced grid synchronization
system for power converters under unbalanced and distorted operating conditions", IEEE
IECON 2006; Ciobotaru, Teodorescu, Blaabjerg, "A new single-phase PLL structure based on
second order generalized integrator", IEEE PESC 2006). Discretised with the trapezoidal
rule at the control period; the SOGI tracks the PLL's frequency.

Convention: the line voltage is v = V sin(theta); the PLL drives the quadrature component
v_q of the SOGI's vector to zero. ``update`` returns the phase and ``amplitude`` the peak
at the sample's instant.
"""

from __future__ import annotations

import math


class SogiPll:
    """Tracks theta (rad), the frequency (Hz) and the amplitude of a sinusoid."""

    def __init__(self, f_nominal_hz: float, period_s: float, k_sogi: float = 1.41,
                 bandwidth_hz: float | None = None, min_amplitude: float = 0.0) -> None:
        self.T = period_s
        # below this amplitude the line is dead: the loop holds the nominal frequency
        # instead of chasing noise (and winding up), so it relocks at once on return
        self.min_amplitude = min_amplitude
        self.k = k_sogi
        self.w_nom = 2 * math.pi * f_nominal_hz
        self.w = self.w_nom
        self.theta = 0.0
        self.v_alpha = 0.0
        self.v_beta = 0.0
        self.amplitude = 0.0
        bw = 2 * math.pi * (bandwidth_hz if bandwidth_hz else f_nominal_hz / 4)
        self.kp = 2 * 0.7 * bw  # PI of a second-order loop, damping 0.7 (per unit amplitude)
        self.ki = bw * bw
        self._integral = self.w_nom
        self._x1 = 0.0  # SOGI states
        self._x2 = 0.0

    def update(self, v: float) -> float:
        """One sample; returns theta for the sample's instant (before advancing)."""
        # SOGI: v_alpha' = w (k (v - v_alpha) - v_beta), v_beta' = w v_alpha (trapezoidal)
        w, T, k = self.w, self.T, self.k
        a = math.tan(w * T / 2)  # pre-warped: the resonance stays at w (Tustin)
        # solve the 2x2 implicit trapezoidal step for (v_alpha, v_beta)
        va0, vb0 = self.v_alpha, self.v_beta
        rhs1 = va0 + a * (k * (v - va0) - vb0) + a * k * v
        rhs2 = vb0 + a * va0
        # [1 + a k, a; -a, 1] [va; vb] = [rhs1; rhs2]
        det = (1 + a * k) + a * a
        va = (rhs1 - a * rhs2) / det
        vb = (rhs2 * (1 + a * k) + a * rhs1) / det
        self.v_alpha, self.v_beta = va, vb
        # v = V sin(theta): v_alpha ~ V sin(theta), v_beta ~ -V cos(theta)
        s, c = math.sin(self.theta), math.cos(self.theta)
        v_q = va * c + vb * s  # ~ V sin(theta_true - theta)
        # = |v_d + j v_q|, locked or not (the square root of the sum of squares, not
        # math.hypot: the compiled twin's libm hypot rounds differently in the last place)
        magnitude = max(math.sqrt(va * va + vb * vb), 1e-9)
        err = v_q / magnitude  # sin of the phase error
        # the trapezoidal SOGI's outputs sit half a sample ahead of the input's instant:
        # its vector is longer by 1/cos(wT/2) and leads by wT/2 (corrected below)
        self.amplitude = magnitude * math.cos(w * T / 2)
        lo, hi = 0.5 * self.w_nom, 1.5 * self.w_nom
        if self.amplitude >= self.min_amplitude:
            self._integral = min(max(self._integral + self.ki * err * T, lo), hi)
            self.w = min(max(self._integral + self.kp * err, lo), hi)
        else:
            self._integral = self.w = self.w_nom
        theta_now = self.theta - w * T / 2
        self.theta = (self.theta + self.w * T) % (2 * math.pi)
        return theta_now % (2 * math.pi)

    @property
    def frequency_hz(self) -> float:
        """Tracked frequency, Hz."""
        return self.w / (2 * math.pi)
