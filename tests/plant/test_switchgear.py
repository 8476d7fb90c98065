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
         t_open_s: float = 0.2037, open_feeder: bool = False, sign: float = 1.0,
         stiff_links: bool = False):
    """Primary and winding-0 currents each sub-step from t_open_s, with a line converter
    drawing 600 A peak from each winding (sign -1: returning it; stiff_links: the links
    held at 1800 V, so that they neither drain nor fill); optionally opening a switch at
    t_open_s."""
    plant = energised()
    if stiff_links:
        plant.kp[:, L.KP_IDEAL] = 1.0
        plant.kp[:, L.KP_U_IDEAL] = 1800.0
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
    current on to its zero, then the section is isolated: no current in the line or (the
    four windings alike) in any winding, nothing at the pantograph, while the
    substation's EMF is still there behind the open breaker and the train's own breaker
    stays closed."""
    reference, _, _, _ = _run(sign=sign, stiff_links=True)
    opened, _, plant, e0 = _run(open_feeder=True, sign=sign, stiff_links=True)
    zero = _first_zero(reference)
    cleared = int(np.flatnonzero(opened == 0.0)[0])
    assert opened[:cleared] == pytest.approx(reference[:cleared], rel=1e-9)
    assert cleared == zero
    assert (cleared + 1) * H <= 0.5 / 50.0  # within a half period of the line frequency
    assert np.all(opened[cleared:] == 0.0)
    assert np.abs(plant.ls2[:, L.LS2_I]).max() < 1e-9  # A: round-off
    assert plant.read("line.pantograph_voltage_v") == 0.0
    assert plant.read("line.feeder_closed") == 0.0
    assert plant.read("line.breaker_closed") == 1.0
    assert abs(plant.read("line.emf_v")) > 0.0
    e1 = plant.energy()
    # cleared at a current zero, the arc took only what the inductances held at the end
    # of the sub-step in which the currents changed sign: a sinusoid of peak I changes by
    # at most omega I h in a step (|di/dt| <= omega I)
    omega = 2 * np.pi * 50.0
    step_primary = omega * 600.0 * plant.n_line_converters / plant.sp[L.SP_RATIO] * H
    held = 0.5 * plant.sp[L.SP_L] * step_primary ** 2 + sum(
        0.5 * plant.lp[k, L.LP_L] * (omega * 600.0 * H) ** 2
        for k in range(plant.n_line_converters))
    assert 0.0 < e1.switch_arcs - e0.switch_arcs <= held

    def d(name: str) -> float:
        return getattr(e1, name) - getattr(e0, name)

    # the books close to round-off, as for the train's breaker
    out = (d("source_resistance") + d("winding_resistance") + d("line_converter_loss")
           + d("line_inductive_stored") + d("line_converter_dc") + d("switch_arcs"))
    assert out == pytest.approx(d("source"), rel=1e-9)


def test_with_the_primary_open_two_converters_circulate_current_through_their_windings(
) -> None:
    """The windings share one core: with the feeder open (no magnetising branch) their
    currents sum to zero but are not cut. Two converters at different voltages drive a
    current round through their two windings, a series R-L circuit: i(t) = (dU / R)
    (1 - exp(-t R / L)), R and L the two windings' (device drops set to zero; any circuit
    text), followed here over about one time constant. The trapezoidal rule's error on
    it is of order (h R / L)^2 / 12, about 1e-7: the bound is a hundred times that."""
    _, _, plant, _ = _run(open_feeder=True, stiff_links=True)
    assert plant.read("line.feeder_closed") == 0.0
    plant.lp[:, L.LP_V0] = 0.0
    plant.lp[:, L.LP_RD] = 0.0
    line = LineCommands.open(plant.n_line_converters, plant.n_links)
    line.breaker = True
    line.line_contactor[:2] = True  # windings 2 and 3 out of the circuit
    plant.lp[2:, L.LP_LINE_DELAY] = 0.0
    plant.ls2[2:, L.LS2_LINE_TIMER] = 0.0
    line.gates_enabled[:2] = True
    line.modulation[:2] = (0.10, 0.10)
    commands = Commands(np.full((plant.n_inverters, 3), 0.5),
                        np.zeros(plant.n_inverters, bool), line)
    plant.advance(commands, H)  # windings 2 and 3 part; 0 and 1 at the same voltage
    line.modulation[:2] = (0.102, 0.100)  # 3.6 V apart
    i_start = plant.ls2[:2, L.LS2_I].copy()
    assert np.abs(i_start).max() < 1e-9 and np.all(plant.ls2[2:, L.LS2_I] == 0.0)
    d_u = (0.102 - 0.100) * 1800.0
    r = plant.lp[0, L.LP_R] + plant.lp[1, L.LP_R]
    ind = plant.lp[0, L.LP_L] + plant.lp[1, L.LP_L]
    steps = round(ind / r / H)
    for step in range(1, steps + 1):
        plant.advance(commands, H)
        expected = -d_u / r * (1.0 - np.exp(-step * H * r / ind))  # converter 0 the higher
        assert plant.ls2[0, L.LS2_I] == pytest.approx(expected, rel=1e-5)
        assert plant.ls2[1, L.LS2_I] == pytest.approx(-plant.ls2[0, L.LS2_I], rel=1e-12)
        assert plant.ss[L.SS_IP] == 0.0


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


def test_a_line_dead_behind_a_closed_feeder_trips_the_trains_breaker() -> None:
    """The EMF at 0 with the feeder closed (a dip to 0, a short behind the source
    impedance) is not an interruption: the converters' voltage, set for the healthy line,
    drives current through the source impedance alone; it rises past the main breaker's
    overcurrent release, which opens the train's breaker."""
    plant = energised()
    line = PhasorLineConverters(plant, 600.0)
    while plant.time_s < 0.2037 - 1e-9:
        plant.advance(line.commands(1e-3), min(1e-3, 0.2037 - plant.time_s))
    healthy = plant.sp[L.SP_AMPLITUDE]
    plant.set_supply(voltage_rms_v=0.0)
    ip = []
    for _ in range(round(0.03 / H)):
        plant.sp[L.SP_AMPLITUDE] = healthy  # the converters' voltage as for the healthy line
        commands = line.commands(H)
        plant.sp[L.SP_AMPLITUDE] = 0.0
        plant.advance(commands, H)
        ip.append(plant.ss[L.SS_IP])
    assert plant.read("line.emf_v") == 0.0
    assert plant.read("line.feeder_closed") == 1.0
    assert max(abs(i) for i in ip) > plant.sp[L.SP_I_LINE_TRIP]
    assert plant.read("line.overcurrent_trip") == 1.0
    assert plant.read("line.breaker_closed") == 0.0


@pytest.mark.parametrize("t_close_s", [0.2450, 0.2500, 0.2525])  # peak, zero, between
def test_a_reclose_onto_blocked_bridges_above_the_secondarys_peak_draws_nothing(t_close_s
                                                                                ) -> None:
    """The links at 1800 V stand above the secondaries' peak (25 kV sqrt 2 / n, about
    1344 V), so the blocked bridges do not conduct when the feeder recloses. The diode
    model takes the voltage that would stop the current from the secondary's voltage at
    the step's start, a step behind the line at most: the line moves by at most
    omega U h in a step, which drives at most that times h / L_k through a winding.
    (Estimated from the dead section's 0 V pantograph, the bridges drew 104 A a
    winding.)"""
    _, _, plant, _ = _run(open_feeder=True, stiff_links=True)
    line = LineCommands.open(plant.n_line_converters, plant.n_links)
    line.breaker = True
    line.line_contactor[:] = True
    blocked = Commands(np.full((plant.n_inverters, 3), 0.5), np.zeros(plant.n_inverters, bool),
                       line)
    while plant.time_s < t_close_s - 1e-9:
        plant.advance(blocked, H)
    plant.set_supply(live=True)
    u_secondary = 25e3 * np.sqrt(2) / plant.sp[L.SP_RATIO]
    assert u_secondary < 1800.0
    bound = 2 * np.pi * 50.0 * u_secondary * H * H / plant.lp[:, L.LP_L].min()
    for _ in range(160):  # 20 ms
        plant.advance(blocked, H)
        assert np.abs(plant.ls2[:, L.LS2_I]).max() <= bound



def _phased_commands(plant, peak_a: float, phases_rad, frame_s: float) -> Commands:
    """Modulation that draws i_k = I sin(theta + phi_k) from winding k, from the supply's
    phasor and the impedances (as PhasorLineConverters, with a phase of each winding's
    own): a test source, not a controller."""
    sp, n = plant.sp, plant.sp[L.SP_RATIO]
    omega = 2 * np.pi * sp[L.SP_FREQUENCY]
    theta = sp[L.SP_PHASE_REF] + omega * (plant.time_s + 0.5 * frame_s - sp[L.SP_T_REF])
    i_k = peak_a * np.exp(1j * np.asarray(phases_rad))
    u_p = sp[L.SP_AMPLITUDE] - complex(sp[L.SP_R], omega * sp[L.SP_L]) * i_k.sum() / n
    u_conv = u_p / n - (plant.lp[:, L.LP_R] + 1j * omega * plant.lp[:, L.LP_L]) * i_k
    udc = plant.lst[plant.li[:, L.LI_LINK], L.LS_UDC]
    line = LineCommands.open(plant.n_line_converters, plant.n_links)
    line.breaker = True
    line.line_contactor[:] = True
    line.gates_enabled[:] = True
    line.modulation[:] = np.clip((u_conv * np.exp(1j * theta)).imag / udc, -1, 1)
    return Commands(np.full((plant.n_inverters, 3), 0.5), np.zeros(plant.n_inverters, bool),
                    line)


def test_a_forced_cut_of_the_primary_leaves_the_windings_their_circulating_current() -> None:
    """Windings 2 and 3 drawing 60 degrees ahead of 0 and 1, the feeder's arc cut under
    current after 0.5 ms: the primary's current is forced to zero, and the common node
    of the windings takes the voltage impulse that does it, which acts on each winding
    through its own inductance (an impulse across inductors in parallel, any circuit
    text): winding k's current steps by -lam / L_k, lam = S / sum_j 1/L_j, S their sum
    (windings 2 and 3 given twice the leakage inductance here), not to zero, and what
    circulates between them runs on."""
    phases = (0.0, 0.0, np.pi / 3, np.pi / 3)

    def run(cut: bool):
        plant = energised()
        plant.lp[2:, L.LP_L] *= 2.0
        plant.kp[:, L.KP_IDEAL] = 1.0
        plant.kp[:, L.KP_U_IDEAL] = 1800.0
        plant.sp[L.SP_MAX_ARC] = 0.5e-3
        while plant.time_s < 0.2037 - 1e-9:
            plant.advance(_phased_commands(plant, 600.0, phases, 1e-3),
                          min(1e-3, 0.2037 - plant.time_s))
        if cut:
            plant.set_supply(live=False)
        rows = []
        for _ in range(4):  # the cut at the end of the fourth sub-step (0.5 ms)
            plant.advance(_phased_commands(plant, 600.0, phases, H), H)
            rows.append(plant.ls2[:, L.LS2_I].copy())
        return rows[-1], plant

    before, _ = run(cut=False)
    after, plant = run(cut=True)
    assert plant.read("line.feeder_closed") == 0.0
    assert abs(before.sum()) > 100.0  # A: cut under current
    inductance = plant.lp[:, L.LP_L]
    lam = before.sum() / (1.0 / inductance).sum()
    assert after == pytest.approx(before - lam / inductance, rel=1e-9, abs=1e-9)
    assert not np.allclose(after, before - before.sum() / 4)  # (not shared out alike)
    assert after.sum() == pytest.approx(0.0, abs=1e-9)
    assert abs(after[0]) > 100.0  # circulating, not cut


def test_blocked_bridges_stay_at_rest_while_the_others_keep_switching_islanded() -> None:
    """The feeder open with converters 0 and 1 still making the line's voltage (peak
    25 kV sqrt 2 / n, about 1344 V) and 2 and 3 blocked on links at 1800 V: the blocked
    bridges see the windings' common voltage within their rails and carry no current (a
    diode bridge conducts only past its DC voltage). Before they were joined at rest, they
    were taken at 0 V and carried 126 A."""
    _, _, plant, _ = _run(open_feeder=True, stiff_links=True)
    source = PhasorLineConverters(plant, 0.0)
    for _ in range(160):  # 20 ms
        commands = source.commands(H)
        commands.line.gates_enabled[2:] = False
        plant.advance(commands, H)
        assert np.all(plant.ls2[2:, L.LS2_I] == 0.0)
        assert np.abs(plant.ls2[:2, L.LS2_I]).max() < 1e-9  # A: round-off (none to return)
        assert plant.ss[L.SS_U_SEC] != 0.0  # (the running converters set a voltage)



def test_islanded_blocked_bridges_conduct_only_past_their_links_voltage() -> None:
    """The feeder open, converters 0 and 1 on link DC-A (1800 V) still making the line's
    voltage (peak about 1344 V at the windings), bridges 2 and 3 blocked on link DC-B
    held at 1000 V: a diode bridge conducts only while the voltage across it would pass
    its DC voltage plus two diode drops, and then charges its link. So they stand at rest
    while the windings' common voltage is within +-(1000 V + 2 V_F), never hold more than
    that, take current from the other windings near the peaks (the sum staying zero) and
    put energy into their link."""
    _, _, plant, _ = _run(open_feeder=True, stiff_links=True)
    assert list(plant.li[:, L.LI_LINK]) == [0, 0, 1, 1]
    plant.kp[1, L.KP_U_IDEAL] = 1000.0
    plant.lst[1, L.LS_UDC] = 1000.0
    source = PhasorLineConverters(plant, 0.0)
    rail = 1000.0 + 2 * plant.lp[2:, L.LP_V0]
    e_dc = plant.ls2[2:, L.LS2_E_DC].copy()
    e0 = plant.energy()
    conducted = stopped = 0
    for _ in range(320):  # 40 ms
        commands = source.commands(H)
        commands.line.gates_enabled[2:] = False
        i_before = plant.ls2[2:, L.LS2_I].copy()
        plant.advance(commands, H)
        v = plant.ss[L.SS_U_SEC]
        assert np.all(np.abs(plant.ls2[2:, L.LS2_U]) <= rail)
        assert abs(plant.ls2[:, L.LS2_I].sum()) < 1e-9 * np.abs(plant.ls2[:, L.LS2_I]).max() + 1e-9
        if np.all(i_before == 0.0) and np.all(np.abs(v) < rail):
            assert np.all(plant.ls2[2:, L.LS2_I] == 0.0)  # at rest within the rails
        conducted += bool(np.any(plant.ls2[2:, L.LS2_I] != 0.0))
        stopped += bool(np.any((i_before != 0.0) & (plant.ls2[2:, L.LS2_I] == 0.0)))
    assert conducted > 0 and stopped > 0  # near the peaks, and stopping again
    assert np.all(plant.ls2[2:, L.LS2_E_DC] - e_dc > 0.0)  # into link DC-B
    e1 = plant.energy()

    def d(name: str) -> float:
        return getattr(e1, name) - getattr(e0, name)

    # no source now: what the switching converters put in is what the others took,
    # to round-off, through the bridges' stops as well (no arc: no switch opened)
    assert d("switch_arcs") == 0.0
    through = (d("winding_resistance") + d("line_converter_loss") + d("line_inductive_stored")
               + d("line_converter_dc"))
    assert abs(through) < 1e-9 * sum(abs(x) for x in plant.ls2[:, L.LS2_E_DC]) + 1e-6


def test_blocked_bridges_carrying_a_circulating_current_stop_within_their_rails() -> None:
    """The feeder open, every converter blocked, three bridges still carrying a current
    round through their windings (summing to zero), the fourth at rest, leakage
    inductances unequal: the links (2 x 1802 V across a few mH) stop a few amperes within
    one step, so the currents are gone (to round-off), no bridge holds more than its
    link's voltage plus two diode drops, and the books close."""
    _, _, plant, _ = _run(open_feeder=True, stiff_links=True)
    blocked = Commands(np.full((plant.n_inverters, 3), 0.5), np.zeros(plant.n_inverters, bool),
                       LineCommands.open(plant.n_line_converters, plant.n_links))
    blocked.line.breaker = True
    blocked.line.line_contactor[:] = True
    rail = 1800.0 + 2 * plant.lp[:, L.LP_V0]
    rng = np.random.default_rng(7)
    for _ in range(60):
        plant.lp[:, L.LP_L] = rng.uniform(1e-3, 5e-3, 4)
        i0 = rng.uniform(0.1, 5.0)
        plant.ls2[:, L.LS2_I] = (i0, -0.3 * i0, -0.7 * i0, 0.0)
        e0 = plant.energy()
        plant.advance(blocked, H)
        assert np.abs(plant.ls2[:, L.LS2_I]).max() < 1e-9  # A
        assert np.all(np.abs(plant.ls2[:, L.LS2_U]) <= rail)
        e1 = plant.energy()
        through = sum(getattr(e1, n) - getattr(e0, n) for n in (
            "winding_resistance", "line_converter_loss", "line_inductive_stored",
            "line_converter_dc", "switch_arcs"))
        assert through == pytest.approx(0.0, abs=1e-9)  # J (stored: up to 0.06 J)
        plant.ls2[:, L.LS2_I] = 0.0
