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
    LS2_STOPPED,
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
def _past_rail(v, rail) -> float:
    """The voltage a bridge at rest holds against a common voltage v: the rail it is
    driven past (+-rail), or 0 while v stays within its rails."""
    return rail if v > rail else (-rail if v < -rail else 0.0)


@compiled_inline
def bridges_at_rest(h, s_b, s_1, lp, li, lu, ls2, lst) -> float:
    """The Sherman-Morrison correction with the primary open once the bridges at rest
    (left out of s_b and s_1) have joined. A blocked bridge that carries no current takes
    the windings' common voltage v = -corr / h as its own while v stays within its rails
    (+-(U_dc + 2 V_F)): joined with b_k = -h v, it leaves corr as it was, so it simply
    stays out; past a rail it conducts, held at the rail, and joins. Joining moves v, so
    the set held at their rails is found again until it holds (at most one pass a
    bridge). With no winding to set v (every converter blocked at rest), nothing holds
    one and it is 0 (the magnetising branch, left out, would take it down). Each such
    bridge's voltage is left in LS2_U."""
    corr = s_b / s_1 if s_1 > 0.0 else 0.0
    for _ in range(lp.shape[0] + 1):
        v = -corr / h
        sb, s1 = s_b, s_1
        for k in range(lp.shape[0]):
            r = path_resistance(lp, ls2, k)
            if r < 0.0 or not at_rest(lu, ls2, k):
                continue
            u = _past_rail(v, lst[li[k, LI_LINK], LS_UDC] + 2.0 * lp[k, LP_V0])
            if u != 0.0:
                a_k = lp[k, LP_L] + 0.5 * h * r
                sb += -h * u / a_k
                s1 += 1.0 / a_k
        new = sb / s1 if s1 > 0.0 else 0.0
        same = True
        for k in range(lp.shape[0]):
            if path_resistance(lp, ls2, k) >= 0.0 and at_rest(lu, ls2, k):
                rail = lst[li[k, LI_LINK], LS_UDC] + 2.0 * lp[k, LP_V0]
                if _past_rail(v, rail) != _past_rail(-new / h, rail):
                    same = False
        corr = new
        if same:
            break
    v = -corr / h
    for k in range(lp.shape[0]):
        if path_resistance(lp, ls2, k) >= 0.0 and at_rest(lu, ls2, k):
            rail = lst[li[k, LI_LINK], LS_UDC] + 2.0 * lp[k, LP_V0]
            held = _past_rail(v, rail)
            ls2[k, LS2_U] = held if held != 0.0 else v
    return corr


@compiled_inline
def _conducting(lp, lu, ls2, k) -> bool:
    """Winding k can carry a current: its path is closed, and its converter switches or
    (a blocked diode bridge) already conducts."""
    return path_resistance(lp, ls2, k) >= 0.0 and (lu[k, LU_ENABLE] > 0.5
                                                   or ls2[k, LS2_I] != 0.0)


@compiled_inline
def balance_windings(lp, lu, ls2, ss):
    """With the primary open and no magnetising branch the windings' currents sum to zero.
    Where a cut leaves them a sum S (the primary's current cut, a contactor's arc
    cleared), the common node takes a voltage impulse that acts on each
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


@compiled_inline
def bridges_stopping(h, corr, lp, li, lu, ls2, lst) -> float:
    """The correction once the blocked bridges whose current this step would reverse
    have stopped: a diode bridge's current falls to zero and stays there, so such a
    bridge leaves the solve (LS2_STOPPED) and the others are solved again without it
    (their sums built afresh), until none is left to stop. A stopped bridge's voltage is
    then the one that brings its own current to zero at the step's end against the
    windings' common voltage, so its winding's books close with the others'. (Driven
    past its opposite rail, a bridge would conduct the other way within the step; here
    it waits for the next.)"""
    for k in range(lp.shape[0]):
        ls2[k, LS2_STOPPED] = 0.0
    for _ in range(lp.shape[0]):
        again = False
        for k in range(lp.shape[0]):
            r = path_resistance(lp, ls2, k)
            i_old = ls2[k, LS2_I]
            if r < 0.0 or lu[k, LU_ENABLE] > 0.5 or i_old == 0.0 or ls2[k, LS2_STOPPED] > 0.5:
                continue
            a_k = lp[k, LP_L] + 0.5 * h * r
            b_k = (lp[k, LP_L] - 0.5 * h * r) * i_old - h * ls2[k, LS2_U]
            if (b_k - corr) / a_k * i_old < 0.0:
                ls2[k, LS2_STOPPED] = 1.0
                again = True
        if not again:
            break
        s_b = 0.0
        s_1 = 0.0
        left = 0
        last = -1
        for k in range(lp.shape[0]):  # the windings still in the solve
            r = path_resistance(lp, ls2, k)
            if r < 0.0 or at_rest(lu, ls2, k) or ls2[k, LS2_STOPPED] > 0.5:
                continue
            a_k = lp[k, LP_L] + 0.5 * h * r
            s_b += ((lp[k, LP_L] - 0.5 * h * r) * ls2[k, LS2_I] - h * ls2[k, LS2_U]) / a_k
            s_1 += 1.0 / a_k
            left += 1
            last = k
        if left == 1 and lu[last, LU_ENABLE] < 0.5:  # a bridge left alone: its current
            ls2[last, LS2_STOPPED] = 1.0  # has nowhere to go, so it stops with the others
            s_b = 0.0
            s_1 = 0.0
        corr = bridges_at_rest(h, s_b, s_1, lp, li, lu, ls2, lst)
    for k in range(lp.shape[0]):
        if ls2[k, LS2_STOPPED] > 0.5:
            r = path_resistance(lp, ls2, k)
            ls2[k, LS2_U] = ((lp[k, LP_L] - 0.5 * h * r) * ls2[k, LS2_I] - corr) / h
    return corr
