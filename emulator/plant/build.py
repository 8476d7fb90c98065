"""Build the plant's flat state arrays from its typed parameters (once, at start)."""

from __future__ import annotations

import math

import numpy as np

from . import layout as L  # noqa: N812 (the layout reads as a namespace)
from .drivetrain import RAIL_CONDITIONS
from .params import TrainsetParams


def build_motor_side(plant, params: TrainsetParams) -> None:
    """Motor, inverter and DC-link state arrays from the parameters."""
    mp, dp, ip = params.machine, params.drivetrain, params.inverter
    n_m = params.motor_count
    n_i = len(params.converters)
    plant.n_motors, plant.n_inverters, plant.n_links = n_m, n_i, len(params.dc_links)
    plant.mpar = np.zeros((n_m, L.MP_N))
    plant.mint = np.zeros((n_m, L.MI_N), dtype=np.int64)
    plant.mu = np.zeros((n_m, L.MU_N))
    plant.ms = np.zeros((n_m, L.MS_N))
    plant.mx = np.zeros((n_m, L.MX_N), dtype=np.complex128)
    n_sat = max(1, len(mp.saturation_current_a))
    plant.sat_i = np.ones((n_m, n_sat))
    plant.sat_psi = np.ones((n_m, n_sat))
    plant.ipar = np.zeros((n_i, L.IP_N))
    plant.iint = np.zeros((n_i, L.II_N), dtype=np.int64)
    plant.iu = np.zeros((n_i, L.IU_N))
    plant.ist = np.zeros((n_i, L.IS_N))
    plant.lst = np.zeros((plant.n_links, L.LS_N))
    plant.tpar = np.zeros(L.TP_N)
    plant.tu = np.zeros(L.TU_N)
    plant.ts = np.zeros(L.TS_N)
    ambient = params.train.ambient_temperature_k
    polach = RAIL_CONDITIONS[dp.rail_condition]
    m = 0
    for k, conv in enumerate(params.converters):
        plant.iint[k] = (conv.dc_link, m, len(conv.wheel_diameters_m), L.SOURCE_INVERTER)
        for diameter in conv.wheel_diameters_m:
            row = plant.mpar[m]
            row[L.MP_RS20] = mp.stator_resistance_ohm
            row[L.MP_RR20] = mp.rotor_resistance_ohm
            row[L.MP_LLS] = mp.stator_leakage_h
            row[L.MP_LLR] = mp.rotor_leakage_h
            row[L.MP_LM] = mp.magnetising_h
            row[L.MP_POLE_PAIRS] = mp.pole_pairs
            row[L.MP_J_ROTOR] = mp.rotor_inertia_kgm2
            row[L.MP_ALPHA_S] = mp.stator_temp_coeff_per_k
            row[L.MP_ALPHA_R] = mp.rotor_temp_coeff_per_k
            row[L.MP_T_REF] = mp.reference_temperature_k
            row[L.MP_GEAR] = dp.gear_ratio
            row[L.MP_GEAR_EFF] = dp.gear_efficiency
            row[L.MP_J_WHEELSET] = dp.wheelset_inertia_kgm2
            row[L.MP_WHEEL_R] = 0.5 * diameter
            row[L.MP_AXLE_LOAD] = dp.axle_load_n
            row[L.MP_KALKER] = dp.kalker_coefficient_n
            (row[L.MP_KA], row[L.MP_KS], row[L.MP_MU0], row[L.MP_POL_A],
             row[L.MP_POL_B]) = polach
            row[L.MP_ADHESION_FACTOR] = 1.0
            row[L.MP_CREEP_VREF] = dp.creep_reference_speed_mps
            row[L.MP_COOLING] = 1.0
            if mp.thermal is not None:
                th = mp.thermal
                row[L.MP_TH_CS] = th.stator_capacity_j_per_k
                row[L.MP_TH_CR] = th.rotor_capacity_j_per_k
                row[L.MP_TH_GSR] = th.stator_rotor_conductance_w_per_k
                row[L.MP_TH_GSA] = th.stator_coolant_conductance_w_per_k
                row[L.MP_TH_GRA] = th.rotor_coolant_conductance_w_per_k
                row[L.MP_THERMAL_ON] = 1.0
                plant.ms[m, L.MS_T_STATOR] = ambient
                plant.ms[m, L.MS_T_ROTOR] = ambient
            else:
                plant.ms[m, L.MS_T_STATOR] = mp.reference_temperature_k
                plant.ms[m, L.MS_T_ROTOR] = mp.reference_temperature_k
            plant.ms[m, L.MS_LM] = mp.magnetising_h
            plant.mint[m] = (k, L.SHAFT_DRIVETRAIN, len(mp.saturation_current_a))
            if mp.saturation_current_a:
                plant.sat_i[m] = mp.saturation_current_a
                plant.sat_psi[m] = mp.saturation_flux_vs
            m += 1
        row = plant.ipar[k]
        row[L.IP_FSW] = ip.switching_frequency_hz
        row[L.IP_TDEAD] = ip.dead_time_s
        row[L.IP_VCE0] = ip.igbt_threshold_v
        row[L.IP_RCE] = ip.igbt_slope_ohm
        row[L.IP_VF0] = ip.diode_threshold_v
        row[L.IP_RF] = ip.diode_slope_ohm
        row[L.IP_ESW] = ip.switching_energy_j
        row[L.IP_ESW_VREF] = ip.switching_energy_ref_v
        row[L.IP_ESW_IREF] = ip.switching_energy_ref_a
        row[L.IP_IBAND] = ip.sign_band_a
        row[L.IP_TH_CJ] = ip.junction_capacity_j_per_k
        row[L.IP_TH_CH] = ip.heatsink_capacity_j_per_k
        row[L.IP_TH_GJH] = ip.junction_heatsink_w_per_k
        row[L.IP_TH_GHA] = ip.heatsink_coolant_w_per_k
        row[L.IP_THERMAL_ON] = 1.0 if ip.thermal else 0.0
        plant.ist[k, L.IS_T_J] = ambient
        plant.ist[k, L.IS_T_H] = ambient
        plant.iu[k, L.IU_DA:L.IU_DC + 1] = 0.5


def build_line_side(plant, params: TrainsetParams, ideal: bool) -> None:
    """Supply, line converters and DC links; ideal=True holds the links at nominal."""
    n_link = len(params.dc_links)
    units = params.line_converters
    n_lc = len(units)
    plant.n_line_converters = n_lc
    plant.sp = np.zeros(L.SP_N)
    plant.harmonics = np.zeros((L.N_HARMONICS, 3))
    plant.ss = np.zeros(L.SS_N)
    plant.lp = np.zeros((n_lc, L.LP_N))
    plant.li = np.zeros((n_lc, L.LI_N), dtype=np.int64)
    plant.lu = np.zeros((n_lc, L.LU_N))
    plant.ls2 = np.zeros((n_lc, L.LS2_N))
    plant.kp = np.zeros((n_link, L.KP_N))
    plant.ku = np.zeros((n_link, L.KU_N))
    plant.i_link = np.zeros((n_link, 2))
    plant._pq_ring = np.zeros((1, L.SS_PQ_IS - L.SS_PQ_T + 1))
    plant._pq_sum = np.zeros(L.SS_PQ_IS - L.SS_PQ_T + 1)
    ambient = params.train.ambient_temperature_k
    su = params.supply
    for i, (order, fraction, phase) in enumerate(su.harmonics[:L.N_HARMONICS]):
        plant.harmonics[i] = (order, fraction, phase)
    for link, lk in enumerate(params.dc_links):
        row = plant.kp[link]
        row[L.KP_C] = lk.capacitance_f
        row[L.KP_R_DIS] = lk.discharge_ohm
        row[L.KP_LF] = lk.filter_inductance_h
        row[L.KP_CF] = lk.filter_capacitance_f
        row[L.KP_RF] = lk.filter_resistance_ohm
        row[L.KP_R_CH] = lk.chopper_ohm
        row[L.KP_U_OVP] = lk.overvoltage_v
        row[L.KP_U_IDEAL] = lk.voltage_v
        row[L.KP_TH_C] = lk.resistor_capacity_j_per_k
        row[L.KP_TH_G] = lk.resistor_conductance_w_per_k
        row[L.KP_IDEAL] = 1.0 if ideal else 0.0
        plant.lst[link, L.LS_UDC] = lk.voltage_v if ideal else 0.0
        plant.lst[link, L.LS_T_RES] = ambient
    if ideal:
        return
    tr, lc = params.transformer, params.line_converter
    assert tr is not None and lc is not None
    plant.sp[L.SP_ACTIVE] = 1.0
    plant.sp[L.SP_RATIO] = tr.primary_voltage_v / tr.secondary_voltage_v
    plant.sp[L.SP_AMPLITUDE] = su.nominal_voltage_v * math.sqrt(2.0)
    plant.sp[L.SP_FREQUENCY] = su.frequency_hz
    plant.sp[L.SP_R] = su.source_resistance_ohm
    plant.sp[L.SP_L] = su.source_inductance_h
    plant.sp[L.SP_LIVE] = 1.0
    plant.sp[L.SP_DROOP] = su.reverse_power_droop_v_per_w
    plant.sp[L.SP_BREAKER_DELAY] = tr.breaker_delay_s
    plant.ss[L.SS_BREAKER_TIMER] = tr.breaker_delay_s
    for k, unit in enumerate(units):
        row = plant.lp[k]
        row[L.LP_L] = tr.leakage_h
        row[L.LP_R] = tr.resistance_ohm
        row[L.LP_R_PRE] = lc.precharge_ohm
        row[L.LP_V0] = lc.device_threshold_v
        row[L.LP_RD] = lc.device_slope_ohm
        row[L.LP_FSW] = lc.switching_frequency_hz
        row[L.LP_ESW] = lc.switching_energy_j
        row[L.LP_ESW_VREF] = lc.switching_energy_ref_v
        row[L.LP_ESW_IREF] = lc.switching_energy_ref_a
        row[L.LP_PRE_DELAY] = lc.precharge_delay_s
        row[L.LP_LINE_DELAY] = lc.line_contactor_delay_s
        plant.li[k, L.LI_LINK] = unit.dc_link
        plant.ls2[k, L.LS2_PRE_TIMER] = lc.precharge_delay_s
        plant.ls2[k, L.LS2_LINE_TIMER] = lc.line_contactor_delay_s
    # power-quality window: a whole number of line periods, at least 100 ms
    periods = max(1, math.ceil(0.1 * su.frequency_hz))
    frames = max(1, round(periods / su.frequency_hz / params.frame_s))
    plant._pq_ring = np.zeros((frames, L.SS_PQ_IS - L.SS_PQ_T + 1))
    plant._pq_sum = np.zeros(L.SS_PQ_IS - L.SS_PQ_T + 1)


def build_train(plant, params: TrainsetParams) -> None:
    """The train's parameter vector."""
    tp = params.train
    plant.tpar[L.TP_MASS] = tp.mass_kg
    plant.tpar[L.TP_ROT_ALLOWANCE] = tp.rotating_mass_allowance
    plant.tpar[L.TP_DAVIS_A] = tp.davis_a_n
    plant.tpar[L.TP_DAVIS_B] = tp.davis_b_n_per_mps
    plant.tpar[L.TP_DAVIS_C] = tp.davis_c_n_per_mps2
    plant.tpar[L.TP_GRAVITY] = 9.80665
    plant.tpar[L.TP_AMBIENT] = params.train.ambient_temperature_k
