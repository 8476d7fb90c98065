"""The mechanics of each motored axle, stepped inside the kernel's sub-step: the
drivetrain from rotor to wheel-rail contact (rigid or two-mass), the friction brake at the
wheel with its cylinder's lag, the axle loads moved by the creep forces, and what the
unmotored axles' brakes may take from the train.
"""

from __future__ import annotations

import math

from .columns import (
    K_A,
    K_ATAN,
    K_B,
    K_DEPS,
    K_DF,
    K_DMU,
    K_EX,
    K_F,
    K_KA,
    K_KAE,
    K_KAPPA,
    K_KS,
    K_KSE,
    K_MU,
    K_MU0,
    K_SCALE,
    K_VREF,
    K_W,
    W,
)
from .contact_maths import arctan, exponential
from .drivetrain import wheel_torque
from .jit import compiled_inline
from .layout import (
    LT_TERMS,
    MI_LT_AXLE0,
    MI_SHAFT_MODE,
    MP_ADHESION_FACTOR,
    MP_AXLE_LOAD,
    MP_BRAKE_TAU,
    MP_C_FW,
    MP_C_SHAFT,
    MP_CREEP_VREF,
    MP_GEAR,
    MP_GEAR_EFF,
    MP_J_GEAR,
    MP_J_ROTOR,
    MP_J_WHEELSET,
    MP_K_SHAFT,
    MP_KA,
    MP_KALKER,
    MP_KS,
    MP_LT_COEF0,
    MP_MU0,
    MP_POL_A,
    MP_POL_B,
    MP_POL_KAPPA,
    MP_POL_SCALE,
    MP_WHEEL_R,
    MS_ADHESION_UTIL,
    MS_AXLE_LOAD,
    MS_BRAKE_FORCE,
    MS_CREEP_FORCE,
    MS_E_BRAKE,
    MS_E_DAMPER,
    MS_E_FW,
    MS_E_GEAR,
    MS_E_LOAD,
    MS_E_SHAFT,
    MS_E_SLIP,
    MS_OMEGA_M,
    MS_OMEGA_W,
    MS_SHAFT_TORQUE,
    MS_THETA_M,
    MS_TWIST,
    MU_BRAKE_DEMAND,
    MU_IMPOSED_SPEED,
    MU_LOAD_TORQUE,
    SHAFT_DRIVETRAIN,
    SHAFT_IMPOSED_SPEED,
    TP_UNMOTORED_AXLES,
    TS_BRAKE_FORCE,
    TU_BRAKE_FORCE,
    TU_BRAKE_TAU,
)


@compiled_inline
def start_direction(j_eff, d_free, brake_torque, h):
    """The way a wheelset at rest starts to turn (+1, -1), or 0 while its friction brake
    holds it: the torque that would start it (its effective inertia times the free step's
    speed change over h) is within the brake's torque, as static friction holds."""
    if abs(j_eff * d_free / h) <= brake_torque:
        return 0.0
    return 1.0 if d_free > 0.0 else -1.0


@compiled_inline
def shaft_step(mpar, mint, mu, ms, cols, m, t_avg, v, a_train, h):
    """Advance motor m's shaft; returns the creep force applied to the train, N.

    Drivetrain mode, two-mass (MP_K_SHAFT > 0): the rotor with the gear, J_1 = J_r +
    J_g / i^2 at the motor's speed, and the wheelset J_w are joined through the gear i by
    the drive's coupling, a torsional spring k and damper c referred to the motor shaft::

        J_1 dw_m/dt = T_e - T_sh,     T_sh = k phi + c (w_m - i w_w),  dphi/dt = w_m - i w_w
        J_w dw_w/dt = rho T_sh - r F(w_w r - v) - T_b sign(w_w)

    rho = i eta when the coupling passes power to the wheel, i / eta when it takes it
    back (the gear's loss comes out of the flow, taken at the coupling's torque: the gear
    wheel's own inertia torque is left out of the loss). The spring and damper go by the
    trapezoidal rule (no numerical damping of the torsional mode), the creep force by
    linearised backward Euler on the slip velocity (the contact is stiff). Rigid (k = 0):
    one inertia J_w + J_g + i^2 J_r. The friction brake T_b = F_b r opposes the wheel's
    turning and holds it at rest up to its size (a locked wheel).

    The creep force F and its slope at the step's start come from contact_forces, which
    the kernel runs over all axles earlier in the same sub-step (into the columns cols).
    """
    mode = mint[m, MI_SHAFT_MODE]
    om = ms[m, MS_OMEGA_M]
    force = 0.0
    t_fw = mpar[m, MP_C_FW] * om  # friction and windage, a drag at the start speed
    t_l = mu[m, MU_LOAD_TORQUE]  # a bench's dynamometer on the rotor (0 on a train)
    if mode == SHAFT_DRIVETRAIN:
        t_avg -= t_l + t_fw  # what the rotor passes on (restored below for the books)
        gear = mpar[m, MP_GEAR]
        r = mpar[m, MP_WHEEL_R]
        eff = mpar[m, MP_GEAR_EFF]
        ow = ms[m, MS_OMEGA_W]
        mu0 = mpar[m, MP_MU0] * mpar[m, MP_ADHESION_FACTOR]
        f = cols[K_F * W + m]  # at w = ow r - v (contact_forces, this sub-step)
        kk = max(cols[K_DF * W + m], 0.0)  # the falling branch stays explicit
        tb = ms[m, MS_BRAKE_FORCE] * r  # brake torque at the wheelset, >= 0
        k = mpar[m, MP_K_SHAFT]
        if k > 0.0:
            jr = mpar[m, MP_J_ROTOR] + mpar[m, MP_J_GEAR] / (gear * gear)
            jw = mpar[m, MP_J_WHEELSET]
            c = mpar[m, MP_C_SHAFT]
            phi = ms[m, MS_TWIST]
            dlt = om - gear * ow
            s0 = k * phi + (0.5 * k * h + c) * dlt
            g = 0.25 * k * h + 0.5 * c  # T_sh,avg = s0 + g (d_m - i d_w)
            rho = gear * eff if s0 * om >= 0.0 else gear / eff
            a11 = jr + h * g
            a12 = -h * g * gear
            a21 = -h * rho * g
            a22 = jw + h * rho * g * gear + h * r * r * kk
            b1 = h * (t_avg - s0)
            b2 = h * (rho * s0 - r * f + r * kk * h * a_train)
            det = a11 * a22 - a12 * a21
            sgn = 1.0 if ow > 0.0 else -1.0
            if ow == 0.0:
                sgn = start_direction(a22 - a21 * a12 / a11, (a11 * b2 - a21 * b1) / det, tb, h)
            b2 -= h * sgn * tb
            d2 = (a11 * b2 - a21 * b1) / det
            held = sgn == 0.0 or (tb > 0.0 and (ow + d2) * ow < 0.0)
            if held:
                d2 = -ow  # the brake has stopped the wheel within the step
            d1 = (b1 - a12 * d2) / a11
            ow_new = ow + d2
            om_new = om + d1
            t_sh = s0 + g * (d1 - gear * d2)  # mean shaft torque over the step
            dlt_avg = dlt + 0.5 * (d1 - gear * d2)
            phi_new = phi + h * dlt_avg
            ms[m, MS_TWIST] = phi_new
            ms[m, MS_SHAFT_TORQUE] = k * phi_new + c * (om_new - gear * ow_new)
            ms[m, MS_E_DAMPER] += c * dlt_avg * dlt_avg * h
            force = f + kk * (r * d2 - h * a_train)
            ow_avg = ow + 0.5 * d2
            # the brake's torque as applied; in a step where it stopped or holds the wheel,
            # what the wheelset's balance leaves of it (less than T_b: static friction)
            t_brake = rho * t_sh - r * force - jw * d2 / h if held else sgn * tb
            ms[m, MS_E_GEAR] += (gear - rho) * t_sh * ow_avg * h
        else:
            j1 = mpar[m, MP_J_ROTOR] + mpar[m, MP_J_GEAR] / (gear * gear)
            jeq = mpar[m, MP_J_WHEELSET] + gear * gear * j1
            t_w = wheel_torque(t_avg, om, gear, eff)
            a22 = jeq + h * r * r * kk
            b2 = h * (t_w - r * f + r * kk * h * a_train)
            sgn = 1.0 if ow > 0.0 else -1.0
            if ow == 0.0:
                sgn = start_direction(a22, b2 / a22, tb, h)
            b2 -= h * sgn * tb
            d2 = b2 / a22
            held = sgn == 0.0 or (tb > 0.0 and (ow + d2) * ow < 0.0)
            if held:
                d2 = -ow
            ow_new = ow + d2
            om_new = gear * ow_new
            force = f + kk * (r * d2 - h * a_train)
            ow_avg = ow + 0.5 * d2
            t_brake = t_w - r * force - jeq * d2 / h if held else sgn * tb
            # the coupling passes what the rotor's side does not take to accelerate itself
            ms[m, MS_SHAFT_TORQUE] = t_avg - j1 * gear * d2 / h
            ms[m, MS_E_GEAR] += (t_avg * gear - t_w) * ow_avg * h
        ms[m, MS_OMEGA_W] = ow_new
        ms[m, MS_E_BRAKE] += t_brake * ow_avg * h
        ms[m, MS_E_SLIP] += force * r * ow_avg * h  # train's share removed after its step
        ms[m, MS_CREEP_FORCE] = force
        q_mu = mu0 * ms[m, MS_AXLE_LOAD]
        ms[m, MS_ADHESION_UTIL] = abs(force) / q_mu if q_mu > 0.0 else 0.0
    elif mode == SHAFT_IMPOSED_SPEED:
        om_new = mu[m, MU_IMPOSED_SPEED]
        t_l = t_avg - t_fw  # the dynamometer takes what friction and windage leave
    else:
        om_new = om + h * (t_avg - t_l - t_fw) / mpar[m, MP_J_ROTOR]  # J dw/dt = T - T_L
    om_avg = 0.5 * (om + om_new)
    if mode == SHAFT_DRIVETRAIN:
        t_avg += t_l + t_fw
    ms[m, MS_E_LOAD] += t_l * om_avg * h
    ms[m, MS_E_FW] += t_fw * om_avg * h
    ms[m, MS_E_SHAFT] += t_avg * om_avg * h
    ms[m, MS_THETA_M] += om_avg * h
    ms[m, MS_OMEGA_M] = om_new
    return force


@compiled_inline
def load_contact_columns(mpar, c):
    """The contact law's constants for the frame into the columns (after axle_loads)."""
    for m in range(mpar.shape[0]):
        c[K_KAPPA * W + m] = mpar[m, MP_POL_KAPPA]
        c[K_SCALE * W + m] = mpar[m, MP_POL_SCALE]
        c[K_KA * W + m] = mpar[m, MP_KA]
        c[K_KS * W + m] = mpar[m, MP_KS]
        c[K_MU0 * W + m] = mpar[m, MP_MU0] * mpar[m, MP_ADHESION_FACTOR]
        c[K_A * W + m] = mpar[m, MP_POL_A]
        c[K_B * W + m] = mpar[m, MP_POL_B]
        c[K_VREF * W + m] = mpar[m, MP_CREEP_VREF]


@compiled_inline
def contact_forces(mpar, ms, c, v):
    """Each axle's creep force and its slope at the slip velocity w = omega_w r - v of the
    sub-step's start, into the columns K_F and K_DF for shaft_step: drivetrain.polach_core
    for every motor (used only on the motored axles' drivetrains), its arithmetic in the
    same order, so the same to the bit (tests/plant/test_columns.py compares them).

    In four passes over the motors (columns.py), each a loop the compiler vectorises:
    the exponential and the arctangent are arithmetic (contact_maths.py), not calls into
    the maths library, which kept their loops scalar; a square root and four divisions an
    axle around them. In one loop each axle's chain of dependent operations waited on the
    one before; the 128-motor frame's cost is that latency, not the arithmetic."""
    n = mpar.shape[0]
    for m in range(n):
        w = ms[m, MS_OMEGA_W] * mpar[m, MP_WHEEL_R] - v
        c[K_W * W + m] = w
        c[K_EX * W + m] = exponential(-c[K_B * W + m] * abs(w))
    for m in range(n):
        aw = abs(c[K_W * W + m])
        ex = c[K_EX * W + m]
        mu0 = c[K_MU0 * W + m]
        a_ratio = c[K_A * W + m]
        v_ref = c[K_VREF * W + m]
        mu = mu0 * ((1.0 - a_ratio) * ex + a_ratio)
        dmu = -mu0 * (1.0 - a_ratio) * c[K_B * W + m] * ex  # d mu / d|w|
        inv_mu = 1.0 / mu
        cc = c[K_KAPPA * W + m] * inv_mu / math.sqrt(v * v + v_ref * v_ref)
        eps = cc * aw
        c[K_MU * W + m] = mu
        c[K_DMU * W + m] = dmu
        c[K_DEPS * W + m] = cc * (1.0 - aw * dmu * inv_mu)
        c[K_KAE * W + m] = c[K_KA * W + m] * eps
        c[K_KSE * W + m] = c[K_KS * W + m] * eps
    for m in range(n):
        c[K_ATAN * W + m] = arctan(c[K_KSE * W + m])
    for m in range(n):
        ka_e = c[K_KAE * W + m]
        ks_e = c[K_KSE * W + m]
        k_a = c[K_KA * W + m]
        mu = c[K_MU * W + m]
        g = 1.0 / (1.0 + ka_e * ka_e)
        f = ka_e * g + c[K_ATAN * W + m]
        df = k_a * (1.0 - ka_e * ka_e) * g * g + c[K_KS * W + m] / (1.0 + ks_e * ks_e)
        scale = c[K_SCALE * W + m]
        force = scale * mu * f
        dforce = scale * (c[K_DMU * W + m] * f + mu * df * c[K_DEPS * W + m])
        off = c[K_MU0 * W + m] <= 0.0  # no friction: no force
        c[K_F * W + m] = 0.0 if off else (force if c[K_W * W + m] >= 0.0 else -force)
        c[K_DF * W + m] = 0.0 if off else dforce


@compiled_inline
def axle_loads(mpar, mint, ms):
    """Axle loads for the frame: static load plus the transfer by the creep forces of the
    last sub-step (Delta Q_i = sum_j c_ij F_j, coefficients from build.py), kept above a
    tenth of the static load; the contact constants follow the load."""
    for m in range(mpar.shape[0]):
        q = mpar[m, MP_AXLE_LOAD]
        for j in range(LT_TERMS):
            axle = mint[m, MI_LT_AXLE0 + j]
            if axle >= 0:
                q += mpar[m, MP_LT_COEF0 + j] * ms[axle, MS_CREEP_FORCE]
        q = max(q, 0.1 * mpar[m, MP_AXLE_LOAD])
        ms[m, MS_AXLE_LOAD] = q
        mpar[m, MP_POL_KAPPA] = 0.25 * math.pi * mpar[m, MP_KALKER] / q
        mpar[m, MP_POL_SCALE] = 2.0 * q / math.pi


@compiled_inline
def unmotored_grip(mpar, mint, tpar):
    """The most the unmotored axles' brakes can take from the train, N: their static
    load times the friction mu0 of the rail under the motored axles (on the average; the
    unmotored wheelsets are not modelled, so they neither lock nor slide: they only cannot
    brake harder than the rail allows)."""
    n_un = tpar[TP_UNMOTORED_AXLES]
    total = 0.0
    count = 0
    for m in range(mpar.shape[0]):
        if mint[m, MI_SHAFT_MODE] == SHAFT_DRIVETRAIN:
            total += mpar[m, MP_MU0] * mpar[m, MP_ADHESION_FACTOR] * mpar[m, MP_AXLE_LOAD]
            count += 1
    if count == 0:
        return math.inf
    return n_un * total / count


@compiled_inline
def locked_hold(mpar, mint, ms):
    """The force the braked, locked wheelsets of a train at rest hold it with, N: each
    up to its brake force and its adhesion (a contact that does not roll sticks; the
    creep law, for rolling, would let it creep)."""
    hold = 0.0
    for m in range(mpar.shape[0]):
        if mint[m, MI_SHAFT_MODE] == SHAFT_DRIVETRAIN and ms[m, MS_OMEGA_W] == 0.0:
            hold += min(ms[m, MS_BRAKE_FORCE], mpar[m, MP_MU0] * mpar[m, MP_ADHESION_FACTOR]
                        * ms[m, MS_AXLE_LOAD])
    return hold


@compiled_inline
def brake_cylinders(mpar, mint, mu, ms, tu, ts, h):
    """Brake force of each cylinder after its lag: dF/dt = (F_demand - F) / tau (exact
    step of the first-order lag for a demand held over the sub-step; tau = 0: at once).
    Motored axles brake through their wheels; the unmotored axles' share acts on the
    train (their wheelsets are not modelled)."""
    for m in range(mpar.shape[0]):
        demand = mu[m, MU_BRAKE_DEMAND] if mint[m, MI_SHAFT_MODE] == SHAFT_DRIVETRAIN else 0.0
        if demand != ms[m, MS_BRAKE_FORCE]:  # (a settled cylinder costs no exp)
            tau = mpar[m, MP_BRAKE_TAU]
            a = 1.0 - math.exp(-h / tau) if tau > 0.0 else 1.0
            ms[m, MS_BRAKE_FORCE] += a * (demand - ms[m, MS_BRAKE_FORCE])
    demand = max(tu[TU_BRAKE_FORCE], 0.0)
    if demand != ts[TS_BRAKE_FORCE]:
        tau = tu[TU_BRAKE_TAU]
        a = 1.0 - math.exp(-h / tau) if tau > 0.0 else 1.0
        ts[TS_BRAKE_FORCE] += a * (demand - ts[TS_BRAKE_FORCE])
