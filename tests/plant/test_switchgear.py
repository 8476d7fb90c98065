"""The main breaker and the line contactors open at a current zero: a switch that parts
its contacts under current draws an arc that carries the current on until it passes
zero, when the arc goes out (the principle of AC interruption, any switchgear text, e.g.
Garzon, *High Voltage Circuit Breakers*); the arc never burns longer than the switch's
maximum arcing time (a half period of the line frequency by default)."""

from __future__ import annotations

import numpy as np
import pytest

from emulator.plant import layout as L  # noqa: N812

from .test_line import PhasorLineConverters, energised

H = 125e-6  # the Tern's sub-step: one frame a sub-step while the switch opens


def _run(open_breaker: bool = False, open_contactor: bool = False, max_arc_s: float | None = None,
         t_open_s: float = 0.2037):
    """Primary and winding-0 currents each sub-step from t_open_s, with a line converter
    drawing 600 A peak from each winding; optionally opening a switch at t_open_s."""
    plant = energised()
    if max_arc_s is not None:
        plant.sp[L.SP_MAX_ARC] = max_arc_s
    line = PhasorLineConverters(plant, 600.0)
    while plant.time_s < t_open_s - 1e-9:
        plant.advance(line.commands(1e-3), min(1e-3, t_open_s - plant.time_s))
    e0 = plant.energy()
    line.line.breaker = not open_breaker
    if open_contactor:
        line.line.line_contactor[0] = False
        plant.lp[0, L.LP_LINE_DELAY] = 0.0  # part the contacts now
        plant.ls2[0, L.LS2_LINE_TIMER] = 0.0
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
