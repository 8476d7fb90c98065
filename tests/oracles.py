"""Reference formulas written independently of the emulator, each with its source.

These are the oracles the tests compare the plant against; they must not import the
plant's own physics.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class EquivalentCircuit:
    """Per-phase T-equivalent circuit at a supply frequency (reactances in ohm)."""

    r_s: float
    x_ls: float
    x_m: float
    x_lr: float
    r_r: float
    v_phase_rms: float
    f_hz: float
    poles: int

    @property
    def omega_sync_mech(self) -> float:
        """Synchronous mechanical speed, rad/s: 2 pi f / (P/2)."""
        return 2 * math.pi * self.f_hz / (self.poles / 2)

    def thevenin(self) -> tuple[complex, complex]:
        """V_th = V jX_M/(r_s + j(X_ls+X_M)), Z_th = (r_s + jX_ls) jX_M/(r_s + j(X_ls+X_M)).

        Fitzgerald, Kingsley & Umans, Electric Machinery, 6th ed., ch. 6 (from memory).
        """
        den = complex(self.r_s, self.x_ls + self.x_m)
        v_th = self.v_phase_rms * 1j * self.x_m / den
        z_th = complex(self.r_s, self.x_ls) * 1j * self.x_m / den
        return v_th, z_th

    def torque(self, slip: float) -> float:
        """T(s) = 3/w_sm |V_th|^2 (r_r/s) / ((R_th + r_r/s)^2 + (X_th + X_lr)^2), N m."""
        v_th, z_th = self.thevenin()
        rr_s = self.r_r / slip
        return (3 / self.omega_sync_mech * abs(v_th) ** 2 * rr_s
                / ((z_th.real + rr_s) ** 2 + (z_th.imag + self.x_lr) ** 2))

    def stator_current_rms(self, slip: float) -> float:
        """|V / (r_s + jX_ls + jX_M || (r_r/s + jX_lr))|, A rms."""
        z_rotor = complex(self.r_r / slip, self.x_lr)
        z = complex(self.r_s, self.x_ls) + 1j * self.x_m * z_rotor / (1j * self.x_m + z_rotor)
        return abs(self.v_phase_rms / z)

    def breakdown(self) -> tuple[float, float]:
        """s_k = r_r / sqrt(R_th^2 + (X_th + X_lr)^2) and T_k = T(s_k)."""
        _, z_th = self.thevenin()
        s_k = self.r_r / math.hypot(z_th.real, z_th.imag + self.x_lr)
        return s_k, self.torque(s_k)

    def kloss(self, slip: float) -> float:
        """Extended Kloss form T/T_k = 2(1 + a s_k)/(s/s_k + s_k/s + 2 a s_k), a = R_th/r_r."""
        s_k, _ = self.breakdown()
        a = self.thevenin()[1].real / self.r_r
        return 2 * (1 + a * s_k) / (slip / s_k + s_k / slip + 2 * a * s_k)


def efficiency_with_core_loss(c: EquivalentCircuit, slip: float, r_c: float,
                              friction_windage_w: float, *,
                              at_terminals: bool = False) -> dict[str, float]:
    """The T-circuit with a core-loss resistance R_c across the magnetising branch
    (Fitzgerald, Kingsley & Umans, *Electric Machinery*, ch. 6: the exact equivalent
    circuit), or with at_terminals across the supply terminals (the same text's
    approximate circuit, which moves the shunt branch to the terminals; here only R_c
    moves), at a slip: input power, stator current (rms), air-gap EMF (rms), iron loss
    (3 |E|^2 / R_c, or 3 V^2 / R_c at the terminals), air-gap power 3 |I_r|^2 r_r / s,
    mechanical power (1 - s) P_ag, output less friction and windage, and the efficiency
    P_out / P_in (per-phase rms quantities, three phases)."""
    v = c.v_phase_rms
    z_rotor = complex(c.r_r / slip, c.x_lr)
    y_gap = 1 / (1j * c.x_m) + (0.0 if at_terminals else 1 / r_c) + 1 / z_rotor
    z = complex(c.r_s, c.x_ls) + 1 / y_gap
    i_s = v / z
    e = v - i_s * complex(c.r_s, c.x_ls)
    i_r = e / z_rotor
    p_iron = 3 * (v if at_terminals else abs(e)) ** 2 / r_c
    if at_terminals:
        i_s += v / r_c
    p_in = 3 * (v * i_s.conjugate()).real
    p_gap = 3 * abs(i_r) ** 2 * c.r_r / slip
    p_out = (1 - slip) * p_gap - friction_windage_w
    return {"p_in": p_in, "i_s": abs(i_s), "e": abs(e), "p_iron": p_iron, "p_gap": p_gap,
            "p_out": p_out, "efficiency": p_out / p_in}


def saturated_circuit(machine, slip: float, r_r_factor: float = 1.0) -> EquivalentCircuit:
    """A machine profile's circuit at its rated voltage and frequency, the magnetising
    reactance taken from its magnetising curve at the circuit's own air-gap flux: the
    curve gives the main flux (space-vector peak) psi = sqrt 2 |E| / w at a current i_m,
    and x_m = w psi / i_m (secant, as the curve is given), iterated with the circuit
    (core loss left out of E: the caller's R_c sits at the terminals)."""
    w = 2 * math.pi * machine.rated_frequency_hz
    table_i = list(machine.saturation_current_a)
    table_psi = list(machine.saturation_flux_vs)
    x_m = w * machine.magnetising_h
    for _ in range(50):
        circuit = EquivalentCircuit(
            r_s=machine.stator_resistance_ohm, x_ls=w * machine.stator_leakage_h, x_m=x_m,
            x_lr=w * machine.rotor_leakage_h, r_r=machine.rotor_resistance_ohm * r_r_factor,
            v_phase_rms=machine.rated_voltage_v / math.sqrt(3), f_hz=w / (2 * math.pi),
            poles=2 * machine.pole_pairs)
        psi = math.sqrt(2) * efficiency_with_core_loss(circuit, slip, math.inf, 0.0)["e"] / w
        if not table_psi[0] < psi < table_psi[-1]:
            raise ValueError("the flux lies outside the magnetising curve")
        k = next(k for k in range(1, len(table_psi)) if table_psi[k] >= psi)
        i_m = table_i[k - 1] + (psi - table_psi[k - 1]) * (table_i[k] - table_i[k - 1]) / (
            table_psi[k] - table_psi[k - 1])
        x_m = w * psi / i_m
    return circuit


#: Krause, Wasynczuk & Sudhoff, Analysis of Electric Machinery and Drive Systems, 2nd ed.
#: (2002), induction-machine table: V_LL, r_s, X_ls, X_M, X'_lr, r'_r, J (ohm at 60 Hz).
KRAUSE_MACHINES = {
    "textbook-3hp": (220, 0.435, 0.754, 26.13, 0.754, 0.816, 0.089),
    "textbook-50hp": (460, 0.087, 0.302, 13.08, 0.302, 0.228, 1.662),
    "textbook-500hp": (2300, 0.262, 1.206, 54.02, 1.206, 0.187, 11.06),
    "textbook-2250hp": (2300, 0.029, 0.226, 13.04, 0.226, 0.022, 63.87),
}


def krause_circuit(name: str) -> EquivalentCircuit:
    """The published machine as an equivalent circuit at 60 Hz, 4 poles, rated voltage."""
    v_ll, r_s, x_ls, x_m, x_lr, r_r, _ = KRAUSE_MACHINES[name]
    return EquivalentCircuit(r_s, x_ls, x_m, x_lr, r_r, v_ll / math.sqrt(3), 60.0, 4)


def induction_machine_rhs(ls: float, lr: float, lm: float, rs: float, rr: float, p: int,
                          j: float, voltage, load_torque: float = 0.0):
    """Right-hand side of the space-vector machine model with a free shaft, for solve_ivp.

    State [psi_sa, psi_sb, psi_ra, psi_rb, omega_m]; u_s = R_s i_s + dpsi_s/dt,
    0 = R_r i_r + dpsi_r/dt - j p omega_m psi_r, J domega/dt = T - T_L,
    T = 3/2 p (psi_sa i_sb - psi_sb i_sa) (Novotny & Lipo 1996, from memory).
    voltage(t) returns the complex stator voltage.
    """
    d = ls * lr - lm * lm

    def rhs(t: float, y: np.ndarray) -> list[float]:
        ps = complex(y[0], y[1])
        pr = complex(y[2], y[3])
        i_s = (lr * ps - lm * pr) / d
        i_r = (ls * pr - lm * ps) / d
        dps = voltage(t) - rs * i_s
        dpr = -rr * i_r + 1j * p * y[4] * pr
        torque = 1.5 * p * (ps.real * i_s.imag - ps.imag * i_s.real)
        return [dps.real, dps.imag, dpr.real, dpr.imag, (torque - load_torque) / j]

    return rhs


def single_phased_machine_rhs(ls: float, lr: float, lm: float, rs: float, rr: float,
                              p: int, omega_m: float, u_beta):
    """Induction machine with stator phase a open, shaft at a held speed.

    With phase a open in a star winding with no neutral, i_sa = i_s_alpha = 0 and only
    the beta axis (phases b and c in series) takes the supply u_beta(t). Flux linkages in
    the stator frame: psi_s_alpha = Lm i_r_alpha, psi_r_alpha = Lr i_r_alpha, and on the
    beta axis [psi_s; psi_r] = [[Ls, Lm], [Lm, Lr]] [i_s; i_r]. Voltage equations
    d psi_s_beta/dt = u_beta - Rs i_s_beta, d psi_r/dt = -Rr i_r + j p omega_m psi_r
    (Krause, Analysis of Electric Machinery, stationary reference frame; the open-phase
    constraint from the circuit). State [psi_s_beta, psi_r_alpha, psi_r_beta]; returns
    (rhs, currents) where currents(y) gives (i_s_beta, torque)."""
    d = ls * lr - lm * lm
    w_r = p * omega_m

    def currents(y):
        psb, pra, prb = y
        i_sb = (lr * psb - lm * prb) / d
        i_ra = pra / lr
        # T = 3/2 p (psi_s_alpha i_s_beta - psi_s_beta i_s_alpha), i_s_alpha = 0
        return i_sb, 1.5 * p * lm * i_ra * i_sb

    def rhs(t: float, y: np.ndarray) -> list[float]:
        psb, pra, prb = y
        i_sb = (lr * psb - lm * prb) / d
        i_rb = (ls * prb - lm * psb) / d
        i_ra = pra / lr
        return [u_beta(t) - rs * i_sb, -rr * i_ra - w_r * prb, -rr * i_rb + w_r * pra]

    return rhs, currents


def polach_creep_force(w: float, v: float, q: float, kalker: float, k_a: float, k_s: float,
                       mu0: float, a: float, b: float, v_ref: float = 0.0) -> float:
    """Polach's creep force on an axle, N (Polach, Wear 258 (2005) 992-1000, as
    REFERENCES.md gives it):

        F = 2 Q mu / pi (k_A e / (1 + (k_A e)^2) + arctan(k_S e)),
        e = (2/3) C pi a^2 b / (Q mu) s,   mu = mu0 ((1 - A) e^(-B w) + A),

    w the slip velocity, s = w / sqrt(v^2 + v_ref^2) the creep (v_ref: a creep reference
    speed near standstill). Kalker's linear coefficient K of the axle stands for the
    contact's (2/3) C pi a^2 b through the formula's own small-creep slope,
    dF/ds = (k_A + k_S) / 2 K (REFERENCES.md [derived]), so (2/3) C pi a^2 b = pi K / 4.
    Odd in w."""
    mu = mu0 * ((1 - a) * math.exp(-b * abs(w)) + a)
    eps = math.pi * kalker / 4 / (q * mu) * w / math.hypot(v, v_ref)
    return 2 * q * mu / math.pi * (k_a * eps / (1 + (k_a * eps) ** 2) + math.atan(k_s * eps))
