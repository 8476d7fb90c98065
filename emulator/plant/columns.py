"""The kernel's per-motor quantities laid out motor beside motor, for the vector unit.

Within a frame the kernel keeps the machines' electrical state and coefficients, and
the contact law's inputs and results, in one flat buffer where each quantity (a
"field") is a column of ``W`` values starting at ``f * W``: ``c[f * W + m]`` is field
f of motor m (of inverter k, for the IW_ fields). A loop over the motors that touches
only this buffer is vectorised by the compiler (several motors in each instruction);
the same loop over the rows of ``ms`` and ``mx`` (one motor's quantities side by side)
is not, and neither is one over separate arrays or the rows of a 2-D array: numba marks
no array as free of aliasing, and with a stride known only at run time the compiler
would need a run-time overlap check for every pair of columns, and gives up. Hence the
compile-time stride and a limit of ``W`` motors and inverters to a plant.

``ms`` stays current throughout (the probes read it every sub-step); ``mx``'s state
(flux linkages and currents) lags within a frame: each refresh of the matrices
(machine.refresh_matrices) writes the columns too, and machine_columns.store_columns
puts the state back before the next refresh and at the frame's end.
"""

from __future__ import annotations

import numpy as np

from .jit import compiled_inline
from .params import MAX_MOTORS

W = MAX_MOTORS  #: the most motors (and inverters) a plant has; the stride of a field
# (520 * 8 bytes is not a multiple of 4096: the fields do not compete for cache sets)

# the machines: flux linkages and currents at the sub-step's start (its end, after it)
(C_PS_RE, C_PS_IM, C_PR_RE, C_PR_IM, C_IS_RE, C_IS_IM, C_IR_RE, C_IR_IM,
 # the frame's coefficients (machine.refresh_matrices)
 C_P11_RE, C_P11_IM, C_P12_RE, C_P12_IM, C_P21_RE, C_P21_IM, C_P22_RE, C_P22_IM,
 C_G1_RE, C_G1_IM, C_G2_RE, C_G2_IM, C_KI1_RE, C_KI1_IM, C_KI2_RE, C_KI2_IM,
 C_CSS, C_CSR, C_CRR, C_RS, C_RR, C_PP,
 # the sub-step's held stator voltage (set per inverter)
 C_U_RE, C_U_IM,
 # results of the sub-step: the stator current's integral (A s), the energy in at the
 # terminals, the copper losses (J), the torque at its end (N m)
 C_INT_RE, C_INT_IM, C_E_IN, C_E_CU_S, C_E_CU_R, C_T1,
 # the start-of-step state of the motors the scalar path steps or corrects
 # (drive_substep.py)
 B_PS_RE, B_PS_IM, B_PR_RE, B_PR_IM, B_IS_RE, B_IS_IM, B_IR_RE, B_IR_IM,
 # per inverter (row k): a sine source's voltage at the sub-step's end, each leg's
 # switching function and signed drop, the switching power
 IW_U1_RE, IW_U1_IM, IW_S_A, IW_S_B, IW_S_C, IW_DR_A, IW_DR_B, IW_DR_C, IW_P_SW,
 # the contact law's constants for the frame (drivetrain.polach_core's arguments; the
 # axle's friction mu0 with the rail's adhesion factor)
 K_KAPPA, K_SCALE, K_KA, K_KS, K_MU0, K_A, K_B, K_VREF,
 # its sub-step: the slip velocity, then the intermediate values and the results (the
 # creep force, N, and its slope by slip velocity, N s/m)
 K_W, K_EX, K_MU, K_DMU, K_DEPS, K_KAE, K_KSE, K_ATAN, K_F, K_DF,
 C_N) = range(74)


def column_buffer(n_motors: int, n_inverters: int) -> np.ndarray:
    """The buffer for a plant of n_motors motors on n_inverters inverters."""
    if max(n_motors, n_inverters) > W:
        raise ValueError(f"the plant steps at most {W} motors and {W} inverters; this "
                         f"trainset has {n_motors} motors and {n_inverters} inverters")
    return np.zeros(C_N * W)


@compiled_inline
def get_c(c, f, m):
    """Field f's complex value for row m (f the real part's field, f + 1 the imaginary)."""
    return complex(c[f * W + m], c[(f + 1) * W + m])


@compiled_inline
def put_c(c, f, m, z):
    """Store a complex value as two fields."""
    c[f * W + m] = z.real
    c[(f + 1) * W + m] = z.imag
