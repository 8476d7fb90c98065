"""Event codes a controller reports in ``tcu.event_code``, with their names.

The reference controller reports these; scenario checks, the monitor and the dashboard
name them; a board may report the same codes to have its events named too.
"""

SEQUENCE_TIMEOUT = 1
INVERTER_OVERCURRENT = 10
HARDWARE_TRIP = 11
LINK_OVERVOLTAGE = 20
LINK_UNDERVOLTAGE = 21
OVERSPEED = 30
ROLL_BACK = 31
MOTOR_TEMPERATURE_DERATING = 40
MOTOR_OVERTEMPERATURE = 41
LINK_WATCHDOG = 50
LINE_UNDERVOLTAGE = 60
LINE_OVERCURRENT = 61
WHEEL_SLIP = 70
SPEED_SENSOR_FAULT = 80

NAMES = {
    SEQUENCE_TIMEOUT: "switch-on sequence timed out",
    INVERTER_OVERCURRENT: "inverter overcurrent: gates blocked",
    HARDWARE_TRIP: "gate drivers' hardware trip: gates blocked, reset after a pause",
    LINK_OVERVOLTAGE: "DC-link overvoltage: line side tripped",
    LINK_UNDERVOLTAGE: "DC-link undervoltage: traction blocked",
    OVERSPEED: "overspeed: traction cut",
    ROLL_BACK: "roll-back: the train ran 0.5 m against its selected direction",
    MOTOR_TEMPERATURE_DERATING: "motor temperature: torque derated",
    MOTOR_OVERTEMPERATURE: "motor overtemperature: traction cut",
    LINK_WATCHDOG: "the rig reported a link watchdog trip",
    LINE_UNDERVOLTAGE: "line voltage below U_min2",
    LINE_OVERCURRENT: "main breaker opened by its overcurrent release: line side tripped",
    WHEEL_SLIP: "wheel slip or slide: torque reduced",
    SPEED_SENSOR_FAULT: "implausible speed reading: sensor taken as failed",
}

#: events that are protective trips (a demo run must not see them)
TRIPS = {INVERTER_OVERCURRENT, HARDWARE_TRIP, LINK_OVERVOLTAGE, OVERSPEED,
         MOTOR_OVERTEMPERATURE, SEQUENCE_TIMEOUT, LINE_OVERCURRENT}

#: names a scenario's checks may use for the codes above ("trip": any of TRIPS)
SLUGS = {
    "sequence-timeout": SEQUENCE_TIMEOUT, "inverter-overcurrent": INVERTER_OVERCURRENT,
    "hardware-trip": HARDWARE_TRIP, "line-overcurrent": LINE_OVERCURRENT,
    "link-overvoltage": LINK_OVERVOLTAGE, "link-undervoltage": LINK_UNDERVOLTAGE,
    "overspeed": OVERSPEED, "roll-back": ROLL_BACK, "motor-derating": MOTOR_TEMPERATURE_DERATING,
    "motor-overtemperature": MOTOR_OVERTEMPERATURE, "link-watchdog": LINK_WATCHDOG,
    "line-undervoltage": LINE_UNDERVOLTAGE, "wheel-slip": WHEEL_SLIP,
    "speed-sensor-fault": SPEED_SENSOR_FAULT,
}
