"""The main breaker, the line contactors and the substation's feeding breaker open at a
current zero: a switch that parts its contacts under current draws an arc that carries
the current on until it passes zero, when the arc goes out (the principle of AC
interruption, any switchgear text, e.g. Garzon, *High Voltage Circuit Breakers*); the arc
never burns longer than the switch's maximum arcing time (a half period of the line
frequency by default). An interruption is the feeding breaker opening: the section it
fed is then isolated, not shorted, so no current flows in the train's windings."""

from __future__ import annotations

import numpy as np
import pytest

from emulator.plant import Commands
from emulator.plant import layout as L  # noqa: N812
from emulator.plant.stepper import LineCommands

from .test_line import PhasorLineConverters, energised

H = 125e-6  # the Tern's sub-step: one frame a sub-step while the switch opens


def _run(open_breaker: bool = False, open_contactor: bool = False, max_arc_s: float | None = None,
         t_open_s: float = 0.2037, open_feeder: bool = False, sign: float = 1.0):
    """Primary and winding-0 currents each sub-step from t_open_s, with a line converter
    drawing 600 A peak from each winding (sign -1: returning it); optionally opening a
    switch at t_open_s."""
    plant = energised()
    if max_arc_s is not None:
        plant.sp[L.SP_MAX_ARC] = max_arc_s
    line = PhasorLineConverters(plant, 600.0, sign)
    while plant.time_s < t_open_s - 1e-9:
        plant.advance(line.commands(1e-3), min(1e-3, t_open_s - plant.time_s))
    e0 = plant.energy()
    line.line.breaker = not open_breaker
    if open_contactor:
        line.line.line_contactor[0] = False
        plant.lp[0, L.LP_LINE_DELAY] = 0.0  # part the contacts now
        plant.ls2[0, L.LS2_LINE_TIMER] = 0.0
    if open_feeder:
        plant.set_supply(live=False)
    ip, i0 = [], []
    for _ in range(round(0.03 / H)):
        plant.advance(line.commands(H), H)
        ip.append(plant.ss[L.SS_IP])
        i0.append(plant.ls2[0, L.LS2_I])
    return np.array(ip), np.array(i0), plant, e0


def _first_zero(x: np.ndarray) -> int:
    """Index of the first sample at or after which x has changed sign (or is zero)."""
    change = np.flatnonzero(x[:-1] * x[1:] <= 0)
    assert len(change), "the reference current never passes zero"
    return int(change[0]) + 1


def test_breaker_clears_at_the_first_current_zero() -> None:
    reference, _, _, _ = _run()
    opened, _, plant, _ = _run(open_breaker=True)
    zero = _first_zero(reference)
    cleared = int(np.flatnonzero(opened == 0.0)[0])
    # until then the arc carries the current as if nothing had happened; it goes out in
    # the sub-step where the current passes zero
    assert opened[:cleared] == pytest.approx(reference[:cleared], rel=1e-9)
    assert cleared == zero
    assert np.all(opened[cleared:] == 0.0)
    assert plant.read("line.breaker_closed") == 0.0
    assert (cleared + 1) * H <= plant.sp[L.SP_MAX_ARC]  # 10 ms at 50 Hz


def test_line_contactor_clears_at_its_windings_current_zero() -> None:
    _, reference, _, _ = _run()
    _, opened, plant, _ = _run(open_contactor=True)
    zero = _first_zero(reference)
    cleared = int(np.flatnonzero(opened == 0.0)[0])
    assert cleared == zero
    assert np.all(opened[cleared:] == 0.0)
    assert plant.ls2[0, L.LS2_LINE] == 0.0


def test_an_arc_past_its_maximum_is_cut_and_the_books_close() -> None:
    reference, _, _, _ = _run()
    opened, _, plant, e0 = _run(open_breaker=True, max_arc_s=0.5e-3)
    cleared = int(np.flatnonzero(opened == 0.0)[0])
    assert cleared < _first_zero(reference)  # before the current's own zero
    assert abs(reference[cleared]) > 20.0  # A at the primary: cut under current
    # the arc burns from the sub-step after the command and is cut at the end of the
    # sub-step that brings it to 0.5 ms, four sub-steps: never longer
    assert (cleared + 1) * H == pytest.approx(0.5e-3, rel=1e-9)
    e1 = plant.energy()

    def d(name: str) -> float:
        return getattr(e1, name) - getattr(e0, name)

    assert d("switch_arcs") > 0.0  # the inductances' energy went into the cut
    # the line side's books over the opening: what the catenary gave is in the
    # resistances, the converters, the links, the inductances and the arc
    out = (d("source_resistance") + d("winding_resistance") + d("line_converter_loss")
           + d("line_inductive_stored") + d("line_converter_dc") + d("switch_arcs"))
    # (the books are exact sums of each step's energies: they close to round-off)
    assert out == pytest.approx(d("source"), rel=1e-9)


def test_a_maximum_between_substeps_cuts_at_the_last_step_within_it() -> None:
    opened, _, _, _ = _run(open_breaker=True, max_arc_s=0.55e-3)
    cleared = int(np.flatnonzero(opened == 0.0)[0])
    assert (cleared + 1) * H == pytest.approx(0.5e-3, rel=1e-9)


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_an_interruption_is_the_feeding_breaker_clearing_at_the_current_zero(sign) -> None:
    """Drawing or returning 600 A a winding when the feeder opens: the arc carries the
    current on to its zero, then the section is isolated: no current in any winding,
    nothing at the pantograph, while the substation's EMF is still there behind the open
    breaker and the train's own breaker stays closed."""
    reference, _, _, _ = _run(sign=sign)
    opened, _, plant, e0 = _run(open_feeder=True, sign=sign)
    zero = _first_zero(reference)
    cleared = int(np.flatnonzero(opened == 0.0)[0])
    assert opened[:cleared] == pytest.approx(reference[:cleared], rel=1e-9)
    assert cleared == zero
    assert (cleared + 1) * H <= 0.5 / 50.0  # within a half period of the line frequency
    assert np.all(opened[cleared:] == 0.0)
    assert np.all(plant.ls2[:, L.LS2_I] == 0.0)
    assert plant.read("line.pantograph_voltage_v") == 0.0
    assert plant.read("line.feeder_closed") == 0.0
    assert plant.read("line.breaker_closed") == 1.0
    assert abs(plant.read("line.emf_v")) > 0.0
    e1 = plant.energy()
    # cleared at a current zero: what the arc took is the little the inductances held at
    # the end of the sub-step in which the current changed sign (|i| <= |di/dt| h);
    # the books close to round-off as for the train's breaker
    i_peak_primary = 600.0 * plant.n_line_converters / plant.sp[L.SP_RATIO]
    di_dt = 2 * np.pi * 50.0 * i_peak_primary
    held = 0.5 * plant.sp[L.SP_L] * (di_dt * H) ** 2 + sum(
        0.5 * plant.lp[k, L.LP_L] * (2 * np.pi * 50.0 * 600.0 * H) ** 2
        for k in range(plant.n_line_converters))
    assert 0.0 <= e1.switch_arcs - e0.switch_arcs <= held

    def d(name: str) -> float:
        return getattr(e1, name) - getattr(e0, name)

    out = (d("source_resistance") + d("winding_resistance") + d("line_converter_loss")
           + d("line_inductive_stored") + d("line_converter_dc") + d("switch_arcs"))
    assert out == pytest.approx(d("source"), rel=1e-9, abs=1e-6 * abs(d("line_converter_dc")))


def test_the_feeding_breaker_recloses_onto_the_line_as_it_is() -> None:
    """Live again: the breaker closes at once and the pantograph (the train's own breaker
    open: no current) reads the EMF at the catenary's phase as it ran on while the section
    was dead."""
    _, _, plant, _ = _run(open_feeder=True)
    blocked = Commands(np.full((plant.n_inverters, 3), 0.5), np.zeros(plant.n_inverters, bool),
                       LineCommands.open(plant.n_line_converters, plant.n_links))
    plant.advance(blocked, H)  # the train's breaker opens on the dead line
    assert plant.read("line.breaker_closed") == 0.0
    assert plant.read("line.pantograph_voltage_v") == 0.0
    plant.set_supply(live=True)
    plant.advance(blocked, H)
    assert plant.read("line.feeder_closed") == 1.0
    t = plant.time_s
    expected = 25e3 * np.sqrt(2) * np.sin(2 * np.pi * 50 * t)  # no phase jump asked
    assert plant.read("line.pantograph_voltage_v") == pytest.approx(expected, abs=1e-6)


def test_a_short_at_the_feeding_point_trips_the_trains_breaker_not_the_feeder() -> None:
    """A short at the feeding point is not an interruption: the EMF behind the source
    impedance is 0 and the feeder stays closed, so the converters' voltage, set for the
    healthy line, drives the current through the source impedance alone: it rises past the
    main breaker's overcurrent release, which opens the train's breaker."""
    plant = energised()
    line = PhasorLineConverters(plant, 600.0)
    while plant.time_s < 0.2037 - 1e-9:
        plant.advance(line.commands(1e-3), min(1e-3, 0.2037 - plant.time_s))
    plant.set_supply(short=True)
    ip = []
    for _ in range(round(0.03 / H)):
        plant.advance(line.commands(H), H)
        ip.append(plant.ss[L.SS_IP])
    assert plant.read("line.emf_v") == 0.0
    assert plant.read("line.feeder_closed") == 1.0
    assert max(abs(i) for i in ip) > plant.sp[L.SP_I_LINE_TRIP]
    assert plant.read("line.overcurrent_trip") == 1.0
    assert plant.read("line.breaker_closed") == 0.0
