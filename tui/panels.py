"""The dashboard's views of a rig: status line, train, converter groups, motors, traces.

Each view takes the rig's hello once (layout) and a telemetry snapshot per refresh.
Everything that matters is text (words, signs, bars of blocks and dots), so it reads
the same without colour; colour only underlines it.
"""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual.widgets import Static

from tui.draw import gauge, si, strip_plot
from tui.history import History


def paint(view: Static, text: Text | str) -> None:
    """Show text in a view, with a layout pass only when its line count changes (a layout
    pass reflows the whole screen; at 10 Hz that was most of the dashboard's CPU)."""
    lines = str(text).count("\n") + 1
    changed = getattr(view, "_painted_lines", None) != lines
    view._painted_lines = lines
    view.update(text, layout=changed)


def status_text(hello: dict[str, Any], snap: dict[str, Any] | None, attached: bool) -> Text:
    """The status line: run state, mode, plant time, real-time margin, link health."""
    if not attached:
        return Text(" DETACHED  no rig monitor: waiting to reconnect", style="bold reverse")
    if snap is None:
        return Text(f" ATTACHED  {hello.get('trainset', '')}: waiting for telemetry")
    state = "PAUSED " if snap["paused"] else "RUNNING"
    period = hello.get("period_us", 1000)
    timing = snap["timing"]
    margin = 1.0 - timing["compute_us_median"] / period
    link = snap["link"]
    wd = "WATCHDOG" if link["watchdog"] else "wd ok"
    rec = "REC" if snap.get("recording") else "rec off"
    text = Text()
    text.append(f" {state} ", style="bold reverse" if snap["paused"] else "bold")
    text.append(f" {snap['mode']} t {snap['t_s']:.2f} s  margin {100 * margin:.0f} %"
                f"  late p99 {timing['lateness_us_p99'] / 1e3:.2f} ms  ")
    text.append(rec, style="bold reverse" if snap.get("recording") else "")
    text.append(f"\n link: telegrams {link['telegrams']}  late {link['late']}  lost "
                f"{link['held']}  rej {link['rejected']}  crc {link['crc_errors']}  ")
    text.append(wd, style="bold reverse" if link["watchdog"] else "")
    return text


def train_text(hello: dict[str, Any], snap: dict[str, Any], width: int) -> Text:
    """Speed, position, demand vs achieved effort, mode and adhesion; the line."""
    tr = snap["train"]
    bar = max(10, min(30, width - 50))
    demand = tr["demand"]
    avail = max(abs(tr["available_kn"]), 1.0)
    code = tr["event_code"]
    event = hello.get("event_names", {}).get(str(code), f"code {code}") if code else "none"
    t = Text()
    t.append(f"speed {tr['speed_kmh']:6.1f} km/h   position {tr['position_m']:8.1f} m   "
             f"accel {tr['acceleration_mps2']:+5.2f} m/s²\n")
    who = "operator" if tr["program"] == "operator" else (
        f"program: {tr['program']}" if tr["program"] else "no program")
    t.append(f"demand   {demand:+5.2f} [{gauge(demand, -1.0, 1.0, bar)}] "
             f"{tr['driver_mode']} [{who}]\n")
    achieved = gauge(tr["achieved_kn"], -avail, avail, bar)
    t.append(f"achieved {tr['achieved_kn']:+6.1f} kN [{achieved}]"
             f" of {tr['available_kn']:.0f} kN; at rail {tr['tractive_force_kn']:+6.1f} kN\n")
    t.append(f"adhesion {tr['adhesion']} (lowest mu0 {tr['mu0_min']:.2f}, "
             f"use {100 * tr['adhesion_use_max']:3.0f} %)   controller event: ")
    t.append(event, style="bold" if code else "")
    line = snap.get("line") or {}
    if line:
        t.append(f"\nline {line['voltage_kv_rms']:5.2f} kV  {line['current_a_rms']:6.1f} A  "
                 f"{si(line['power_kw'] * 1e3, 'W')}  PF {line['power_factor']:+.3f}  "
                 f"breaker {'closed' if line['breaker_closed'] else 'OPEN'}"
                 + ("" if line.get("feeder_closed", True) else "  no feed (section dead)"))
    return t


class TrainPanel(Static):
    """The train and the line, a few lines of text."""

    def show(self, hello: dict[str, Any], snap: dict[str, Any]) -> None:
        paint(self, train_text(hello, snap, self.size.width or 80))


def switchgear(unit: dict[str, Any]) -> str:
    """A line converter's contactors as one word: main closed, precharging, or open."""
    if unit["contactor"]:
        return "main"
    return "pre" if unit["precharge"] else "open"


def group_text(snap: dict[str, Any]) -> Text:
    """One line per converter group (DC link): link voltage, chopper, inverters, and each
    line converter's contactor and current into the link (means since the last snapshot).
    """
    t = Text("group    DC V  chop A   inv A  line converters: contactor, A to link\n",
             style="bold")
    for g in snap["groups"]:
        units = "  ".join(f"{u['name']} {switchgear(u):>4} {u['dc_current_a']:5.0f}"
                          for u in g["line_converters"]) or "ideal source"
        t.append(f"{g['name']:<6} {g['dc_link_v']:6.0f} {g['chopper_a']:7.0f} "
                 f"{g['inverter_dc_a']:7.0f}  {units}\n")
    t.rstrip()
    return t


def motor_text(hello: dict[str, Any], snap: dict[str, Any]) -> Text:
    """One line per motor: speed, torque, current, creep velocity, temperatures."""
    m = snap["motors"]
    t = Text("motor         rpm  torque N·m  I A rms  creep m/s  stator °C  rotor °C\n",
             style="bold")
    for i, name in enumerate(hello["motors"]):
        t.append(f"{name:<10} {m['speed_rpm'][i]:6.0f} {m['torque_nm'][i]:11.0f} "
                 f"{m['current_a_rms'][i]:8.0f} {m['creep_mps'][i]:+10.2f} "
                 f"{m['stator_degc'][i]:10.0f} {m['rotor_degc'][i]:9.0f}\n")
    t.rstrip()
    return t


class GroupTable(Static):
    """The converter groups, as text (cheap to redraw ten times a second)."""

    def show(self, snap: dict[str, Any]) -> None:
        paint(self, group_text(snap))


class MotorTable(Static):
    """The motors, as text."""

    def show(self, hello: dict[str, Any], snap: dict[str, Any]) -> None:
        paint(self, motor_text(hello, snap))


class TracePanel(Static):
    """Strip plots of chosen signals over the last minute, one per slot."""

    def __init__(self, slots: int = 3, selectable: bool = True, **kw) -> None:
        super().__init__(**kw)
        self.choice = [0] * slots  # index into History.names per slot
        self.selected = 0 if selectable else -1  # the slot that n / p change
        self._defaults_set = False

    def cycle(self, history: History, step: int) -> None:
        """Show the next (or previous) signal in the selected slot."""
        if history.names:
            n = len(history.names)
            self.choice[self.selected] = (self.choice[self.selected] + step) % n

    def show(self, history: History) -> None:
        if not history.names:
            paint(self, "no telemetry yet")
            return
        if not self._defaults_set:
            self.choice = [min(i, len(history.names) - 1) for i in range(len(self.choice))]
            self._defaults_set = True
        width = max(20, (self.size.width or 80) - 11)
        height = max(1, ((self.size.height or 18) - len(self.choice)) // len(self.choice) - 0)
        t_end = history.times[-1] if history.times else 0.0
        out = Text()
        for slot, index in enumerate(self.choice):
            name = history.names[index]
            t, v = history.series(name)
            rows = strip_plot(t, v, t_end, history.span_s, width, height)
            finite = v[~(v != v)]
            last = f"{finite[-1]:.4g}" if finite.size else "--"
            lo = f"{finite.min():.4g}" if finite.size else ""
            hi = f"{finite.max():.4g}" if finite.size else ""
            mark = ">" if slot == self.selected else " "
            out.append(f"{mark}{slot + 1} {name} = {last}   (last {history.span_s:.0f} s)\n",
                       style="bold" if slot == self.selected else "")
            for r, row in enumerate(rows):
                label = hi if r == 0 else (lo if r == len(rows) - 1 else "")
                out.append(f"{label:>9} │{row}\n")
        paint(self, out)
