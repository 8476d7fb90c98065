"""The machines' held-voltage sub-step, motor beside motor (columns.py says why).

The same arithmetic as machine.py's ``step_flux``, ``currents_frozen``,
``stator_current_integral``, the copper losses and ``torque``, written out in real
numbers as numba's complex operations are ((a + jb)(c + jd) = (ac - bd) + j(ad + bc),
no contraction), so every finite result is the same to the bit (numba's complex product
from Python 3.14 on also recovers infinities from NaN results, which this does not);
what changes is the layout. In the per-motor loop each motor's sub-step is a chain of
dependent operations that the processor cannot overlap with the next motor's; here one
loop runs over all the motors and the compiler packs several motors into each vector
instruction.

Motors fed from a sinusoidal source are stepped by the scalar path in drive_substep.py,
and a motor with an open phase is corrected there after this pass (its flux, currents, copper
losses and torque again, from the pass's end flux); the start-of-step state of both is
kept aside (``B_*``) before this pass, which runs over every motor and overwrites it.
"""

from __future__ import annotations

from .columns import (
    B_PS_RE,
    C_CRR,
    C_CSR,
    C_CSS,
    C_E_CU_R,
    C_E_CU_S,
    C_E_IN,
    C_G1_RE,
    C_G2_RE,
    C_INT_IM,
    C_INT_RE,
    C_IR_IM,
    C_IR_RE,
    C_IS_IM,
    C_IS_RE,
    C_KI1_RE,
    C_KI2_RE,
    C_P11_RE,
    C_P12_RE,
    C_P21_RE,
    C_P22_RE,
    C_PP,
    C_PR_IM,
    C_PR_RE,
    C_PS_IM,
    C_PS_RE,
    C_RR,
    C_RS,
    C_T1,
    C_U_IM,
    C_U_RE,
    W,
    get_c,
)
from .jit import compiled_inline
from .layout import (
    MX_IR,
    MX_IS,
    MX_PSI_R,
    MX_PSI_S,
)


@compiled_inline
def store_columns(mx, c):
    """Before a refresh and at the frame's end: the state back into the motors' array."""
    for m in range(mx.shape[0]):
        mx[m, MX_PSI_S] = get_c(c, C_PS_RE, m)
        mx[m, MX_PSI_R] = get_c(c, C_PR_RE, m)
        mx[m, MX_IS] = get_c(c, C_IS_RE, m)
        mx[m, MX_IR] = get_c(c, C_IR_RE, m)


@compiled_inline
def keep_start(c, m):
    """Keep motor m's start-of-step state aside (the scalar path steps or corrects it)."""
    for f in range(8):
        c[(B_PS_RE + f) * W + m] = c[(C_PS_RE + f) * W + m]


@compiled_inline
def _times(c, f, m, xr, xi):
    """The complex coefficient in fields f, f + 1 of motor m times x = xr + j xi, as
    numba multiplies complex numbers: (ac - bd) + j(ad + bc)."""
    a = c[f * W + m]
    b = c[(f + 1) * W + m]
    return a * xr - b * xi, a * xi + b * xr


@compiled_inline
def held_voltage_step(c, n, h):
    """Every motor's flux linkages, currents, current integral, terminal energy, copper
    losses and torque over one sub-step with its held voltage (C_U_*); machine.py gives
    the equations. In place: the state columns hold the step's end after it."""
    for m in range(n):
        ps0r = c[C_PS_RE * W + m]
        ps0i = c[C_PS_IM * W + m]
        pr0r = c[C_PR_RE * W + m]
        pr0i = c[C_PR_IM * W + m]
        ur = c[C_U_RE * W + m]
        ui = c[C_U_IM * W + m]
        # psi(h) = Phi psi(0) + Gamma u
        t1r, t1i = _times(c, C_P11_RE, m, ps0r, ps0i)
        t2r, t2i = _times(c, C_P12_RE, m, pr0r, pr0i)
        t3r, t3i = _times(c, C_G1_RE, m, ur, ui)
        ps1r = t1r + t2r + t3r
        ps1i = t1i + t2i + t3i
        t1r, t1i = _times(c, C_P21_RE, m, ps0r, ps0i)
        t2r, t2i = _times(c, C_P22_RE, m, pr0r, pr0i)
        t3r, t3i = _times(c, C_G2_RE, m, ur, ui)
        pr1r = t1r + t2r + t3r
        pr1i = t1i + t2i + t3i
        # currents with the frame's coefficients (currents_frozen)
        css = c[C_CSS * W + m]
        csr = c[C_CSR * W + m]
        crr = c[C_CRR * W + m]
        is1r = css * ps1r - csr * pr1r
        is1i = css * ps1i - csr * pr1i
        ir1r = crr * pr1r - csr * ps1r
        ir1i = crr * pr1i - csr * ps1i
        # the stator current's exact integral (stator_current_integral)
        dsr = ps1r - ps0r - h * ur
        dsi = ps1i - ps0i - h * ui
        drr = pr1r - pr0r
        dri = pr1i - pr0i
        t1r, t1i = _times(c, C_KI1_RE, m, dsr, dsi)
        t2r, t2i = _times(c, C_KI2_RE, m, drr, dri)
        intr = t1r + t2r
        inti = t1i + t2i
        # 3/2 Re(u conj(int i_s)): exact for the held voltage
        c[C_E_IN * W + m] = 1.5 * (ur * intr - ui * -inti)
        c[C_INT_RE * W + m] = intr
        c[C_INT_IM * W + m] = inti
        # copper losses 3/2 R |i|^2 by the trapezoid rule
        is0r = c[C_IS_RE * W + m]
        is0i = c[C_IS_IM * W + m]
        ir0r = c[C_IR_RE * W + m]
        ir0i = c[C_IR_IM * W + m]
        c[C_E_CU_S * W + m] = 0.75 * h * c[C_RS * W + m] * (
            (is0r * is0r + is0i * is0i) + (is1r * is1r + is1i * is1i))
        c[C_E_CU_R * W + m] = 0.75 * h * c[C_RR * W + m] * (
            (ir0r * ir0r + ir0i * ir0i) + (ir1r * ir1r + ir1i * ir1i))
        c[C_T1 * W + m] = 1.5 * c[C_PP * W + m] * (ps1r * is1i - ps1i * is1r)
        c[C_PS_RE * W + m] = ps1r
        c[C_PS_IM * W + m] = ps1i
        c[C_PR_RE * W + m] = pr1r
        c[C_PR_IM * W + m] = pr1i
        c[C_IS_RE * W + m] = is1r
        c[C_IS_IM * W + m] = is1i
        c[C_IR_RE * W + m] = ir1r
        c[C_IR_IM * W + m] = ir1i
