"""The inverters' protections in the reference controller: when each inverter's gates
must stay off, and when its gate drivers are reset.

Per inverter, from its sampled phase currents, the drivers' trip bit and its link:
a software overcurrent blocks it 0.1 s; a hardware trip (the bit rising) blocks it
HARDWARE_RESET_S and resets the drivers for the last periods of that, and an inverter
that trips HARDWARE_TRIPS_TO_ISOLATE times within its trip window stays blocked; a low
link while effort is asked for stops it until the link and the rotor flux allow a
restart (ride_through). A V/f drive that stops at speed is blocked longer, until its
rotor's flux has died away (stopped_at_speed; its drivers are reset at the end of
that). The compiled period (period_kernel.py) does the same on its inverter rows.
"""

from __future__ import annotations

import math

from emulator.protocol import events

from . import ride_through as rt

OVERCURRENT_A = 1200.0  # a sampled phase current above this blocks the inverter
OVERCURRENT_BLOCK_S = 0.1
HARDWARE_TRIP_BIT = 8  # bit 3 of gate_fault: the drivers' latched hardware trip
HARDWARE_RESET_S = 0.2  # gates off after a hardware trip before the drivers are reset
# (a V/f drive at speed: until its flux has died away, stopped_at_speed)
HARDWARE_TRIPS_TO_ISOLATE = 3  # ... and an inverter that trips this often within
HARDWARE_WINDOW_S = 10.0  # this long, plus the flux waits of its retries (trip_window_s),
# is isolated: left blocked, no more resets (common practice of traction protection: a
# repeated hardware trip means a fault, not a transient)


def trip_window_s(flux_decay_s: float) -> float:
    """How far back the trips that isolate an inverter are counted: HARDWARE_WINDOW_S
    plus a flux wait for each retry, so that a V/f drive that waits out its flux before
    each retry is still isolated however slow its rotor's flux decays (with the window
    alone, a wait of 5 s or more would leave the third trip outside it, and the inverter
    would be retried for ever)."""
    return HARDWARE_WINDOW_S + (HARDWARE_TRIPS_TO_ISOLATE - 1) * flux_decay_s


class InverterGuards:
    """The protections' state of every inverter (lists indexed by inverter)."""

    def __init__(self, n_inverters: int, flux_decay_s: float) -> None:
        self.block_until = [0.0] * n_inverters
        self.hardware_trips: list[list[float]] = [[] for _ in range(n_inverters)]
        self.hardware_latched = [False] * n_inverters  # the trip bit at the last sample
        self.undervolted = [False] * n_inverters  # stopped by a low link, not restarted
        self.restart_after = [0.0] * n_inverters
        self.flux_decay_s = flux_decay_s
        self.trip_window_s = trip_window_s(flux_decay_s)

    def judge(self, k: int, t: float, currents: tuple[float, float, float], gate_fault: float,
              raise_event) -> None:
        """Inverter k's sampled currents and driver bits at time t (raise_event(code)
        reports what it finds)."""
        if max(abs(i) for i in currents) > OVERCURRENT_A:
            raise_event(events.INVERTER_OVERCURRENT)
            # (a longer block stands: an isolated inverter stays isolated)
            self.block_until[k] = max(self.block_until[k], t + OVERCURRENT_BLOCK_S)
        # each new hardware trip (the bit rising, also during a block of our own) is
        # reported and counted
        tripped = int(gate_fault) & HARDWARE_TRIP_BIT
        if tripped and not self.hardware_latched[k]:
            raise_event(events.HARDWARE_TRIP)
            recent = [s for s in self.hardware_trips[k] if t - s < self.trip_window_s]
            self.hardware_trips[k] = [*recent, t]
            isolate = len(self.hardware_trips[k]) >= HARDWARE_TRIPS_TO_ISOLATE
            self.block_until[k] = (math.inf if isolate
                                   else max(self.block_until[k], t + HARDWARE_RESET_S))
        self.hardware_latched[k] = bool(tripped)

    def resets(self, k: int, t: float, period_s: float) -> bool:
        """Whether to reset inverter k's drivers now: a latched trip in the last three
        periods of its block (the reset acts a command delay later, and shows a sample
        after that)."""
        return self.hardware_latched[k] and self.block_until[k] - t < 3.5 * period_s

    def stopped_at_speed(self, k: int, t: float, flux_share: float = 1.0) -> None:
        """A V/f drive that stops at speed (released after its demand, blocked by a trip,
        stopped by its link or the switch-on sequence) waits for its rotor's flux to die
        away: the flux turns with the rotor, and the restart's voltage, ramped from zero
        at the control's own angle, meets it as a source of its own. A restart 0.4 s
        after a release at 30 km/h drew 1.2 kA and braked the train; one 0.2 s after a
        single spurious hardware trip at 50 km/h drew 1.5 kA and tripped again. (A
        flying restart, which finds the flux's angle and speed and starts into it, would
        not wait; the reference controller has none.) A drive stopped early in its
        voltage ramp, with ``flux_share`` of its flux, waits less (ride_through.
        flux_wait_s)."""
        self.block_until[k] = max(self.block_until[k],
                                  t + rt.flux_wait_s(self.flux_decay_s, flux_share))

    def ready_share(self, t: float, motors: tuple[int, ...]) -> float:
        """The share of the motors whose inverters may run now (not blocked after a trip,
        waiting out their flux, or isolated): of the effort the drives can give."""
        ready = 0.0
        for k, n_mot in enumerate(motors):
            if t >= self.block_until[k]:
                ready += n_mot
        return ready / sum(motors)

    def link(self, k: int, t: float, u_d: float, u_nominal: float, asked: bool,
             raise_event) -> bool:
        """Inverter k's link u_d while running (asked: effort is asked for); whether the
        link lets the inverter run: a stop at LINK_STOP_FRACTION of nominal, a restart
        above LINK_RESTART_FRACTION once the rotor flux has died away."""
        u_stop = rt.LINK_STOP_FRACTION * u_nominal
        if asked and u_d <= u_stop:
            raise_event(events.LINK_UNDERVOLTAGE)
            if not self.undervolted[k]:
                self.undervolted[k] = True
                self.restart_after[k] = t + self.flux_decay_s
        elif (self.undervolted[k] and u_d > rt.LINK_RESTART_FRACTION * u_nominal
              and t >= self.restart_after[k]):
            self.undervolted[k] = False
        return u_d > u_stop and not self.undervolted[k]
