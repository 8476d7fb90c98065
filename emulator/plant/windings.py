"""The transformer's windings with its primary open (the feeding breaker's or the train's
own main breaker): coupled through the core alone, with no magnetising branch their
currents sum to zero, so the line-side solve takes the source inductance to infinity
(line.line_substep) and h times the windings' common voltage is -corr there.
"""

from __future__ import annotations

from .jit import compiled, compiled_inline
from .layout import (
    LI_LINK,
    LP_ESW,
    LP_ESW_IREF,
    LP_ESW_VREF,
    LP_FSW,
    LP_L,
    LP_R,
    LP_R_PRE,
    LP_RD,
    LP_V0,
    LS2_E_AC,
    LS2_E_DC,
    LS2_E_LOSS,
    LS2_E_R,
    LS2_I,
    LS2_IDC,
    LS2_LINE,
    LS2_PRE,
    LS2_STOPPED,
    LS2_U,
    LS_I4Q,
    LS_UDC,
    LU_ENABLE,
    LU_MOD,
    SP_L,
    SS_ARC,
    SS_BREAKER,
    SS_E_ARC,
    SS_FEEDER,
    SS_FEEDER_ARC,
    SS_IP,
    SS_U_SEC,
)
from .switchgear import clear_contactor_arc


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


@compiled
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


@compiled
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


@compiled
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


@compiled_inline
def converter_voltage(h, k, i, udc, u_sec_est, r, lp, lu) -> float:
    """Converter k's AC voltage held over the step: switching, m U_dc plus its devices'
    drops in the current's direction; blocked, a diode bridge: the voltage that would stop
    its current (from the secondary's voltage u_sec_est at the step's start), clipped to
    the rails +-(U_dc + 2 V_F)."""
    v_f = 2.0 * lp[k, LP_V0]
    if lu[k, LU_ENABLE] > 0.5:
        sg = 1.0 if i > 0.0 else (-1.0 if i < 0.0 else 0.0)
        return lu[k, LU_MOD] * udc + sg * (v_f + 2.0 * lp[k, LP_RD] * abs(i))
    u = u_sec_est + (lp[k, LP_L] - 0.5 * h * r) * i / h
    rail = udc + v_f
    return min(max(u, -rail), rail)


@compiled_inline
def winding_sums(h, u_sec_est, lc_sum, e_sec, islanded, lp, li, lu, ls2, lst):
    """Each winding's converter voltage, held over the step (in LS2_U), and the sums of
    the Sherman-Morrison solve over the windings whose path is closed: s_b = sum_k b_k /
    a_k and s_1 = sum_k 1 / a_k, a_k = L_k + h R_k / 2, b_k = (L_k - h R_k / 2) i_k +
    lc_sum + h (e_sec - u_k) (lc_sum the source's share of the old currents, e_sec the
    EMF over n: both 0 with the primary open, where a bridge at rest is left out too:
    bridges_at_rest)."""
    s_b = 0.0
    s_1 = 0.0
    for k in range(lp.shape[0]):
        r = path_resistance(lp, ls2, k)
        if r < 0.0:
            ls2[k, LS2_U] = 0.0
            continue
        if islanded and at_rest(lu, ls2, k):
            continue
        i = ls2[k, LS2_I]
        u = converter_voltage(h, k, i, lst[li[k, LI_LINK], LS_UDC], u_sec_est, r, lp, lu)
        ls2[k, LS2_U] = u
        a_k = lp[k, LP_L] + 0.5 * h * r
        b_k = (lp[k, LP_L] - 0.5 * h * r) * i + lc_sum + h * (e_sec - u)
        s_b += b_k / a_k
        s_1 += 1.0 / a_k
    return s_b, s_1


@compiled_inline
def book_winding(h, k, i_old, i_new, r, lp, li, lu, ls2, lst, i_link):
    """Winding k's converter over the step: its DC current into the link (the share of
    its voltage that comes from the link, and its switching loss) and the energy books."""
    link = li[k, LI_LINK]
    udc = lst[link, LS_UDC]
    i_avg = 0.5 * (i_old + i_new)
    u = ls2[k, LS2_U]
    if lu[k, LU_ENABLE] > 0.5:
        s = lu[k, LU_MOD]
    elif udc > 0.0 and abs(u) < udc:
        s = u / udc
    else:
        s = 1.0 if u > 0.0 else (-1.0 if u < 0.0 else 0.0)
    p_sw = 0.0
    if lu[k, LU_ENABLE] > 0.5:
        p_sw = (2.0 * lp[k, LP_FSW] * lp[k, LP_ESW] * (udc / lp[k, LP_ESW_VREF])
                * (abs(i_avg) / lp[k, LP_ESW_IREF]))
    i_dc = s * i_avg - (p_sw / udc if udc > 0.0 else 0.0)
    ls2[k, LS2_IDC] += i_dc * h
    lst[link, LS_I4Q] += i_dc * h
    i_link[link, 1] += i_dc
    ls2[k, LS2_E_AC] += u * i_avg * h
    ls2[k, LS2_E_DC] += udc * i_dc * h
    ls2[k, LS2_E_LOSS] += (u - s * udc) * i_avg * h + p_sw * h
    ls2[k, LS2_E_R] += r * i_avg * i_avg * h  # consistent with the trapezoidal step


@compiled
def islanded_substep(h, sp, ss, lp, li, lu, ls2, lst, i_link):
    """The windings over one sub-step with the primary open: the same trapezoidal step
    as line.line_substep's with the source inductance taken to infinity (the EMF and the
    old sum drop out, the correction becomes s_b / s_1 and their currents sum to zero);
    bridges at rest and stopping as above; a contactor's arc that clears leaves the
    others a sum that balance_windings takes out. SS_U_SEC gets the common voltage."""
    n_lc = lp.shape[0]
    # the windings' common voltage, the last step's; bridges at rest join below
    s_b, s_1 = winding_sums(h, ss[SS_U_SEC], 0.0, 0.0, True, lp, li, lu, ls2, lst)
    corr = bridges_at_rest(h, s_b, s_1, lp, li, lu, ls2, lst)
    corr = bridges_stopping(h, corr, lp, li, lu, ls2, lst)
    ss[SS_U_SEC] = -corr / h
    cut = False
    for k in range(n_lc):
        i_old = ls2[k, LS2_I]
        r = path_resistance(lp, ls2, k)
        if r < 0.0:
            ls2[k, LS2_I] = 0.0
            continue
        a_k = lp[k, LP_L] + 0.5 * h * r
        i_new = ((lp[k, LP_L] - 0.5 * h * r) * i_old - h * ls2[k, LS2_U] - corr) / a_k
        udc = lst[li[k, LI_LINK], LS_UDC]
        if ((at_rest(lu, ls2, k) and abs(ls2[k, LS2_U]) < udc + 2.0 * lp[k, LP_V0])
                or ls2[k, LS2_STOPPED] > 0.5):
            i_new = 0.0  # a bridge at rest within its rails stays at rest; one stops
        if lu[k, LU_ENABLE] < 0.5 and i_new * i_old < 0.0:
            i_new = 0.0  # (a stop bridges_stopping did not see, at the rounding's level)
        if clear_contactor_arc(h, k, i_old, i_new, sp, ss, lp, lu, ls2):
            ls2[k, LS2_I] = 0.0
            cut = True
        else:
            ls2[k, LS2_I] = i_new
        book_winding(h, k, i_old, i_new, r, lp, li, lu, ls2, lst, i_link)
    if cut:
        balance_windings(lp, lu, ls2, ss)


@compiled
def open_primary(sp, ss, lp, lu, ls2):
    """An arc on the primary side clears, the train's main breaker's or the feeding
    breaker's (or both, burning at once): the primary stops carrying current and what the
    source inductance held goes into the arc (0 at a current zero). The windings stay
    coupled through the core, their currents now to sum to zero (balance_windings)."""
    ss[SS_E_ARC] += 0.5 * sp[SP_L] * ss[SS_IP] * ss[SS_IP]
    ss[SS_IP] = 0.0
    balance_windings(lp, lu, ls2, ss)
    if ss[SS_ARC] >= 0.0:
        ss[SS_BREAKER] = 0.0
        ss[SS_ARC] = -1.0
    if ss[SS_FEEDER_ARC] >= 0.0:
        ss[SS_FEEDER] = 0.0
        ss[SS_FEEDER_ARC] = -1.0
