"""Lumped two-node thermal networks (motor windings, semiconductor and heatsink).

Node 1 (winding or junction) and node 2 (rotor or heatsink), each with a heat capacity,
a conductance between them and to the coolant::

    C1 dT1/dt = P1 - G12 (T1 - T2) - G1a (T1 - Ta)
    C2 dT2/dt = P2 + G12 (T1 - T2) - G2a (T2 - Ta)

Stepped by backward Euler once per frame (unconditionally stable; the time constants
are seconds to hours against a millisecond frame). Standard first-order thermal
equivalent circuit (Cauer form), e.g. IEC 60349 thermal practice, common practice.
"""

from __future__ import annotations

from .jit import compiled


@compiled
def two_node_step(t1: float, t2: float, p1: float, p2: float, c1: float, c2: float,
                  g12: float, g1a: float, g2a: float, ta: float, dt: float):
    """Advance the two-node network by dt with losses p1, p2 (W); returns (T1, T2) in K."""
    # (C/dt + G) T_new = C/dt T_old + P + G_a Ta  -> 2x2 linear system
    a11 = c1 / dt + g12 + g1a
    a12 = -g12
    a21 = -g12
    a22 = c2 / dt + g12 + g2a
    b1 = c1 / dt * t1 + p1 + g1a * ta
    b2 = c2 / dt * t2 + p2 + g2a * ta
    det = a11 * a22 - a12 * a21
    return (b1 * a22 - a12 * b2) / det, (a11 * b2 - a21 * b1) / det
