"""Column layout of the plant's flat state arrays.

The whole trainset lives in a few 2-D numpy arrays, one row per motor, inverter or DC
link, one column per quantity. The compiled kernel indexes them with the integer
constants below (numba folds module-level ints into constants); the Python side reads
them by name through :data:`READABLE`, which also carries each quantity's SI unit.

Motors are stored grouped by inverter: the motors of inverter ``k`` are the rows
``INV_FIRST_MOTOR .. INV_FIRST_MOTOR + INV_MOTOR_COUNT - 1``. In drivetrain mode each
motor drives its own axle through its own gear, so axle data sit in the motor's row.
"""

from __future__ import annotations

# --- motor parameters: float64 [n_motor, MP_N] ---------------------------------------
MP_RS20 = 0  # stator resistance at reference temperature, ohm
MP_RR20 = 1  # rotor resistance referred to stator at reference temperature, ohm
MP_LLS = 2  # stator leakage inductance, H
MP_LLR = 3  # rotor leakage inductance referred to stator, H
MP_LM = 4  # unsaturated magnetising inductance, H
MP_POLE_PAIRS = 5  # pole pairs, 1
MP_J_ROTOR = 6  # rotor inertia, kg m^2
MP_ALPHA_S = 7  # stator resistance temperature coefficient, 1/K
MP_ALPHA_R = 8  # rotor resistance temperature coefficient, 1/K
MP_T_REF = 9  # temperature at which RS20/RR20 hold, K
MP_GEAR = 10  # gear ratio motor speed / wheel speed, 1
MP_GEAR_EFF = 11  # gear efficiency, 1
MP_J_WHEELSET = 12  # wheelset inertia (without the gear wheel when MP_J_GEAR is given), kg m^2
MP_WHEEL_R = 13  # wheel rolling radius, m
MP_AXLE_LOAD = 14  # axle load (normal force of both wheels), N
MP_KALKER = 15  # Kalker linear creep coefficient G*a*b*c11 of the axle (two wheels), N
MP_KA = 16  # Polach reduction factor in the adhesion area, 1
MP_KS = 17  # Polach reduction factor in the slip area, 1
MP_MU0 = 18  # Polach maximum friction coefficient at zero slip velocity, 1
MP_POL_A = 19  # Polach ratio of limit friction at infinite slip velocity to MU0, 1
MP_POL_B = 20  # Polach exponential friction decay, s/m
MP_ADHESION_FACTOR = 21  # scenario scaling of MU0 per axle, 1
MP_CREEP_VREF = 22  # creep denominator regularisation speed, m/s
MP_TH_CS = 23  # stator heat capacity, J/K
MP_TH_CR = 24  # rotor heat capacity, J/K
MP_TH_GSR = 25  # stator-rotor thermal conductance, W/K
MP_TH_GSA = 26  # stator-coolant thermal conductance, W/K
MP_TH_GRA = 27  # rotor-coolant thermal conductance, W/K
MP_COOLING = 28  # cooling effectiveness (1 normal, 0 lost), scales GSA and GRA
MP_THERMAL_ON = 29  # 1 thermal model active, 0 temperatures held
# derived from the columns above and the axle load in use (Plant.derive_drivetrain, then
# the kernel each frame):
MP_POL_KAPPA = 30  # pi/4 K / Q, creep-to-epsilon factor of Polach's model, 1
MP_POL_SCALE = 31  # 2 Q / pi, N (both follow the axle load in use, MS_AXLE_LOAD)
# two-mass drivetrain, brake cylinder and load transfer (shaft.py):
MP_K_SHAFT = 32  # torsional stiffness between the gear and the wheelset (the drive's
# coupling), referred to the motor shaft, N m/rad (0: a rigid drivetrain, one inertia)
MP_C_SHAFT = 33  # torsional damping of the coupling, referred to the motor shaft, N m s/rad
MP_BRAKE_TAU = 34  # brake-cylinder time constant (first-order lag of the brake force), s
MP_J_GEAR = 35  # gear wheel (and hollow shaft) inertia at the wheelset's speed, on the
# rotor's side of the torsional spring, kg m^2
MP_G_CORE = 36  # core-loss conductance 1 / R_c across the terminals, S (0: no iron loss)
MP_C_FW = 37  # friction and windage: a drag c w on the rotor, N m s/rad (P = c w^2)
MP_LT_COEF0 = 38  # load transfer: axle load change per newton of creep force of the axles
# named by MI_LT_AXLE0.. (Delta Q = sum_j coef_j F_j), 1; LT_TERMS columns from here
LT_TERMS = 6  # load-transfer terms per axle (the motored axles of its car)
MP_N = MP_LT_COEF0 + LT_TERMS

# --- motor integer data: int64 [n_motor, MI_N] ----------------------------------------
MI_INVERTER = 0  # index of the feeding inverter
MI_SHAFT_MODE = 1  # SHAFT_DRIVETRAIN, SHAFT_IMPOSED_SPEED or SHAFT_FREE
MI_SAT_POINTS = 2  # points in the saturation table (0: linear magnetics)
MI_LT_AXLE0 = 3  # load transfer: the motored axles whose creep forces move this axle's
# load (-1: unused term), LT_TERMS columns from here; coefficients in MP_LT_COEF0..
MI_N = MI_LT_AXLE0 + LT_TERMS

SHAFT_DRIVETRAIN = 0
SHAFT_IMPOSED_SPEED = 1
SHAFT_FREE = 2

# --- motor inputs: float64 [n_motor, MU_N] --------------------------------------------
MU_LOAD_TORQUE = 0  # load torque on a free shaft, N m (opposes positive speed)
MU_IMPOSED_SPEED = 1  # dynamometer shaft speed, rad/s (mechanical)
MU_OPEN_PHASE = 2  # open stator phase: 0 none, 1 a, 2 b, 3 c (a broken cable or lug)
MU_BRAKE_DEMAND = 3  # friction brake force demanded of this axle at the rail, N (>= 0)
MU_N = 4

# --- motor state and outputs: float64 [n_motor, MS_N] ---------------------------------
MS_OMEGA_M = 0  # rotor mechanical speed, rad/s
MS_THETA_M = 1  # rotor mechanical angle, rad (unwrapped)
MS_T_STATOR = 2  # stator winding temperature, K
MS_T_ROTOR = 3  # rotor cage temperature, K
MS_OMEGA_REF = 4  # speed at which the machine matrices were frozen, rad/s
MS_ACCEL = 5  # shaft acceleration over the last refresh interval, rad/s^2
MS_TORQUE = 6  # electromagnetic torque, N m
MS_CREEP_VEL = 7  # slip velocity omega_w*r - v, m/s
MS_CREEP_FORCE = 8  # longitudinal creep force of the axle, N
MS_LM = 9  # magnetising inductance in use, H
MS_E_TERMINAL = 10  # electrical energy into the terminals, J
MS_E_CU_S = 11  # stator copper loss energy, J
MS_E_CU_R = 12  # rotor copper loss energy, J
MS_E_SHAFT = 13  # electromagnetic torque x shaft speed energy, J
MS_E_GEAR = 14  # gear loss energy, J
MS_E_SLIP = 15  # wheel-rail slip loss energy F*w, J
MS_E_LOAD = 16  # energy into the load / dynamometer, J
MS_Q_STATOR = 17  # stator loss energy not yet given to the thermal model, J
MS_Q_ROTOR = 18  # rotor loss energy not yet given to the thermal model, J
MS_OMEGA_AT_REFRESH = 19  # speed at the last refresh, rad/s
MS_ADHESION_UTIL = 20  # creep force / (mu0 * axle load), 1
MS_RS = 21  # stator resistance in use (at the last refresh), ohm
MS_RR = 22  # rotor resistance in use, ohm
MS_CSS = 23  # current coefficients at the last refresh: i_s = CSS psi_s - CSR psi_r,
MS_CSR = 24  # i_r = CRR psi_r - CSR psi_s, i.e. L_r/D, L_m/D and L_s/D, 1/H
MS_CRR = 25
MS_OMEGA_W = 26  # wheelset speed, rad/s
MS_TWIST = 27  # twist of the torsional spring at the motor shaft, rad
MS_SHAFT_TORQUE = 28  # torque in the drive's coupling, referred to the motor shaft, N m
MS_E_DAMPER = 29  # energy lost in the torsional damping, J
MS_BRAKE_FORCE = 30  # friction brake force applied at the rail (after the cylinder lag), N
MS_E_BRAKE = 31  # friction brake energy of the axle, J
MS_AXLE_LOAD = 32  # axle load in use (static plus load transfer), N
MS_E_IRON = 33  # iron loss energy (the core-loss resistance), J
MS_E_FW = 34  # friction and windage energy, J
MS_N = 35

# --- motor complex data: complex128 [n_motor, MX_N] -----------------------------------
MX_PSI_S = 0  # stator flux linkage space vector (stationary frame), V s
MX_PSI_R = 1  # rotor flux linkage space vector referred to stator, V s
MX_PHI11 = 2  # zero-order-hold transition matrix entries
MX_PHI12 = 3
MX_PHI21 = 4
MX_PHI22 = 5
MX_G1 = 6  # zero-order-hold input vector (stator voltage -> flux)
MX_G2 = 7
MX_KI1 = 8  # stator-current integral over a step: KI1 (dpsi_s - u h) + KI2 dpsi_r
MX_KI2 = 9
MX_IS = 10  # stator current at the end of the last sub-step (start of the next), A
MX_IR = 11  # rotor current at the end of the last sub-step, A
MX_CG = 12  # d(stator current at end of sub-step) / d(voltage)
MX_P1 = 13  # particular solution for a sinusoidal source, per volt of amplitude
MX_P2 = 14
MX_N = 15

# --- inverter parameters: float64 [n_inv, IP_N] ---------------------------------------
IP_FSW = 0  # switching frequency, Hz
IP_TDEAD = 1  # dead time, s
IP_VCE0 = 2  # IGBT threshold voltage, V
IP_RCE = 3  # IGBT slope resistance, ohm
IP_VF0 = 4  # diode threshold voltage, V
IP_RF = 5  # diode slope resistance, ohm
IP_ESW = 6  # switching energy per pulse (on + off + recovery) at the reference point, J
IP_ESW_VREF = 7  # reference voltage of IP_ESW, V
IP_ESW_IREF = 8  # reference current of IP_ESW, A
IP_IBAND = 9  # current band over which the dead-time and drop signs change, A
IP_TH_CJ = 10  # junction (module) heat capacity, J/K
IP_TH_CH = 11  # heatsink heat capacity, J/K
IP_TH_GJH = 12  # junction-heatsink conductance, W/K
IP_TH_GHA = 13  # heatsink-coolant conductance, W/K
IP_THERMAL_ON = 14
IP_I_TRIP = 15  # hardware overcurrent / desaturation trip of the gate drivers, A (peak of a
# phase current; inf: not fitted)
IP_HW_ON = 16  # 1 the hardware trip acts, 0 it fails to act (a fault)
IP_L_RIPPLE = 17  # the inductance the PWM ripple sees: the motors' transient inductances
# sigma L_s = L_ls + L_m L_lr / (L_m + L_lr) in parallel, H
IP_N = 18

# --- inverter integer data: int64 [n_inv, II_N] ---------------------------------------
II_LINK = 0  # DC link index
II_FIRST_MOTOR = 1
II_MOTOR_COUNT = 2
II_SOURCE = 3  # SOURCE_INVERTER or SOURCE_SINE
II_N = 4

SOURCE_INVERTER = 0
SOURCE_SINE = 1

# --- inverter commands: float64 [n_inv, IU_N] ------------------------------------------
IU_DA = 0  # duty cycle of leg a, 0..1
IU_DB = 1
IU_DC = 2
IU_ENABLE = 3  # 1 gates released, 0 gates blocked
IU_SINE_AMP = 4  # ideal source: space-vector amplitude (phase peak), V
IU_SINE_FREQ = 5  # ideal source frequency, Hz
IU_SINE_PHASE = 6  # ideal source phase at t = 0, rad
IU_N = 7

# --- inverter state: float64 [n_inv, IS_N] ----------------------------------------------
IS_IA = 0  # phase currents (sum of its motors), A
IS_IB = 1
IS_IC = 2
IS_IDC = 3  # DC-link current drawn, mean over the last frame, A
IS_T_J = 4  # junction temperature, K
IS_T_H = 5  # heatsink temperature, K
IS_U_ALPHA = 6  # applied stator voltage space vector, V
IS_U_BETA = 7
IS_E_DC = 8  # energy drawn from the DC link, J
IS_E_COND = 9  # conduction loss energy, J
IS_E_SW = 10  # switching loss energy, J
IS_Q = 11  # loss energy not yet given to the thermal model, J
IS_HW_TRIP = 12  # 1 the gate drivers' hardware trip has latched (gates blocked) until reset
IS_N = 13

# --- DC link state: float64 [n_link, LS_N] ------------------------------------------------
LS_UDC = 0  # DC-link voltage, V
LS_IDC = 1  # current drawn by the inverters, mean over the last frame, A
LS_N = 13  # see the DC-link columns below

# --- train: float64 vectors ---------------------------------------------------------------
TP_MASS = 0  # train mass, kg
TP_ROT_ALLOWANCE = 1  # unmodelled rotating mass as a fraction of the mass, 1
TP_DAVIS_A = 2  # running resistance constant term, N
TP_DAVIS_B = 3  # linear term, N/(m/s)
TP_DAVIS_C = 4  # quadratic term, N/(m/s)^2
TP_GRAVITY = 5  # m/s^2
TP_AMBIENT = 6  # coolant / ambient temperature, K
TP_UNMOTORED_AXLES = 7  # axles without a motor (their brakes act on the train), 1
TP_N = 8

TU_GRADIENT = 0  # track gradient, rise over run (positive uphill), 1
TU_BRAKE_FORCE = 1  # friction brake force demanded, N (>= 0)
TU_CURVE_RESISTANCE = 2  # curve resistance, N (>= 0): against the motion, static at rest
TU_BRAKE_TAU = 3  # brake-cylinder time constant of the unmotored axles' brakes, s
TU_N = 4

TS_SPEED = 0  # train speed, m/s
TS_POSITION = 1  # position along the track, m
TS_ACCEL = 2  # acceleration over the last sub-step, m/s^2
TS_TRACTIVE_FORCE = 3  # sum of creep forces, N
TS_E_RESIST = 4  # running resistance energy, J
TS_E_GRADE = 5  # potential energy gained on the gradient, J
TS_E_BRAKE = 6  # friction brake energy of the unmotored axles, J
TS_BRAKE_FORCE = 7  # friction brake force of the unmotored axles (after the lag), N
TS_N = 8

#: name -> (array, column, SI unit, description) for reading states by name.
READABLE: dict[str, tuple[str, int, str, str]] = {
    "motor.speed_rad_s": ("motor_state", MS_OMEGA_M, "rad/s", "rotor mechanical speed"),
    "motor.angle_rad": ("motor_state", MS_THETA_M, "rad", "rotor mechanical angle"),
    "motor.stator_temperature_k": ("motor_state", MS_T_STATOR, "K", "stator winding"),
    "motor.rotor_temperature_k": ("motor_state", MS_T_ROTOR, "K", "rotor cage"),
    "motor.torque_nm": ("motor_state", MS_TORQUE, "N m", "electromagnetic torque"),
    "motor.creep_velocity_mps": ("motor_state", MS_CREEP_VEL, "m/s", "wheel slip velocity"),
    "motor.creep_force_n": ("motor_state", MS_CREEP_FORCE, "N", "axle creep force"),
    "motor.adhesion_utilisation": ("motor_state", MS_ADHESION_UTIL, "1", "F/(mu0 Q)"),
    "motor.magnetising_inductance_h": ("motor_state", MS_LM, "H", "L_m in use"),
    "motor.shaft_torque_nm": ("motor_state", MS_SHAFT_TORQUE, "N m", "rotor to gear"),
    "motor.shaft_twist_rad": ("motor_state", MS_TWIST, "rad", "torsional spring"),
    "motor.wheelset_speed_rad_s": ("motor_state", MS_OMEGA_W, "rad/s", "wheelset speed"),
    "motor.brake_force_n": ("motor_state", MS_BRAKE_FORCE, "N", "friction brake at rail"),
    "motor.axle_load_n": ("motor_state", MS_AXLE_LOAD, "N", "with load transfer"),
    "inverter.phase_current_a_a": ("inverter_state", IS_IA, "A", "phase a current"),
    "inverter.phase_current_b_a": ("inverter_state", IS_IB, "A", "phase b current"),
    "inverter.phase_current_c_a": ("inverter_state", IS_IC, "A", "phase c current"),
    "inverter.dc_current_a": ("inverter_state", IS_IDC, "A", "DC current, frame mean"),
    "inverter.dc_energy_j": ("inverter_state", IS_E_DC, "J", "energy drawn from the link"),
    "inverter.junction_temperature_k": ("inverter_state", IS_T_J, "K", "IGBT module"),
    "inverter.heatsink_temperature_k": ("inverter_state", IS_T_H, "K", "heatsink"),
    "inverter.voltage_alpha_v": ("inverter_state", IS_U_ALPHA, "V", "applied u_alpha"),
    "inverter.voltage_beta_v": ("inverter_state", IS_U_BETA, "V", "applied u_beta"),
    "inverter.hardware_trip": ("inverter_state", IS_HW_TRIP, "1", "gate drivers latched off"),
    "dc_link.voltage_v": ("link_state", LS_UDC, "V", "DC-link voltage"),
    "dc_link.current_a": ("link_state", LS_IDC, "A", "inverter current, frame mean"),
    "train.speed_mps": ("train_state", TS_SPEED, "m/s", "train speed"),
    "train.position_m": ("train_state", TS_POSITION, "m", "position"),
    "train.acceleration_mps2": ("train_state", TS_ACCEL, "m/s^2", "acceleration"),
    "train.tractive_force_n": ("train_state", TS_TRACTIVE_FORCE, "N", "sum of creep forces"),
}

# --- supply (catenary) parameters and state: float64 vectors ----------------------------
SP_AMPLITUDE = 0  # EMF peak at the pantograph behind the source impedance, V
SP_FREQUENCY = 1  # Hz
SP_PHASE_REF = 2  # phase at SP_T_REF, rad
SP_T_REF = 3  # time of the last frequency or phase change, s
SP_R = 4  # source resistance (substation + catenary), ohm
SP_L = 5  # source inductance, H
SP_LIVE = 6  # 1 the feeding breaker closed, 0 commanded open (interruption, neutral section)
SP_DROOP = 7  # non-receptive line: EMF rise per watt of reverse power, V/W
SP_RATIO = 8  # transformer ratio primary / secondary voltage, 1
SP_BREAKER_DELAY = 9  # main breaker closing delay, s
SP_ACTIVE = 10  # 1 the line side is modelled, 0 DC links are ideal sources
SP_MAX_ARC = 11  # longest arc of the breaker and contactors before they force the cut, s
SP_I_LINE_TRIP = 12  # hardware line overcurrent trip of the main breaker, A peak (inf: none)
SP_HW_LINE_ON = 13  # 1 the line overcurrent trip acts, 0 it fails to act (a fault)
SP_N = 14
N_HARMONICS = 4  # harmonic table rows: order, amplitude / fundamental, phase (rad)

SS_IP = 0  # primary (pantograph) current, A
SS_UP = 1  # pantograph voltage at the end of the last sub-step, V
SS_EMF = 2  # source EMF at the last sub-step midpoint, V
SS_BREAKER = 3  # main breaker state (1 closed)
SS_BREAKER_CMD = 4  # commanded (1 close)
SS_BREAKER_TIMER = 5  # time left until the breaker follows its command, s
SS_REVERSE_W = 6  # mean reverse power over the power-quality window, W (droop input)
SS_E_SOURCE = 7  # energy delivered by the source EMF, J
SS_E_SOURCE_R = 8  # energy lost in the source resistance, J
SS_PQ_T = 9  # per-frame integrals for power quality: time, s
SS_PQ_P = 10  # int u_p i_p dt
SS_PQ_U2 = 11  # int u_p^2 dt
SS_PQ_I2 = 12  # int i_p^2 dt
SS_PQ_UC = 13  # int u_p cos(theta) dt, theta the fundamental's phase
SS_PQ_US = 14  # int u_p sin(theta) dt
SS_PQ_IC = 15  # int i_p cos(theta) dt
SS_PQ_IS = 16  # int i_p sin(theta) dt
SS_ARC = 17  # time the breaker has been arcing since its contacts parted, s (-1: not)
SS_E_ARC = 18  # energy a forced cut left in the arcs (stored in the inductances), J
SS_LINE_TRIP = 19  # 1 the line overcurrent trip holds the breaker open until it is
# commanded open (acknowledged)
SS_FEEDER = 20  # the feeding breaker connects the line (1), or its arc has cleared (0)
SS_FEEDER_ARC = 21  # time the feeding breaker has been arcing, s (-1: not)
SS_U_SEC = 22  # the windings' common voltage over the last sub-step, V (the primary open:
# what the converters still switching give it; closed: the pantograph's over n)
SS_N = 23

# --- four-quadrant line converters: parameters [n_lc, LP_N] -------------------------------
LP_L = 0  # secondary leakage inductance referred to the secondary, H
LP_R = 1  # secondary winding resistance, ohm
LP_R_PRE = 2  # precharge resistor, ohm
LP_V0 = 3  # device threshold (one device), V
LP_RD = 4  # device slope resistance (one device), ohm
LP_FSW = 5  # switching frequency, Hz
LP_ESW = 6  # switching energy per pulse at the reference point, J
LP_ESW_VREF = 7
LP_ESW_IREF = 8
LP_PRE_DELAY = 9  # precharge contactor delay, s
LP_LINE_DELAY = 10  # line contactor delay, s
LP_N = 11
LI_LINK = 0  # DC link fed
LI_N = 1
LU_MOD = 0  # modulation index m: converter voltage m U_dc, -1..1
LU_ENABLE = 1  # gates released
LU_PRE_CMD = 2  # precharge contactor commanded closed
LU_LINE_CMD = 3  # line contactor commanded closed
LU_N = 4
LS2_I = 0  # secondary current, A
LS2_U = 1  # converter AC voltage applied, V
LS2_PRE = 2  # precharge contactor state
LS2_LINE = 3  # line contactor state
LS2_PRE_TIMER = 4
LS2_LINE_TIMER = 5
LS2_IDC = 6  # DC current delivered to the link, frame mean, A
LS2_E_AC = 7  # energy into the converter's AC terminals, J
LS2_E_DC = 8  # energy delivered to the link, J
LS2_E_LOSS = 9  # conduction + switching loss, J
LS2_E_R = 10  # loss in the winding and precharge resistances, J
LS2_ARC = 11  # time the opening contactor of winding k has been arcing, s (-1: not)
LS2_STOPPED = 12  # 1: its blocked bridge stops within this sub-step (the primary open)
LS2_N = 13

# --- DC links: parameters [n_link, KP_N] ----------------------------------------------
KP_C = 0  # link capacitance, F
KP_R_DIS = 1  # discharge resistor, ohm
KP_LF = 2  # series-resonant filter inductance, H (0: no filter)
KP_CF = 3  # filter capacitance, F
KP_RF = 4  # filter resistance, ohm
KP_R_CH = 5  # brake chopper resistor, ohm
KP_U_OVP = 6  # overvoltage protection threshold, V
KP_IDEAL = 7  # 1: an ideal source holding KP_U_IDEAL
KP_U_IDEAL = 8
KP_TH_C = 9  # chopper resistor heat capacity, J/K
KP_TH_G = 10  # chopper resistor to ambient conductance, W/K
KP_HW_ON_V = 11  # hardware chopper fires above this link voltage, V (inf: not fitted)
KP_HW_OFF_V = 12  # ... and lets go below this one, V
KP_HW_ENABLE = 13  # 1 the hardware chopper acts, 0 it fails to act (a fault)
KP_N = 14
KU_CHOPPER = 0  # chopper duty 0..1
KU_N = 1
# link state columns continue LS_UDC, LS_IDC (above)
LS_IF = 2  # filter current, A
LS_UCF = 3  # filter capacitor voltage, V
LS_T_RES = 4  # chopper resistor temperature, K
LS_OVP = 5  # overvoltage flag (latched until the voltage falls below 95 %)
LS_ICH = 6  # chopper current, frame mean, A
LS_E_CH = 7  # energy into the chopper resistor, J
LS_E_DIS = 8  # energy into the discharge resistor, J
LS_E_RF = 9  # energy lost in the filter resistance, J
LS_Q_CH = 10  # chopper energy not yet given to the thermal model, J
LS_I4Q = 11  # current from the line converters, frame mean, A
LS_HW_CHOP = 12  # 1 while the hardware chopper is firing (whatever the firmware commands)

READABLE.update({
    "line.pantograph_voltage_v": ("supply_state", SS_UP, "V", "instantaneous"),
    "line.current_a": ("supply_state", SS_IP, "A", "primary current, instantaneous"),
    "line.emf_v": ("supply_state", SS_EMF, "V", "source EMF, behind the feeding breaker"),
    "line.breaker_closed": ("supply_state", SS_BREAKER, "1", "main breaker feedback"),
    "line.overcurrent_trip": ("supply_state", SS_LINE_TRIP, "1", "hardware breaker trip"),
    "line.feeder_closed": ("supply_state", SS_FEEDER, "1", "feeding breaker connects the line"),
    "line_converter.current_a": ("lc_state", LS2_I, "A", "secondary current"),
    "line_converter.voltage_v": ("lc_state", LS2_U, "V", "converter AC voltage"),
    "line_converter.precharge_closed": ("lc_state", LS2_PRE, "1", "feedback contact"),
    "line_converter.line_contactor_closed": ("lc_state", LS2_LINE, "1", "feedback contact"),
    "line_converter.dc_current_a": ("lc_state", LS2_IDC, "A", "into the link, frame mean"),
    "dc_link.filter_current_a": ("link_state", LS_IF, "A", "2f filter current"),
    "dc_link.chopper_current_a": ("link_state", LS_ICH, "A", "frame mean"),
    "dc_link.resistor_temperature_k": ("link_state", LS_T_RES, "K", "brake resistor"),
    "dc_link.overvoltage": ("link_state", LS_OVP, "1", "protection flag"),
    "dc_link.hardware_chopper": ("link_state", LS_HW_CHOP, "1", "firing on overvoltage"),
    "dc_link.line_converter_current_a": ("link_state", LS_I4Q, "A", "frame mean"),
})
