"""Gear, wheelset and wheel-rail creep force.

Creep force: Polach, "Creep forces in simulations of traction vehicles running on
adhesion limit", Wear 258 (2005) 992-1000::

    F = 2 Q mu / pi * ( k_A eps / (1 + (k_A eps)^2) + arctan(k_S eps) )
    eps = 2/3 * C pi a^2 b / (Q mu) * s,     mu = mu0 ((1 - A) e^(-B w) + A)

with s = w / v the creep and w the slip velocity. Writing the contact stiffness by
Kalker's linear creep coefficient K = G a b c11 (C = 3 G c11 / (8 a)) gives
eps = (pi/4) K s / (Q mu), so that for small creep F -> (k_A + k_S)/2 * K s, Kalker's
linear law reduced by Polach's factors. Q and K are per axle (two wheels): F is linear
in both, so an axle is one contact with twice a wheel's load and stiffness.

Near standstill the creep denominator is regularised, s = w / sqrt(v^2 + v_ref^2), so
the force stays finite and smooth when the train starts or rolls back.

Left out: the law is the steady state (no contact relaxation, the creep's lag over a
relaxation length), and an axle is one contact with one inertia, so the torsional mode
of the axle between its two wheels (often 50-100 Hz, and what drives stick-slip) is not
there: the coupling's mode (shaft.py, about 30 Hz on the Tern) is the only mechanical
mode an adhesion control meets here (Iwnicki (ed.), Handbook of Railway Vehicle
Dynamics, traction chapter; from memory).
"""

from __future__ import annotations

import math

from .contact_maths import arctan, exponential
from .jit import compiled, compiled_inline

#: Polach's published parameter sets [memory, corroborated in REFERENCES.md]: k_A, k_S,
#: mu0, A, B (s/m). Their mu0 is the friction of the locomotive they were fitted to.
POLACH_DRY = (1.0, 0.4, 0.55, 0.4, 0.6)
POLACH_WET = (0.3, 0.1, 0.30, 0.4, 0.2)

#: The rail conditions the plant offers: Polach's shapes, with mu0 set so that the peak of
#: the creep curve (11.9 t axle, K = 1.7e7 N, 0.1 m/s creep reference: the Tern's) sits
#: where the literature puts it (peaks by `railrig adhesion`, 0 -> 160 km/h):
#: - dry: 0.32 -> 0.23, Curtius-Kniffler mu = 0.161 + 7.5 / (v + 44) within 14 %
#:   (Curtius & Kniffler 1950, REFERENCES.md);
#: - wet: 0.15 -> 0.11, inside "wet 0.10-0.20" (industry adhesion manual, REFERENCES.md);
#: - contaminated (leaf film, oil): 0.05 -> 0.04; the manual goes down to 0.01, 0.05 is a
#:   middle chosen here (invented);
#: - sanded (sand on wet rail): 0.22 -> 0.17 [from memory: sanding restores most of the
#:   dry level, no source at hand].
RAIL_CONDITIONS = {
    "dry": (1.0, 0.4, 0.324, 0.4, 0.6),
    "wet": (0.3, 0.1, 0.154, 0.4, 0.2),
    "contaminated": (0.3, 0.1, 0.051, 0.4, 0.2),
    "sanded": (1.0, 0.4, 0.227, 0.4, 0.6),
}


@compiled
def polach_force(w: float, v: float, axle_load_n: float, kalker_n: float, k_a: float,
                 k_s: float, mu0: float, a_ratio: float, b_decay: float, v_ref: float):
    """Longitudinal creep force of an axle and its derivative by slip velocity.

    Args:
        w: slip velocity omega_w r - v, m/s.
        v: train speed, m/s (only its magnitude enters the creep).
        axle_load_n: normal force Q of the axle, N.
        kalker_n: Kalker linear creep coefficient K of the axle, N.
        k_a, k_s: Polach reduction factors, 1.
        mu0, a_ratio, b_decay: friction at zero slip, limit ratio A, decay B (s/m).
        v_ref: regularisation speed of the creep denominator, m/s.

    Returns:
        (F in N, dF/dw in N s/m). F has the sign of w.
    """
    if axle_load_n <= 0.0:
        return 0.0, 0.0
    return polach_core(w, v, 0.25 * math.pi * kalker_n / axle_load_n,
                       2.0 * axle_load_n / math.pi, k_a, k_s, mu0, a_ratio, b_decay, v_ref)


@compiled_inline
def polach_core(w: float, v: float, kappa: float, scale: float, k_a: float, k_s: float,
                mu0: float, a_ratio: float, b_decay: float, v_ref: float):
    """polach_force with the axle constants kappa = pi/4 K/Q and scale = 2Q/pi given."""
    if mu0 <= 0.0:
        return 0.0, 0.0
    aw = abs(w)
    ex = exponential(-b_decay * aw)
    mu = mu0 * ((1.0 - a_ratio) * ex + a_ratio)
    dmu = -mu0 * (1.0 - a_ratio) * b_decay * ex  # d mu / d|w|
    inv_mu = 1.0 / mu
    c = kappa * inv_mu / math.sqrt(v * v + v_ref * v_ref)  # d eps / d|w| at fixed mu
    eps = c * aw
    deps = c * (1.0 - aw * dmu * inv_mu)
    ka_e = k_a * eps
    ks_e = k_s * eps
    g = 1.0 / (1.0 + ka_e * ka_e)
    f = ka_e * g + arctan(ks_e)
    df = k_a * (1.0 - ka_e * ka_e) * g * g + k_s / (1.0 + ks_e * ks_e)
    force = scale * mu * f
    dforce = scale * (dmu * f + mu * df * deps)  # F odd, dF/dw even in w
    return (force if w >= 0.0 else -force), dforce


@compiled_inline
def wheel_torque(motor_torque: float, motor_speed: float, gear: float, eff: float) -> float:
    """Torque at the wheelset from the motor torque through a gear with losses, N m.

    Motoring (power to the wheel): T_w = i eta T_m; braking (power to the motor):
    T_w = i T_m / eta. The loss is always taken from the flow.
    """
    if motor_torque * motor_speed >= 0.0:
        return gear * eff * motor_torque
    return gear * motor_torque / eff


def creep_curve_peak(condition: str, speed_mps: float, axle_load_n: float, kalker_n: float,
                     v_ref: float) -> tuple[float, float]:
    """(peak friction F/Q, slip velocity at the peak, m/s) of the plant's creep curve for
    a rail condition at a train speed: the compiled contact function searched over slip
    (a log grid from 0.1 mm/s to 30 m/s, then golden section around its best point)."""
    params = RAIL_CONDITIONS[condition]

    def mu(w: float) -> float:
        return polach_force(w, speed_mps, axle_load_n, kalker_n, *params, v_ref)[0] / axle_load_n

    grid = [1e-4 * (3e5 ** (k / 399)) for k in range(400)]
    k_best = max(range(len(grid)), key=lambda k: mu(grid[k]))
    lo, hi = grid[max(k_best - 1, 0)], grid[min(k_best + 1, len(grid) - 1)]
    g = (math.sqrt(5.0) - 1.0) / 2.0
    a, b = hi - g * (hi - lo), lo + g * (hi - lo)
    for _ in range(40):
        if mu(a) > mu(b):
            hi, b = b, a
            a = hi - g * (hi - lo)
        else:
            lo, a = a, b
            b = lo + g * (hi - lo)
    w = 0.5 * (lo + hi)
    return mu(w), w
