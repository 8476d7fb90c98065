"""Line-side switchgear: the train's main breaker, the line converters' precharge and line
contactors, and the substation's feeding breaker as the train sees it.

A switch that parts its contacts under current draws an arc that carries the current on
until it passes zero, when the arc goes out (the principle of AC interruption, e.g.
Garzon, *High Voltage Circuit Breakers*); the arc never burns longer than SP_MAX_ARC.
The arc's voltage is left out. line.line_substep calls these each sub-step.
"""

from __future__ import annotations

from .jit import compiled, compiled_inline
from .layout import (
    LP_L,
    LP_LINE_DELAY,
    LP_PRE_DELAY,
    LS2_ARC,
    LS2_I,
    LS2_LINE,
    LS2_LINE_TIMER,
    LS2_PRE,
    LS2_PRE_TIMER,
    LU_LINE_CMD,
    LU_PRE_CMD,
    SP_BREAKER_DELAY,
    SP_LIVE,
    SP_MAX_ARC,
    SS_ARC,
    SS_BREAKER,
    SS_BREAKER_CMD,
    SS_BREAKER_TIMER,
    SS_E_ARC,
    SS_FEEDER,
    SS_FEEDER_ARC,
    SS_LINE_TRIP,
)


@compiled
def contactors(lp, lu, ls2, sp, ss, h):
    """Switchgear: each contact follows its command after its delay. Opening under
    current, the contacts part and the arc carries the current on to its next zero
    (line_substep clears it there), never longer than SP_MAX_ARC; the arc's voltage is
    left out. Closing makes the circuit at the catenary's phase as it is."""
    cmd = 1.0 if ss[SS_BREAKER_CMD] > 0.5 else 0.0
    if ss[SS_LINE_TRIP] > 0.5:  # the hardware trip holds the breaker open until the
        if cmd == 0.0:  # controller commands it open (acknowledges); then it may close
            ss[SS_LINE_TRIP] = 0.0
        cmd = 0.0
    if ss[SS_ARC] >= 0.0:
        # opening: trip-free, the breaker completes its opening whatever is commanded
        # meanwhile; a close then waits its closing delay from the open state
        ss[SS_ARC] += h
        ss[SS_BREAKER_TIMER] = sp[SP_BREAKER_DELAY]
    elif cmd != ss[SS_BREAKER]:
        if cmd == 0.0:
            ss[SS_ARC] = 0.0  # the contacts part: the arc burns through this sub-step
        else:
            ss[SS_BREAKER_TIMER] -= h
            if ss[SS_BREAKER_TIMER] <= 0.0:
                ss[SS_BREAKER] = 1.0
    else:
        ss[SS_BREAKER_TIMER] = sp[SP_BREAKER_DELAY]
    for k in range(lp.shape[0]):
        for cmd_col, state_col, timer_col, delay_col in ((LU_PRE_CMD, LS2_PRE, LS2_PRE_TIMER,
                                                          LP_PRE_DELAY),
                                                         (LU_LINE_CMD, LS2_LINE, LS2_LINE_TIMER,
                                                          LP_LINE_DELAY)):
            want = 1.0 if lu[k, cmd_col] > 0.5 else 0.0
            if want != ls2[k, state_col]:
                ls2[k, timer_col] -= h
                if ls2[k, timer_col] <= 0.0:
                    other = LS2_LINE if state_col == LS2_PRE else LS2_PRE
                    other_cmd = LU_LINE_CMD if state_col == LS2_PRE else LU_PRE_CMD
                    breaks_path = ls2[k, other] < 0.5 or lu[k, other_cmd] < 0.5
                    if want == 1.0 or not breaks_path or ls2[k, LS2_I] == 0.0:
                        ls2[k, state_col] = want
                    else:  # interrupting the winding's current: an arc to its zero
                        ls2[k, LS2_ARC] = 0.0 if ls2[k, LS2_ARC] < 0.0 else ls2[k, LS2_ARC] + h
            else:
                ls2[k, timer_col] = lp[k, delay_col]


@compiled_inline
def feeding_breaker(sp, ss, h):
    """The substation's feeding breaker, as the train sees it: commanded open (SP_LIVE 0),
    its contacts part and its arc carries the line's current on to the next zero
    (line_substep clears it there, never later than SP_MAX_ARC), with the source's EMF
    still behind it; then the section is isolated. Commanded closed, it closes at once,
    at the catenary's phase as it is (a reclose)."""
    if sp[SP_LIVE] > 0.5:
        ss[SS_FEEDER] = 1.0
        ss[SS_FEEDER_ARC] = -1.0
    elif ss[SS_FEEDER_ARC] >= 0.0:
        ss[SS_FEEDER_ARC] += h
    elif ss[SS_FEEDER] > 0.5:
        ss[SS_FEEDER_ARC] = 0.0  # the contacts part: the arc burns through this sub-step


@compiled_inline
def clear_contactor_arc(h, k, i_old, i_new, sp, ss, lp, lu, ls2) -> bool:
    """Whether winding k's contactor arc clears at the end of this step (its current's
    zero, or cut): then both contacts commanded open are open (a contact whose own delay
    has not run out stays as it is), and what its leakage still held goes into the arc."""
    if not cleared(ls2[k, LS2_ARC], i_old, i_new, sp[SP_MAX_ARC], h):
        return False
    ss[SS_E_ARC] += 0.5 * lp[k, LP_L] * i_new * i_new
    if lu[k, LU_LINE_CMD] < 0.5 and ls2[k, LS2_LINE_TIMER] <= 0.0:
        ls2[k, LS2_LINE] = 0.0
    if lu[k, LU_PRE_CMD] < 0.5 and ls2[k, LS2_PRE_TIMER] <= 0.0:
        ls2[k, LS2_PRE] = 0.0
    ls2[k, LS2_ARC] = -1.0
    return True


@compiled_inline
def cleared(arc, i_old, i_new, max_arc, h) -> bool:
    """Whether an arc clears at the end of this step: its current has reached zero
    (changed sign or stopped), or by the step's end it will have burned (arc, the time
    before this step, plus h) as long as the switch allows. A maximum that is not a whole
    number of sub-steps is cut at the last step end within it (never beyond)."""
    return arc >= 0.0 and (i_old * i_new <= 0.0 or arc + 2.0 * h > max_arc + 1e-12)
