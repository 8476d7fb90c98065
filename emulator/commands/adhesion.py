"""``railrig adhesion``: the creep-force curves the plant uses, per rail condition.

For each condition and train speed the peak of the creep curve (the most friction an
axle can use, F / Q) and the slip velocity at which it lies, computed by the plant's own
compiled contact function with the trainset's axle load, Kalker coefficient and creep
reference speed. A slip-control engineer tunes against these: beyond the peak the force
falls with the slip, and an axle left there spins up.
"""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

from rich import box
from rich.console import Console
from rich.markup import escape
from rich.table import Table

from emulator.commands import DEFAULT_TRAINSET, stderr_console

console = stderr_console()
HELP = "print (and plot) the plant's creep-force curves per rail condition"
SPEEDS_KMH = (0.0, 20.0, 40.0, 80.0, 120.0, 160.0)


def add_arguments(ad: argparse.ArgumentParser) -> None:
    """The options of ``railrig adhesion``."""
    ad.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    ad.add_argument("--condition", default=None,
                    help="one rail condition (default: all the plant offers)")
    ad.add_argument("--speeds-kmh", default=",".join(f"{v:g}" for v in SPEEDS_KMH),
                    help="comma-separated train speeds")
    ad.add_argument("--json", action="store_true", help="the peaks as JSON on stdout")
    ad.add_argument("--png", default=None, metavar="FILE",
                    help="plot the creep curves (friction against slip velocity) here")


def peaks(params, conditions: list[str], speeds_kmh: list[float]) -> dict:
    """{"conditions": {name: [{"speed_kmh", "mu_peak", "creep_at_peak_mps"}, ...]}}."""
    from emulator.plant.drivetrain import creep_curve_peak

    dt = params.drivetrain
    out: dict[str, list[dict]] = {}
    for name in conditions:
        rows = []
        for v in speeds_kmh:
            mu, w = creep_curve_peak(name, v / 3.6, dt.axle_load_n, dt.kalker_coefficient_n,
                                     dt.creep_reference_speed_mps)
            rows.append({"speed_kmh": v, "mu_peak": round(mu, 4),
                         "creep_at_peak_mps": round(w, 4)})
        out[name] = rows
    return {"conditions": out}


def plot(params, conditions: list[str], speeds_kmh: list[float], data: dict,
         path: Path) -> Path:
    """Friction (F / Q) against slip velocity, one panel per condition, a curve per
    speed, the peak marked."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from emulator.plant.drivetrain import RAIL_CONDITIONS, polach_force

    dt = params.drivetrain
    q = dt.axle_load_n
    slips = [1e-3 * (2e4 ** (k / 299)) for k in range(300)]  # 1 mm/s .. 20 m/s
    fig, axes = plt.subplots(1, len(conditions), figsize=(4.2 * len(conditions), 4.2),
                             squeeze=False, sharey=True)
    for ax, name in zip(axes[0], conditions, strict=True):
        for v, peak in zip(speeds_kmh, data["conditions"][name], strict=True):
            mus = [polach_force(w, v / 3.6, q, dt.kalker_coefficient_n,
                                *RAIL_CONDITIONS[name], dt.creep_reference_speed_mps)[0] / q
                   for w in slips]
            line, = ax.semilogx(slips, mus, label=f"{v:g} km/h")
            ax.plot(peak["creep_at_peak_mps"], peak["mu_peak"], "o", color=line.get_color())
        ax.set_title(name)
        ax.set_xlabel("slip velocity, m/s")
        ax.grid(alpha=0.3, which="both")
    axes[0][0].set_ylabel("creep force / axle load")
    axes[0][-1].legend(fontsize=8)
    fig.suptitle(f"creep curves of {params.name} (axle {q / 9.81 / 1e3:.1f} t)")
    fig.tight_layout()
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, dpi=90)
    plt.close(fig)
    return path


def run(args: argparse.Namespace) -> int:
    """Print the creep-curve peaks; 2 on a bad option."""
    from emulator.plant.drivetrain import RAIL_CONDITIONS
    from emulator.profiles.reader import load_trainset, resolve_profile

    params = load_trainset(resolve_profile(args.profile))
    if args.condition is not None and args.condition not in RAIL_CONDITIONS:
        console.print(f"[red]error:[/red] no rail condition {escape(repr(args.condition))}; "
                      f"the plant offers {', '.join(RAIL_CONDITIONS)}")
        return 2
    try:
        speeds = [float(v) for v in args.speeds_kmh.split(",")]
    except ValueError as exc:
        console.print(f"[red]error:[/red] speeds are numbers: {escape(str(exc))}")
        return 2
    if not speeds or any(not math.isfinite(v) or not 0.0 <= v <= 500.0 for v in speeds):
        console.print("[red]error:[/red] speeds are within 0..500 km/h")
        return 2
    conditions = [args.condition] if args.condition else list(RAIL_CONDITIONS)
    data = peaks(params, conditions, speeds)
    if args.png:
        where = plot(params, conditions, speeds, data, Path(args.png))
        console.print(f"wrote {where}")
    if args.json:
        print(json.dumps(data))
        return 0
    table = Table(title=f"Creep-curve peaks: {params.name}", box=box.SIMPLE_HEAD,
                  padding=(0, 0, 0, 1), show_edge=False)
    table.add_column("km/h", justify="right")
    for name in conditions:
        table.add_column(f"{name}\npeak mu", justify="right", min_width=len(name))
        table.add_column("slip\nm/s", justify="right")
    for k, v in enumerate(speeds):
        row = [f"{v:g}"]
        for name in conditions:
            p = data["conditions"][name][k]
            row += [f"{p['mu_peak']:.3f}", f"{p['creep_at_peak_mps']:.2f}"]
        table.add_row(*row)
    out = Console()
    out.print(table)
    out.print("peak mu: the most friction an axle can use (creep force / axle load); slip: "
              "the slip velocity at that peak")
    return 0
