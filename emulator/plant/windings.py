"""The transformer's windings with its primary open (the feeding breaker's or the train's
own main breaker): coupled through the core alone, with no magnetising branch their
currents sum to zero, so the line-side solve takes the source inductance to infinity
(line.line_substep) and h times the windings' common voltage is -corr there.
"""

from __future__ import annotations

from .jit import compiled_inline
from .layout import (
    LI_LINK,
    LP_L,
    LP_R,
    LP_R_PRE,
    LP_V0,
    LS2_I,
    LS2_LINE,
    LS2_PRE,
    LS2_U,
    LS_UDC,
    LU_ENABLE,
    SS_E_ARC,
)


@compiled_inline
def path_resistance(lp, ls2, k) -> float:
    """Series resistance of winding k's path (winding plus precharge resistor while only the
    precharge contactor is closed), or -1 when its contactors have it open."""
    if ls2[k, LS2_LINE] < 0.5 and ls2[k, LS2_PRE] < 0.5:
        return -1.0
    return lp[k, LP_R] + (0.0 if ls2[k, LS2_LINE] > 0.5 else lp[k, LP_R_PRE])


@compiled_inline
def at_rest(lu, ls2, k) -> bool:
    """Winding k's converter is a blocked diode bridge carrying no current."""
    return lu[k, LU_ENABLE] < 0.5 and ls2[k, LS2_I] == 0.0


@compiled_inline
def bridges_at_rest(h, s_b, s_1, lp, li, lu, ls2, lst) -> float:
    """The Sherman-Morrison correction with the primary open, s_b / s_1, once the bridges
    at rest (left out of s_b and s_1) have joined: a blocked bridge that carries no
    current takes the windings' common voltage v = -corr / h as its own while v stays
    within its rails (+-(U_dc + 2 V_F)), so it joins with b_k = -h v and leaves corr as
    it was; beyond a rail it conducts, held at the rail. With no winding to set v (every
    converter blocked at rest), nothing holds one and it is 0 (the magnetising branch,
    left out, would take it down). Each such bridge's voltage is left in LS2_U."""
    corr = s_b / s_1 if s_1 > 0.0 else 0.0
    v = -corr / h
    for k in range(lp.shape[0]):
        r = path_resistance(lp, ls2, k)
        if r < 0.0 or not at_rest(lu, ls2, k):
            continue
        rail = lst[li[k, LI_LINK], LS_UDC] + 2.0 * lp[k, LP_V0]
        u = min(max(v, -rail), rail)
        ls2[k, LS2_U] = u
        a_k = lp[k, LP_L] + 0.5 * h * r
        s_b += -h * u / a_k
        s_1 += 1.0 / a_k
    return s_b / s_1 if s_1 > 0.0 else 0.0


@compiled_inline
def _conducting(lp, lu, ls2, k) -> bool:
    """Winding k can carry a current: its path is closed, and its converter switches or
    (a blocked diode bridge) already conducts."""
    return path_resistance(lp, ls2, k) >= 0.0 and (lu[k, LU_ENABLE] > 0.5
                                                   or ls2[k, LS2_I] != 0.0)


@compiled_inline
def balance_windings(lp, lu, ls2, ss):
    """With the primary open and no magnetising branch the windings' currents sum to zero.
    Where a cut leaves them a sum S (the primary's current cut, a bridge stopped, a
    contactor's arc cleared), the common node takes a voltage impulse that acts on each
    conducting winding through its own inductance: i_k -= lam / L_k, lam = S / sum_j 1/L_j
    (any circuit text: an impulse across inductors in parallel), which is also the least
    stored energy; the energy given up, S^2 / (2 sum_j 1/L_j), goes into the arc (0 where
    they already summed to zero, as at a current zero)."""
    total = 0.0
    weight = 0.0
    for k in range(lp.shape[0]):
        if _conducting(lp, lu, ls2, k):
            total += ls2[k, LS2_I]
            weight += 1.0 / lp[k, LP_L]
    if weight == 0.0:
        return
    lam = total / weight
    for k in range(lp.shape[0]):
        if _conducting(lp, lu, ls2, k):
            i_old = ls2[k, LS2_I]
            i_new = i_old - lam / lp[k, LP_L]
            ss[SS_E_ARC] += 0.5 * lp[k, LP_L] * (i_old * i_old - i_new * i_new)
            ls2[k, LS2_I] = i_new
