"""Longitudinal train dynamics: lumped mass, running resistance, gradient, brakes.

m (1 + k_rot) dv/dt = sum F_creep - R(v) - m g sin(theta) - F_brake - F_curve

Running resistance after Davis (General Electric Review 29, 1926):
R(v) = A + B v + C v^2, acting against the motion. The constant term A, the friction
brake and the curve resistance (Röckl's, from the track: m g r_c, r_c in N/kN) act
against the motion and hold the train at rest like static friction: a train at standstill moves only
when the other forces exceed them, so it neither creeps on the level at zero effort
nor stays put on a gradient steeper than A allows when its brakes are off.

Motored axles carry their rotating inertia explicitly (wheelset and rotor through the
gear); k_rot is the allowance for the rest (trailer wheelsets, other rotating parts).
"""

from __future__ import annotations

import math

from .jit import compiled, compiled_inline


@compiled_inline
def gradient_force(mass: float, gravity: float, gradient: float) -> float:
    """Downhill force component m g sin(theta) for a gradient given as rise/run, N."""
    return mass * gravity * gradient / math.sqrt(1.0 + gradient * gradient)


@compiled
def step_speed(v: float, drive: float, static: float, b: float, c: float, m_eff: float,
               h: float, hold: float = 0.0):
    """Advance the train speed one sub-step with stiction at rest.

    Args:
        v: speed at the start of the step, m/s.
        drive: creep forces minus the gradient force, N.
        static: forces that act as friction: Davis A plus friction brake, N (>= 0).
        b, c: Davis linear and quadratic coefficients.
        m_eff: mass including rotating allowance, kg.
        h: step, s.
        hold: more force that holds the train at rest but does not act once it moves
            (braked, locked wheelsets: once sliding, their creep forces act), N.

    Returns:
        (new speed m/s, resisting force applied N, signed against the motion)
    """
    if v == 0.0:
        if abs(drive) <= static + hold:
            return 0.0, drive  # held: friction balances the drive exactly
        direction = 1.0 if drive > 0.0 else -1.0
        resist = direction * static
        return v + h * (drive - resist) / m_eff, resist
    direction = 1.0 if v > 0.0 else -1.0
    resist = direction * (static + b * abs(v) + c * v * v)
    v_new = v + h * (drive - resist) / m_eff
    if v_new * v < 0.0:
        # the friction forces stopped the train within the step
        return 0.0, resist
    return v_new, resist
