"""Lumped two-node thermal networks (motor windings, semiconductor and heatsink).

Node 1 (winding or junction) and node 2 (rotor or heatsink), each with a heat capacity,
a conductance between them and to the coolant::

    C1 dT1/dt = P1 - G12 (T1 - T2) - G1a (T1 - Ta)
    C2 dT2/dt = P2 + G12 (T1 - T2) - G2a (T2 - Ta)

Stepped by backward Euler once per frame (unconditionally stable; the time constants
are seconds to hours against a millisecond frame). Standard first-order thermal
equivalent circuit (Cauer form), e.g. IEC 60349 thermal practice, common practice.

An inverter's junction node takes the whole inverter's mean loss over the frame. At a
start, at 1-3 Hz, one IGBT or diode carries the peak current for hundreds of
milliseconds and its junction swings well above the mean, which one node cannot show:
low-speed current derating tuned against it is optimistic (per-device Foster or Cauer
networks would show the swing; common practice, no source).
"""

from __future__ import annotations

from .jit import compiled
from .layout import (
    IP_TH_CH,
    IP_TH_CJ,
    IP_TH_GHA,
    IP_TH_GJH,
    IP_THERMAL_ON,
    IS_Q,
    IS_T_H,
    IS_T_J,
    MP_COOLING,
    MP_TH_CR,
    MP_TH_CS,
    MP_TH_GRA,
    MP_TH_GSA,
    MP_TH_GSR,
    MP_THERMAL_ON,
    MS_Q_ROTOR,
    MS_Q_STATOR,
    MS_T_ROTOR,
    MS_T_STATOR,
)


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


@compiled
def thermal_frame(mpar, ms, ipar, ist, ambient, frame):
    """Give the frame's losses to the thermal networks and advance them by one frame."""
    for m in range(mpar.shape[0]):
        if mpar[m, MP_THERMAL_ON] > 0.5:
            cool = mpar[m, MP_COOLING]
            ts_, tr_ = two_node_step(ms[m, MS_T_STATOR], ms[m, MS_T_ROTOR],
                                     ms[m, MS_Q_STATOR] / frame, ms[m, MS_Q_ROTOR] / frame,
                                     mpar[m, MP_TH_CS], mpar[m, MP_TH_CR], mpar[m, MP_TH_GSR],
                                     cool * mpar[m, MP_TH_GSA], cool * mpar[m, MP_TH_GRA],
                                     ambient, frame)
            ms[m, MS_T_STATOR] = ts_
            ms[m, MS_T_ROTOR] = tr_
        ms[m, MS_Q_STATOR] = 0.0
        ms[m, MS_Q_ROTOR] = 0.0
    for k in range(ipar.shape[0]):
        if ipar[k, IP_THERMAL_ON] > 0.5:
            tj, th = two_node_step(ist[k, IS_T_J], ist[k, IS_T_H], ist[k, IS_Q] / frame, 0.0,
                                   ipar[k, IP_TH_CJ], ipar[k, IP_TH_CH], ipar[k, IP_TH_GJH],
                                   0.0, ipar[k, IP_TH_GHA], ambient, frame)
            ist[k, IS_T_J] = tj
            ist[k, IS_T_H] = th
        ist[k, IS_Q] = 0.0
