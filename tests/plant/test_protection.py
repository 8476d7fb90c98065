"""The plant's hardware protections, which act whatever the firmware does: the gate
drivers' desaturation/overcurrent trip (blocks an inverter's gates within a sub-step and
latches until reset), the hardware brake chopper on DC-link overvoltage (with
hysteresis), and the main breaker's overcurrent release."""

from __future__ import annotations

import math

import numpy as np
import pytest

from emulator.plant import Commands, Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET
from .test_line import PhasorLineConverters, energised

H = 125e-6  # one frame a sub-step


def _pushing(plant: Plant, frames: int, reset: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Leg a of inverter 0 held up and b, c down (a DC voltage across the windings: the
    current climbs at U_dc / L_sigma, as under a firmware that lost its current control)."""
    duty = np.full((plant.n_inverters, 3), 0.5)
    duty[0] = (1.0, 0.0, 0.0)
    gates = np.zeros(plant.n_inverters, bool)
    gates[0] = True
    resets = np.zeros(plant.n_inverters, bool)
    resets[0] = reset
    peak, tripped = [], []
    for _ in range(frames):
        plant.advance(Commands(duty, gates, fault_reset=resets), H)
        peak.append(np.abs(plant.ist[0, L.IS_IA:L.IS_IC + 1]).max())
        tripped.append(plant.ist[0, L.IS_HW_TRIP])
    return np.array(peak), np.array(tripped)


def test_gate_drivers_trip_within_a_substep_and_latch_until_reset() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    limit = plant.params.inverter.hardware_trip_a
    peak, tripped = _pushing(plant, 400)
    over = int(np.flatnonzero(peak > limit)[0])
    assert tripped[over] == 1.0 and not tripped[:over].any()  # in the sub-step it passed
    # blocked from the next sub-step: the current falls through the diodes against the
    # link to nothing, never again reaching the threshold
    after = peak[over:]
    gone = int(np.flatnonzero(after < 1e-3 * limit)[0])
    assert np.all(np.diff(after[:gone + 1]) < 0)
    assert after[gone:].max() < 1e-3 * limit
    assert tripped[over:].all()  # latched though the current has gone
    _pushing(plant, 200)  # ... and the gates stay blocked whatever is commanded
    assert plant.ist[0, L.IS_HW_TRIP] == 1.0
    assert abs(plant.read("inverter.phase_current_a_a")[0]) < 0.05 * limit
    plant.advance(Commands.blocked(plant.n_inverters), H)
    reset = np.zeros(plant.n_inverters, bool)
    reset[0] = True
    plant.advance(Commands(np.full((plant.n_inverters, 3), 0.5),
                           np.zeros(plant.n_inverters, bool), fault_reset=reset), H)
    assert plant.ist[0, L.IS_HW_TRIP] == 0.0  # reset, with the current gone


def test_a_protection_that_fails_to_act_lets_the_current_run_away() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.ipar[:, L.IP_HW_ON] = 0.0  # the fault catalogue's "protection fails to act"
    limit = plant.params.inverter.hardware_trip_a
    peak, tripped = _pushing(plant, 400)
    assert not tripped.any()
    assert peak.max() > 1.5 * limit


def test_hardware_chopper_fires_above_its_threshold_and_lets_go_below_the_lower() -> None:
    plant = energised(udc=2300.0)  # above the 2250 V threshold
    link = plant.params.dc_links[0]
    volts, firing = [], []
    blocked = Commands.blocked(plant.n_inverters)
    for _ in range(400):
        plant.advance(blocked, H)
        volts.append(plant.lst[0, L.LS_UDC])
        firing.append(plant.lst[0, L.LS_HW_CHOP])
    volts, firing = np.array(volts), np.array(firing)
    assert firing[0] == 1.0  # the firmware commands no chopper: the hardware fires
    stop = int(np.flatnonzero(firing == 0.0)[0])
    assert stop >= 2  # fired for a while (and the indices below stay in the run)
    # it lets go in the sub-step that takes the voltage below the lower threshold
    assert volts[stop - 1] < link.hardware_chopper_off_v <= volts[stop - 2]
    # and stays off while the voltage swings back (the 2f filter rings) below the upper one
    assert not firing[stop:].any() and volts[stop:].max() < link.hardware_chopper_on_v


def _overcurrent(trip_a: float, steps: int, acknowledge_at: int | None = None):
    """Primary currents, trip flags and breaker states each sub-step of a line drawing
    past trip_a (inf: no release); acknowledge_at: the step at which the controller
    commands the breaker open for one step, then closed again."""
    plant = energised()
    line = PhasorLineConverters(plant, 2000.0)  # per winding: 4 x 2000 / 26.3 = 304 A...
    plant.sp[L.SP_I_LINE_TRIP] = trip_a  # ... past a release set at 250 A for the test
    currents, trip, closed = [], [], []
    for k in range(steps):
        line.line.breaker = k != acknowledge_at
        plant.advance(line.commands(H), H)
        currents.append(plant.ss[L.SS_IP])
        trip.append(plant.ss[L.SS_LINE_TRIP])
        closed.append(plant.read("line.breaker_closed"))
    return np.array(currents), np.array(trip), np.array(closed), plant, line


def _first_zero_after(currents: np.ndarray, start: int) -> int:
    """The step at whose end the current passes zero, from start on."""
    return start + int(np.flatnonzero(currents[start:] * currents[start - 1:-1] <= 0.0)[0])


def test_line_overcurrent_opens_the_breaker_until_acknowledged() -> None:
    reference, _, _, _, _ = _overcurrent(math.inf, round(0.06 / H))
    currents, trip, _, plant, line = _overcurrent(250.0, round(0.06 / H))
    first = int(np.flatnonzero(np.abs(currents) > 250.0)[0])
    assert trip[first] == 1.0 and not trip[:first].any()
    # the arc carries the current on (the same, its voltage left out) to its first zero
    zero = _first_zero_after(reference, first + 1)
    assert np.array_equal(currents[:zero], reference[:zero])
    assert np.all(currents[zero:] == 0.0)
    assert plant.read("line.breaker_closed") == 0.0
    for _ in range(200):  # the controller still commands it closed: it stays open
        plant.advance(line.commands(H), H)
    assert plant.read("line.breaker_closed") == 0.0
    line.line.breaker = False  # commanded open: acknowledged
    plant.advance(line.commands(H), H)
    assert plant.ss[L.SS_LINE_TRIP] == 0.0


def test_the_breaker_is_trip_free() -> None:
    """A close command while the tripped breaker still arcs does not keep it closed: it
    completes its opening at the current zero and closes again only its closing delay
    after that (common practice of circuit breakers: trip-free operation, e.g. IEC
    62271-100's definition of a trip-free circuit breaker; from memory)."""
    reference, _, _, _, _ = _overcurrent(math.inf, round(0.3 / H))
    first = int(np.flatnonzero(np.abs(reference) > 250.0)[0])
    # acknowledged in the step after the trip, then commanded closed again at once
    currents, trip, closed, plant, _ = _overcurrent(250.0, round(0.3 / H), first + 1)
    zero = _first_zero_after(reference, first + 1)
    assert zero > first + 2  # the acknowledgement came while the arc burned
    assert np.all(currents[zero:zero + 10] == 0.0) and not closed[zero]
    delay = plant.sp[L.SP_BREAKER_DELAY]
    reclosed = int(np.flatnonzero(closed[zero:])[0]) + zero
    assert (reclosed - zero) * H == pytest.approx(delay, abs=H)
    assert not trip[first + 1:reclosed].any()  # acknowledged; the arc is no new trip
