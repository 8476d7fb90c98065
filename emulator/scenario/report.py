"""Plotted report of a scenario run: PNG figures and an index page.

Figures (matplotlib, Agg backend: no display needed): speed and effort over time and
position, motor currents and torques, DC links, line voltage and power factor, creep
per axle, and a timeline of the check windows. Fault and event spans are shaded on
every plot over time. matplotlib is an optional dependency (``pip install
railrig[report]``).
"""

from __future__ import annotations

import html
import math
from pathlib import Path

import numpy as np

from .checks import signal_columns
from .runner import RunResult

STRIDE_S = 0.01  # plot one point every 10 ms


def _pyplot():
    try:
        import matplotlib
    except ImportError:
        raise RuntimeError("the plotted report needs matplotlib: pip install "
                           "'railrig[report]'") from None
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _series(rec, name, rows):
    cols, scale, offset = signal_columns(rec.columns, name)
    return rec.data[rows][:, cols] * scale + offset if cols else None


def _labels(rec, name) -> list[str]:
    cols, _, _ = signal_columns(rec.columns, name)
    return [rec.columns[c].split("[")[-1].rstrip("]") if "[" in rec.columns[c] else ""
            for c in cols]


def write_report(run: RunResult, directory: str | Path) -> Path:
    """Write the figures and index.html into directory; returns the index path."""
    plt = _pyplot()
    out = Path(directory)
    out.mkdir(parents=True, exist_ok=True)
    rec = run.recording
    t_all = rec.column("time_s")
    step = max(round(STRIDE_S / max(t_all[1] - t_all[0], 1e-6)), 1) if len(t_all) > 1 else 1
    rows = slice(None, None, step)
    t = t_all[rows]
    figures = []

    def shade(ax):
        for label, t0, t1 in run.spans:
            ax.axvspan(t0, t1, color="0.85", zorder=0)
            ax.text(t0, 1.0, " " + label, transform=ax.get_xaxis_transform(), fontsize=7,
                    va="top", color="0.3")

    def save(fig, name, title):
        fig.suptitle(f"{run.scenario.name}: {title}", fontsize=10)
        fig.tight_layout()
        fig.savefig(out / name, dpi=90)
        plt.close(fig)
        figures.append((name, title))

    # speed and effort
    fig, axes = plt.subplots(3, 1, figsize=(10, 8))
    v = _series(rec, "train.speed_kmh", rows)[:, 0]
    x = _series(rec, "train.position_m", rows)[:, 0]
    f = _series(rec, "train.tractive_force_kn", rows)[:, 0]
    axes[0].plot(t, v)
    axes[0].set_ylabel("speed, km/h")
    axes[1].plot(t, f, label="tractive (+) / braking (-) effort at the wheels")
    demand = _series(rec, "y.train.effort_demand", rows)
    ax2 = axes[1].twinx()
    ax2.plot(t, demand[:, 0], color="tab:orange", lw=0.8, label="driver's demand")
    ax2.set_ylabel("demand, 1")
    axes[1].set_ylabel("effort, kN")
    axes[1].legend(loc="upper left", fontsize=7)
    for ax in axes[:2]:
        ax.set_xlabel("plant time, s")
        shade(ax)
    axes[2].plot(x, v)
    axes[2].set_xlabel("position, m")
    axes[2].set_ylabel("speed, km/h")
    save(fig, "speed_effort.png", "speed and effort")

    # currents and torques
    fig, axes = plt.subplots(2, 1, figsize=(10, 6), sharex=True)
    ia, ib, ic = (_series(rec, f"inverter.phase_current_{p}_a", rows) for p in "abc")
    amplitude = np.sqrt(2.0 / 3.0 * (ia**2 + ib**2 + ic**2))
    for j, name in enumerate(_labels(rec, "inverter.phase_current_a_a")):
        axes[0].plot(t, amplitude[:, j], lw=0.8, label=f"inverter {name}")
    axes[0].set_ylabel("phase current amplitude, A")
    torque = _series(rec, "motor.torque_nm", rows)
    for j, name in enumerate(_labels(rec, "motor.torque_nm")):
        axes[1].plot(t, torque[:, j], lw=0.8, label=f"motor {name}")
    axes[1].set_ylabel("torque, N m")
    axes[1].set_xlabel("plant time, s")
    for ax in axes:
        ax.legend(fontsize=6, ncol=4)
        shade(ax)
    save(fig, "currents.png", "motor currents and torques")

    # DC links
    fig, axes = plt.subplots(2, 1, figsize=(10, 5), sharex=True)
    for name, ax, unit in (("dc_link.voltage_v", axes[0], "DC-link voltage, V"),
                           ("dc_link.chopper_current_a", axes[1], "chopper current, A")):
        data = _series(rec, name, rows)
        for j, label in enumerate(_labels(rec, name)):
            ax.plot(t, data[:, j], lw=0.8, label=f"link {label}")
        ax.set_ylabel(unit)
        ax.legend(fontsize=7)
        shade(ax)
    axes[1].set_xlabel("plant time, s")
    save(fig, "dc_link.png", "DC links")

    # line side
    u = _series(rec, "line.voltage_rms_kv", rows)
    if u is not None:
        fig, axes = plt.subplots(3, 1, figsize=(10, 7), sharex=True)
        axes[0].plot(t, u[:, 0])
        axes[0].set_ylabel("pantograph voltage, kV rms")
        axes[1].plot(t, _series(rec, "line.power_factor", rows)[:, 0])
        axes[1].set_ylabel("power factor, 1")
        axes[1].set_ylim(-1.05, 1.05)
        axes[2].plot(t, _series(rec, "line.active_power_w", rows)[:, 0] / 1e6)
        axes[2].set_ylabel("active power, MW")
        axes[2].set_xlabel("plant time, s")
        for ax in axes:
            shade(ax)
        save(fig, "line.png", "line voltage, power factor and power")

    # creep
    fig, ax = plt.subplots(figsize=(10, 4))
    creep = _series(rec, "motor.creep_velocity_mps", rows)
    for j, label in enumerate(_labels(rec, "motor.creep_velocity_mps")):
        ax.plot(t, creep[:, j], lw=0.8, label=f"axle {label}")
    ax.set_ylabel("creep velocity, m/s")
    ax.set_xlabel("plant time, s")
    ax.legend(fontsize=6, ncol=4)
    shade(ax)
    save(fig, "creep.png", "creep per axle")

    # mechanics: the shaft's torque at every frame (its 30 Hz ring would alias at the
    # plotting stride), axle loads and the friction brake at the rail
    shaft = _series(rec, "motor.shaft_torque_nm", slice(None))
    if shaft is not None:
        fig, axes = plt.subplots(3, 1, figsize=(10, 8), sharex=True)
        for j, label in enumerate(_labels(rec, "motor.shaft_torque_nm")):
            axes[0].plot(t_all, shaft[:, j], lw=0.5, label=f"motor {label}")
        axes[0].set_ylabel("shaft torque, N m")
        for name, ax, unit, scale in (("motor.axle_load_n", axes[1], "axle load, kN", 1e-3),
                                      ("motor.brake_force_n", axes[2],
                                       "friction brake at the rail, kN", 1e-3)):
            data = _series(rec, name, rows)
            for j, label in enumerate(_labels(rec, name)):
                ax.plot(t, data[:, j] * scale, lw=0.8, label=f"axle {label}")
            ax.set_ylabel(unit)
        axes[2].set_xlabel("plant time, s")
        for ax in axes:
            ax.legend(fontsize=6, ncol=4)
            shade(ax)
        save(fig, "mechanics.png", "shaft torques, axle loads and friction brakes")

    # check windows
    n = len(run.results)
    fig, ax = plt.subplots(figsize=(10, 1 + 0.35 * n))
    for i, r in enumerate(run.results):
        t0, t1 = r.window
        ax.barh(i, max(t1 - t0, 0.05), left=t0, color="tab:green" if r.passed else "tab:red",
                hatch=None if r.passed else "//")
        ax.text(t0, i, f" {'pass' if r.passed else 'FAIL'}: {r.spec.name}", va="center",
                fontsize=7)
    ax.set_yticks([])
    ax.set_xlim(0, max(float(t_all[-1]) if len(t_all) else 1.0, 1.0))
    ax.set_xlabel("plant time, s")
    ax.invert_yaxis()
    shade(ax)
    save(fig, "checks.png", "check windows")

    index = out / "index.html"
    index.write_text(_index(run, figures), encoding="utf-8")
    return index


def _index(run: RunResult, figures) -> str:
    e = html.escape
    verdict = "PASSED" if run.passed else "FAILED"
    rows = "\n".join(
        f"<tr><td>{'pass' if r.passed else '<b>FAIL</b>'}</td><td>{e(r.spec.name)}</td>"
        f"<td>{e(r.spec.kind)}</td><td>{e(r.measured)}</td><td>{e(r.detail)}</td>"
        f"<td>{r.window[0]:.2f} .. {r.window[1]:.2f} s</td></tr>" for r in run.results)
    spans = "\n".join(f"<li>{e(label)}: {t0:.2f} .. {t1:.2f} s</li>"
                      for label, t0, t1 in run.spans) or "<li>none</li>"
    meta = run.recording.meta
    plots = "\n".join(f'<h2>{e(title)}</h2><img src="{name}" alt="{e(title)}">'
                      for name, title in figures)
    t_end = float(run.recording.column("time_s")[-1]) if len(run.recording.data) else math.nan
    return f"""<!doctype html>
<html><head><meta charset="utf-8"><title>{e(run.scenario.name)}</title>
<style>body{{font-family:sans-serif;max-width:1000px;margin:auto}}
td,th{{border-bottom:1px solid #ccc;padding:2px 8px;text-align:left}}
img{{max-width:100%}}</style></head><body>
<h1>{e(run.scenario.name)}: {verdict}</h1>
<p>{e(run.scenario.description)}</p>
<p>Scenario {e(str(run.scenario.path))}; trainset {e(str(run.scenario.trainset))};
seed {meta.get('seed')}; mode {e(str(meta.get('mode')))}; controller
{e(str(meta.get('controller')))}; railrig {e(str(meta.get('railrig')))};
plant time {t_end:.1f} s; wall time {run.wall_s:.1f} s.</p>
<h2>Checks</h2>
<table><tr><th>verdict</th><th>check</th><th>kind</th><th>measured</th><th></th>
<th>window</th></tr>
{rows}</table>
<h2>Faults and events</h2><ul>{spans}</ul>
{plots}
</body></html>
"""
