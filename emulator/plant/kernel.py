"""The compiled sub-step loop that advances the whole trainset by one frame.

Order inside each sub-step of length h (commands held over the frame):

1. per inverter: the held stator voltage from duties, DC-link voltage and the sign of
   each phase current at the start of the sub-step (dead time, device drops), or the
   diode-bridge voltage when the gates are blocked, or an ideal sinusoidal source;
2. all motors at once on the column buffer (machine_columns.py), then per inverter the
   sine sources' motors and open phases (drive_substep.py): exact zero-order-hold step of the flux
   linkages (machine.py) with the rotor speed frozen at the refresh value; energies
   from exact flux integrals;
3. per motor shaft (shaft.py): rotor, gear, coupling and wheelset (rigid or two-mass)
   with the creep force linearised and stepped by backward Euler on the slip velocity
   (the contact is stiff: tau ~ 0.1 ms per m/s of speed) and the friction brake at the
   wheel, or an imposed speed (dynamometer), or a free shaft with a load torque;
4. train: lumped mass with stiction at rest; the unmotored axles' brakes.

Once a frame, before the sub-steps: the axle loads from the creep forces (load transfer).
Each sub-step, first: the brake cylinders follow their demands, and the contact law
gives each axle's creep force at its slip (on the column buffer; used in 3).

The machine matrices are refreshed at the start of each frame (default) or of each
sub-step (``refresh_each``), at the speed predicted for the middle of the interval,
which makes the electrical-mechanical coupling second-order accurate. Thermal networks
advance once per frame with the frame's mean losses.
"""

from __future__ import annotations

import math

from .drive_substep import bridge_voltage, inverter_substep
from .jit import compiled
from .layout import (
    II_LINK,
    II_SOURCE,
    IS_IDC,
    IU_SINE_FREQ,
    LS_IDC,
    MI_INVERTER,
    MI_SAT_POINTS,
    MI_SHAFT_MODE,
    MP_J_ROTOR,
    MP_LLR,
    MP_LLS,
    MP_POLE_PAIRS,
    MP_WHEEL_R,
    MS_ACCEL,
    MS_CREEP_FORCE,
    MS_CREEP_VEL,
    MS_E_SLIP,
    MS_LM,
    MS_OMEGA_AT_REFRESH,
    MS_OMEGA_M,
    MS_OMEGA_REF,
    MS_OMEGA_W,
    MU_IMPOSED_SPEED,
    MU_LOAD_TORQUE,
    MX_PSI_R,
    MX_PSI_S,
    SHAFT_DRIVETRAIN,
    SHAFT_FREE,
    SHAFT_IMPOSED_SPEED,
    SOURCE_SINE,
    TP_AMBIENT,
    TP_DAVIS_A,
    TP_DAVIS_B,
    TP_DAVIS_C,
    TP_GRAVITY,
    TP_MASS,
    TP_ROT_ALLOWANCE,
    TS_ACCEL,
    TS_BRAKE_FORCE,
    TS_E_BRAKE,
    TS_E_GRADE,
    TS_E_RESIST,
    TS_POSITION,
    TS_SPEED,
    TS_TRACTIVE_FORCE,
    TU_CURVE_RESISTANCE,
    TU_GRADIENT,
)
from .line import line_frame_end, line_frame_start, line_substep
from .machine import (
    currents,
    refresh_matrices,
    torque,
)
from .machine_columns import held_voltage_step, store_columns
from .power_quality import window_update
from .probe import probe_values
from .shaft import (
    axle_loads,
    brake_cylinders,
    contact_forces,
    load_contact_columns,
    locked_hold,
    unmotored_grip,
)
from .thermal import thermal_frame
from .train import gradient_force, step_speed


@compiled
def _refresh(mpar, mint, mu, ms, mx, sat_i, sat_psi, iint, iu, h, interval, c):
    """Freeze each motor's speed for the coming interval and rebuild its matrices (into
    mx, ms and the columns c)."""
    for m in range(mpar.shape[0]):
        mode = mint[m, MI_SHAFT_MODE]
        om = ms[m, MS_OMEGA_M]
        if mode == SHAFT_IMPOSED_SPEED:
            om_ref = mu[m, MU_IMPOSED_SPEED]
        elif mode == SHAFT_FREE:
            lm = ms[m, MS_LM]
            i_s, _ = currents(mx[m, MX_PSI_S], mx[m, MX_PSI_R], mpar[m, MP_LLS] + lm,
                              mpar[m, MP_LLR] + lm, lm)
            t_e = torque(mx[m, MX_PSI_S], i_s, mpar[m, MP_POLE_PAIRS])
            om_ref = om + 0.5 * interval * (t_e - mu[m, MU_LOAD_TORQUE]) / mpar[m, MP_J_ROTOR]
        else:
            ms[m, MS_ACCEL] = (om - ms[m, MS_OMEGA_AT_REFRESH]) / interval
            om_ref = om + 0.5 * interval * ms[m, MS_ACCEL]
        ms[m, MS_OMEGA_AT_REFRESH] = om
        ms[m, MS_OMEGA_REF] = om_ref
        k = mint[m, MI_INVERTER]
        sine_on = iint[k, II_SOURCE] == SOURCE_SINE
        sine_omega = 2.0 * math.pi * iu[k, IU_SINE_FREQ]
        refresh_matrices(mpar, ms, mx, m, mpar[m, MP_POLE_PAIRS] * om_ref, h, sine_on,
                         sine_omega,
                         sat_i[m], sat_psi[m], mint[m, MI_SAT_POINTS], c)


@compiled
def advance_frame(n_sub, h, t0, refresh_each, mpar, mint, mu, ms, mx, sat_i, sat_psi,
                  ipar, iint, iu, ist, lst, tpar, tu, ts, sp, harmonics, ss, lp, li, lu, ls2,
                  kp, ku, i_link, probe_src, probe_row, probe_col, trace, cols, pq_ring,
                  pq_sum, pq_row):
    """Advance every converter, motor, axle and the train by n_sub sub-steps of h.

    Arrays are laid out as in layout.py and updated in place. t0 is the plant time at
    the start of the frame, s; periodic sources are evaluated at each sub-step's instant.
    After each sub-step s, trace[s] takes the probed values (probe.py). cols is the
    column buffer (columns.py): the machines' electrical state and coefficients and the
    contact law's values within the frame. Last, the frame's power-quality integrals go
    into row pq_row of the window's ring pq_ring, its sums pq_sum
    (power_quality.window_update).
    """
    n_i = ipar.shape[0]
    frame = n_sub * h
    for k in range(n_i):
        ist[k, IS_IDC] = 0.0
    mass = tpar[TP_MASS]
    m_eff = mass * (1.0 + tpar[TP_ROT_ALLOWANCE])
    curve = max(tu[TU_CURVE_RESISTANCE], 0.0)  # a friction: against motion, holds at rest
    axle_loads(mpar, mint, ms)
    any_held = False  # (a bench's sine sources alone need no held-voltage pass)
    for k in range(n_i):
        any_held = any_held or iint[k, II_SOURCE] != SOURCE_SINE
    any_contact = False  # (nor its free shafts a contact law)
    for m in range(mpar.shape[0]):
        any_contact = any_contact or mint[m, MI_SHAFT_MODE] == SHAFT_DRIVETRAIN
    if any_contact:
        load_contact_columns(mpar, cols)
    grip = unmotored_grip(mpar, mint, tpar)
    line_frame_start(ss, ls2, lst)
    for s in range(n_sub):
        t = t0 + s * h
        if s == 0 or refresh_each:
            if s > 0:
                store_columns(mx, cols)
            _refresh(mpar, mint, mu, ms, mx, sat_i, sat_psi, iint, iu, h,
                     h if refresh_each else frame, cols)
        v = ts[TS_SPEED]
        force = 0.0
        i_link[:, :] = 0.0
        brake_cylinders(mpar, mint, mu, ms, tu, ts, h)
        if any_contact:
            contact_forces(mpar, ms, cols, v)
        brake = min(ts[TS_BRAKE_FORCE], grip)
        for k in range(n_i):
            bridge_voltage(k, t, h, mpar, mu, ms, mx, ipar, iint, iu, ist, lst, cols, any_held)
        if any_held:
            held_voltage_step(cols, mpar.shape[0], h)
        for k in range(n_i):
            force += inverter_substep(k, h, mpar, mint, mu, ms, mx, ipar, iint, iu, ist,
                                      lst, v, ts[TS_ACCEL], i_link, cols, any_held)
        line_substep(t, h, sp, harmonics, ss, lp, li, lu, ls2, kp, ku, lst, i_link)
        f_grade = gradient_force(mass, tpar[TP_GRAVITY], tu[TU_GRADIENT])
        v_new, resist = step_speed(v, force - f_grade, tpar[TP_DAVIS_A] + brake + curve,
                                   tpar[TP_DAVIS_B], tpar[TP_DAVIS_C], m_eff, h,
                                   locked_hold(mpar, mint, ms) if v == 0.0 else 0.0)
        v_avg = 0.5 * (v + v_new)
        ts[TS_POSITION] += v_avg * h
        ts[TS_ACCEL] = (v_new - v) / h
        ts[TS_SPEED] = v_new
        ts[TS_TRACTIVE_FORCE] = force
        ts[TS_E_GRADE] += f_grade * v_avg * h
        e_res = abs(resist * v_avg) * h
        e_brake = brake * abs(v_avg) * h if resist != 0.0 else 0.0
        e_brake = min(e_brake, e_res)
        ts[TS_E_BRAKE] += e_brake
        ts[TS_E_RESIST] += e_res - e_brake
        for m in range(mpar.shape[0]):
            if mint[m, MI_SHAFT_MODE] == SHAFT_DRIVETRAIN:
                ms[m, MS_E_SLIP] -= ms[m, MS_CREEP_FORCE] * v_avg * h
                ms[m, MS_CREEP_VEL] = ms[m, MS_OMEGA_W] * mpar[m, MP_WHEEL_R] - v_new
        probe_values(probe_src, probe_row, probe_col, ss, ls2, lst, ist, ms, trace[s])

    store_columns(mx, cols)
    for k in range(n_i):
        ist[k, IS_IDC] /= frame
    for link in range(lst.shape[0]):
        lst[link, LS_IDC] = 0.0
    for k in range(n_i):
        lst[iint[k, II_LINK], LS_IDC] += ist[k, IS_IDC]
    line_frame_end(frame, sp, ss, ls2, kp, lst, tpar[TP_AMBIENT])
    thermal_frame(mpar, ms, ipar, ist, tpar[TP_AMBIENT], frame)
    window_update(ss, pq_ring, pq_sum, pq_row)
