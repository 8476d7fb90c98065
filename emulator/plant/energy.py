"""Energy bookkeeping of the plant, for balance checks and reports."""

from __future__ import annotations

from dataclasses import dataclass

from . import layout as L  # noqa: N812 (the layout reads as a namespace)
from .machine import magnetic_energy


@dataclass(frozen=True)
class EnergyAccount:
    """Energies since the start of the run, J; stored energies are present values."""

    dc_link_in: float
    semiconductor_conduction: float
    semiconductor_switching: float
    motor_terminals: float
    stator_copper: float
    rotor_copper: float
    electromagnetic: float
    gear_loss: float
    slip_loss: float
    load: float
    running_resistance: float  # Davis and the curves
    friction_brake: float
    potential: float
    magnetic_stored: float
    kinetic_stored: float
    source: float = 0.0  # delivered by the catenary EMF
    source_resistance: float = 0.0
    winding_resistance: float = 0.0  # transformer secondaries and precharge resistors
    line_converter_loss: float = 0.0
    line_converter_dc: float = 0.0  # delivered by the line converters to the links
    line_inductive_stored: float = 0.0  # source and leakage inductances
    link_capacitive_stored: float = 0.0
    filter_stored: float = 0.0
    chopper: float = 0.0
    discharge: float = 0.0
    filter_resistance: float = 0.0
    torsion_damping: float = 0.0  # lost in the drivetrains' torsional damping
    torsion_stored: float = 0.0  # in the drivetrains' torsional springs
    switch_arcs: float = 0.0  # left in the inductances when an arc was cut (0 at a zero)
    iron_loss: float = 0.0  # in the motors' core-loss resistances
    friction_windage: float = 0.0  # the motors' bearings and fans


def energy_account(self) -> EnergyAccount:
    """The energy books of a plant: integrals since the start, present stored energies."""
    ms, ist, ts = self.ms, self.ist, self.ts
    magnetic = 0.0
    torsion = 0.0
    kinetic = 0.5 * self.tpar[L.TP_MASS] * (1 + self.tpar[L.TP_ROT_ALLOWANCE]) * (
        ts[L.TS_SPEED] ** 2)
    for m in range(self.n_motors):
        ps, pr = self.flux_linkages(m)
        i_s, i_r = self._currents(m)
        magnetic += magnetic_energy(ps, i_s, pr, i_r)
        if self.mint[m, L.MI_SHAFT_MODE] == L.SHAFT_DRIVETRAIN:
            # rotor and wheelset apart (in a rigid drivetrain they turn as one)
            j1 = (self.mpar[m, L.MP_J_ROTOR]
                  + self.mpar[m, L.MP_J_GEAR] / self.mpar[m, L.MP_GEAR] ** 2)
            kinetic += 0.5 * (j1 * ms[m, L.MS_OMEGA_M] ** 2
                              + self.mpar[m, L.MP_J_WHEELSET] * ms[m, L.MS_OMEGA_W] ** 2)
            torsion += 0.5 * self.mpar[m, L.MP_K_SHAFT] * ms[m, L.MS_TWIST] ** 2
        elif self.mint[m, L.MI_SHAFT_MODE] == L.SHAFT_FREE:
            kinetic += 0.5 * self.mpar[m, L.MP_J_ROTOR] * ms[m, L.MS_OMEGA_M] ** 2
    line = {}
    if self.line_side:
        n = self.sp[L.SP_RATIO]
        lst, ls2, kp = self.lst, self.ls2, self.kp
        line = dict(
            source=float(self.ss[L.SS_E_SOURCE]),
            source_resistance=float(self.ss[L.SS_E_SOURCE_R]),
            switch_arcs=float(self.ss[L.SS_E_ARC]),
            winding_resistance=float(ls2[:, L.LS2_E_R].sum()),
            line_converter_loss=float(ls2[:, L.LS2_E_LOSS].sum()),
            line_converter_dc=float(ls2[:, L.LS2_E_DC].sum()),
            line_inductive_stored=float(
                0.5 * self.sp[L.SP_L] * (ls2[:, L.LS2_I].sum() / n) ** 2
                + 0.5 * (self.lp[:, L.LP_L] * ls2[:, L.LS2_I] ** 2).sum()),
            link_capacitive_stored=float((0.5 * kp[:, L.KP_C] * lst[:, L.LS_UDC] ** 2)
                                         .sum()),
            filter_stored=float((0.5 * kp[:, L.KP_LF] * lst[:, L.LS_IF] ** 2
                                 + 0.5 * kp[:, L.KP_CF] * lst[:, L.LS_UCF] ** 2).sum()),
            chopper=float(lst[:, L.LS_E_CH].sum()),
            discharge=float(lst[:, L.LS_E_DIS].sum()),
            filter_resistance=float(lst[:, L.LS_E_RF].sum()),
        )
    return EnergyAccount(
        **line,
        dc_link_in=float(ist[:, L.IS_E_DC].sum()),
        semiconductor_conduction=float(ist[:, L.IS_E_COND].sum()),
        semiconductor_switching=float(ist[:, L.IS_E_SW].sum()),
        motor_terminals=float(ms[:, L.MS_E_TERMINAL].sum()),
        stator_copper=float(ms[:, L.MS_E_CU_S].sum()),
        rotor_copper=float(ms[:, L.MS_E_CU_R].sum()),
        electromagnetic=float(ms[:, L.MS_E_SHAFT].sum()),
        gear_loss=float(ms[:, L.MS_E_GEAR].sum()),
        slip_loss=float(ms[:, L.MS_E_SLIP].sum()),
        load=float(ms[:, L.MS_E_LOAD].sum()),
        running_resistance=float(ts[L.TS_E_RESIST]),
        friction_brake=float(ts[L.TS_E_BRAKE] + ms[:, L.MS_E_BRAKE].sum()),
        torsion_damping=float(ms[:, L.MS_E_DAMPER].sum()),
        iron_loss=float(ms[:, L.MS_E_IRON].sum()),
        friction_windage=float(ms[:, L.MS_E_FW].sum()),
        torsion_stored=float(torsion),
        potential=float(ts[L.TS_E_GRADE]),
        magnetic_stored=magnetic,
        kinetic_stored=float(kinetic),
    )
