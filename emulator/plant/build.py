"""Build the plant's flat state arrays from its typed parameters (once, at start)."""

from __future__ import annotations

import math

import numpy as np

from . import layout as L  # noqa: N812 (the layout reads as a namespace)
from .columns import column_buffer
from .drivetrain import RAIL_CONDITIONS
from .inverter import ripple_inductance
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
    plant.cols = column_buffer(n_m, n_i)  # the machines within a frame (the kernel's)
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
        for j, diameter in enumerate(conv.wheel_diameters_m):
            f_rs, f_rr, f_lm = conv.machine_factors[j] if conv.machine_factors else (1.0,) * 3
            row = plant.mpar[m]
            row[L.MP_RS20] = mp.stator_resistance_ohm * f_rs
            row[L.MP_RR20] = mp.rotor_resistance_ohm * f_rr
            row[L.MP_LLS] = mp.stator_leakage_h
            row[L.MP_LLR] = mp.rotor_leakage_h
            row[L.MP_LM] = mp.magnetising_h * f_lm
            row[L.MP_POLE_PAIRS] = mp.pole_pairs
            row[L.MP_J_ROTOR] = mp.rotor_inertia_kgm2
            row[L.MP_ALPHA_S] = mp.stator_temp_coeff_per_k
            row[L.MP_ALPHA_R] = mp.rotor_temp_coeff_per_k
            row[L.MP_T_REF] = mp.reference_temperature_k
            row[L.MP_GEAR] = dp.gear_ratio
            row[L.MP_GEAR_EFF] = dp.gear_efficiency
            row[L.MP_J_WHEELSET] = dp.wheelset_inertia_kgm2
            row[L.MP_J_GEAR] = dp.gear_inertia_kgm2
            row[L.MP_G_CORE] = 1.0 / mp.core_loss_resistance_ohm
            # the drag that takes P_fw at the synchronous speed of the rated frequency
            w_ref = 2.0 * math.pi * mp.rated_frequency_hz / mp.pole_pairs
            row[L.MP_C_FW] = mp.friction_windage_w / (w_ref * w_ref)
            row[L.MP_WHEEL_R] = 0.5 * diameter
            row[L.MP_AXLE_LOAD] = dp.axle_load_n
            row[L.MP_KALKER] = dp.kalker_coefficient_n
            (row[L.MP_KA], row[L.MP_KS], row[L.MP_MU0], row[L.MP_POL_A],
             row[L.MP_POL_B]) = polach
            row[L.MP_ADHESION_FACTOR] = 1.0
            row[L.MP_K_SHAFT] = dp.shaft_stiffness_nm_per_rad
            row[L.MP_C_SHAFT] = dp.shaft_damping_nms_per_rad
            row[L.MP_BRAKE_TAU] = params.train.brake_cylinder_time_constant_s
            plant.ms[m, L.MS_AXLE_LOAD] = dp.axle_load_n
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
            plant.ms[m, L.MS_LM] = mp.magnetising_h * f_lm
            plant.mint[m, :L.MI_LT_AXLE0] = (k, L.SHAFT_DRIVETRAIN,
                                             len(mp.saturation_current_a))
            plant.mint[m, L.MI_LT_AXLE0:] = -1
            if mp.saturation_current_a:
                plant.sat_i[m] = mp.saturation_current_a
                plant.sat_psi[m] = np.asarray(mp.saturation_flux_vs) * f_lm
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
        row[L.IP_I_TRIP] = ip.hardware_trip_a
        row[L.IP_L_RIPPLE] = ripple_inductance(plant.mpar[plant.iint[k, L.II_FIRST_MOTOR]:m])
        row[L.IP_HW_ON] = 1.0
        plant.ist[k, L.IS_T_J] = ambient
        plant.ist[k, L.IS_T_H] = ambient
        plant.iu[k, L.IU_DA:L.IU_DC + 1] = 0.5


def build_load_transfer(plant, params: TrainsetParams) -> None:
    """Load-transfer coefficients: Delta Q_i = sum_j c_ij F_j over the motored axles of a car.

    With x the distance behind the train's front end and F > 0 a force pushing the train
    forwards, the moment balances give (rigid bodies, suspension statics; e.g. Iwnicki
    (ed.), *Handbook of Railway Vehicle Dynamics*, ch. on traction, and any locomotive
    text on weight transfer):

    - in a bogie of wheelbase a whose frame passes its force F_b to the body through a
      traction link at height h_b: the front axle loses F_b h_b / a, the rear one gains it;
    - in a car whose bogies, L apart, push the body at h_b while the train resists at the
      coupler height h_c: the front bogie loses F_car (h_c - h_b) / L, shared by its axles.

    A bogie is a converter's axles within 1.05 wheelbases of each other; a car, the
    converters on one DC link. Unmotored axles and the cars' own inertia are left out.
    """
    dp = params.drivetrain
    if dp.bogie_wheelbase_m <= 0.0:
        return
    first = 0
    bogies: list[list[int]] = []  # motor indices, front to rear within each converter
    car_of_bogie: list[int] = []
    for conv in params.converters:
        n = len(conv.wheel_diameters_m)
        order = sorted(range(first, first + n), key=lambda m: conv.axle_positions_m[m - first])
        group = [order[0]]
        for m in order[1:]:
            if (conv.axle_positions_m[m - first] - conv.axle_positions_m[group[-1] - first]
                    <= 1.05 * dp.bogie_wheelbase_m):
                group.append(m)
            else:
                bogies.append(group)
                car_of_bogie.append(conv.dc_link)
                group = [m]
        bogies.append(group)
        car_of_bogie.append(conv.dc_link)
        first += n
    x = [p for conv in params.converters for p in conv.axle_positions_m]
    coef: dict[tuple[int, int], float] = {}

    def add(i: int, j: int, c: float) -> None:
        coef[i, j] = coef.get((i, j), 0.0) + c

    for bogie in bogies:
        if len(bogie) > 1:
            a = x[bogie[-1]] - x[bogie[0]]
            mid = 0.5 * (x[bogie[0]] + x[bogie[-1]])
            for i in bogie:
                side = 0.0 if x[i] == mid else (-1.0 if x[i] < mid else 1.0)
                for j in bogie:
                    add(i, j, side * dp.traction_link_height_m / a)
    for car in set(car_of_bogie):
        members = [b for b, c in zip(bogies, car_of_bogie, strict=True) if c == car]
        if len(members) < 2:
            continue
        centres = [sum(x[m] for m in b) / len(b) for b in members]
        span = max(centres) - min(centres)
        mid = 0.5 * (max(centres) + min(centres))
        axles = [m for b in members for m in b]
        lever = (dp.coupler_height_m - dp.traction_link_height_m) / span
        for b, centre in zip(members, centres, strict=True):
            side = 0.0 if centre == mid else (-1.0 if centre < mid else 1.0)
            for i in b:
                for j in axles:
                    add(i, j, side * lever / len(b))
    terms: dict[int, list[tuple[int, float]]] = {}
    for (i, j), c in sorted(coef.items()):
        if c != 0.0:
            terms.setdefault(i, []).append((j, c))
    for i, row in terms.items():
        if len(row) > L.LT_TERMS:
            raise ValueError(f"load transfer: axle {i} depends on {len(row)} axles, more "
                             f"than the {L.LT_TERMS} the plant keeps")
        for t, (j, c) in enumerate(row):
            plant.mint[i, L.MI_LT_AXLE0 + t] = j
            plant.mpar[i, L.MP_LT_COEF0 + t] = c


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
    plant.ss[L.SS_ARC] = -1.0  # no arc burning
    plant.ss[L.SS_FEEDER] = 1.0  # the feeding breaker connects the line
    plant.ss[L.SS_FEEDER_ARC] = -1.0
    plant.ls2[:, L.LS2_ARC] = -1.0
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
        row[L.KP_HW_ON_V] = lk.hardware_chopper_on_v
        row[L.KP_HW_OFF_V] = lk.hardware_chopper_off_v
        row[L.KP_HW_ENABLE] = 1.0
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
    plant.sp[L.SP_MAX_ARC] = tr.max_arcing_s or 0.5 / su.frequency_hz
    plant.sp[L.SP_I_LINE_TRIP] = tr.hardware_line_trip_a
    plant.sp[L.SP_HW_LINE_ON] = 1.0
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
    plant.tu[L.TU_BRAKE_TAU] = tp.brake_cylinder_time_constant_s
    plant.tpar[L.TP_UNMOTORED_AXLES] = max(tp.axle_count - params.motor_count, 0)
