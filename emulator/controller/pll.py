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


# --- is the line live, and the PLL locked to it? ----------------------------------------
#: the amplitude's floor, of U_min2's peak (EN 50163: the lowest non-permanent voltage,
#: 17.5 kV on 25 kV, 11 kV on 15 kV). A train must be able to run on a line at U_min2
#: (our reading: the standard specifies the supply; EN 50388 has the train's current
#: limited towards it): the margin is for the drop that the train's own current makes
#: across the supply's impedance, which pulls the pantograph under the line's voltage
LIVE_FLOOR_OF_U_MIN2 = 0.8
#: the amplitude's ceiling, of the nominal peak (U_max2 is 1.16 pu on 25 kV, 1.2 on 15 kV)
LIVE_CEILING = 1.3
#: the largest sample of the last quarter period, of the amplitude's floor: a quarter
#: period sampled at 1 kHz and 50 Hz spans 72 degrees between its first and last sample,
#: so a sine's largest sample there is at least sin 36 deg = 0.59 of its peak
QUARTER_FLOOR = 0.5
#: the lock monitor: a sample that falls short of the tracked sine A sin(theta) (towards
#: zero or past it) by more than this, of A, is not the line the PLL follows. Only the
#: shortfall counts: a line that comes back higher than the PLL's amplitude (a recovery
#: from a dip) is the same line. A dead line falls short by A |sin theta|: past the
#: limit once the tracked sine is asin 0.6 = 36.9 degrees from its zero, so at worst
#: 73.7 degrees after the loss (plus DEAD_SAMPLES - 1 samples: 5 ms at 50 Hz, 14 ms at
#: 16.7 Hz), at once for 40-50 % of the instants; a phase jump phi by up to
#: 2 A sin(phi / 2): never for phi below 2 asin 0.3 = 34.9 degrees (the PLL follows
#: those), within half a period for 90 degrees and more, and between the two it depends
#: on the instant (tests/controller/test_pll.py)
LOCK_RESIDUAL = 0.6
#: samples in a row that do not look like the live line the PLL follows before the
#: line counts as dead or the lock as lost: one outlier (a glitch on the voltage channel,
#: which can also throw the SOGI's amplitude for a sample) does not stop the line
#: converters for LOCK_S
DEAD_SAMPLES = 2


def dead_samples(v: float, theta: float, amplitude: float, recent_max: float,
                 nominal_peak: float, u_min2_peak: float, run: float) -> float:
    """The samples in a row, this one (v) included, that do not look like a live line
    the PLL is locked to: run + 1, or 0 when v does. It does when the amplitude is
    between LIVE_FLOOR_OF_U_MIN2 x U_min2 and LIVE_CEILING x nominal (peaks), the last
    quarter period's largest |sample| (recent_max) is above QUARTER_FLOOR of that floor,
    and v falls short of the tracked sine A sin(theta) by at most LOCK_RESIDUAL x A
    (theta and A for the sample's instant, as SogiPll.update gives them). The line is
    live while the run is under DEAD_SAMPLES."""
    floor = LIVE_FLOOR_OF_U_MIN2 * u_min2_peak
    s = math.sin(theta)
    short = amplitude * abs(s) - (v if s >= 0.0 else -v)
    looks_live = (floor < amplitude < LIVE_CEILING * nominal_peak
                  and recent_max > QUARTER_FLOOR * floor
                  and short <= LOCK_RESIDUAL * amplitude)
    return 0.0 if looks_live else run + 1.0
