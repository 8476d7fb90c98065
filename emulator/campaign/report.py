"""A campaign's ``index.html``: the pass/fail matrix and figures against the sweeps.

For each scenario (and trainset) the matrix has the first swept value down and the
second across; the other sweeps and the seeds fall into the cells, each saying how many
of its runs passed. For each check the campaign names under ``plot``, its figure (the
measured number: the extreme of a max or min, a settling or reaching time) is plotted
against each value swept in that scenario, one series a seed, a failed run marked with a
cross. Plots need matplotlib; without it the page says so and keeps the matrix.
"""

from __future__ import annotations

import html
import itertools
from collections import defaultdict
from pathlib import Path

INDEX, PLOTS = "index.html", "plots"
_STYLE = """body{font-family:sans-serif;margin:1.5em}table{border-collapse:collapse;
margin:.5em 0 1.5em}td,th{border:1px solid #999;padding:.3em .6em;text-align:center}
td.pass{background:#cfc}td.fail{background:#fcc}td.none{background:#eee}
img{max-width:45em;display:block;margin:.5em 0}"""


def _num(text: str) -> float | None:
    try:
        return float(text)
    except (TypeError, ValueError):
        return None


def _key(text: str):
    n = _num(text)
    return (0, n, "") if n is not None else (1, 0.0, text)


def write_index(out: Path, name: str, addresses: list[str], rows: list[dict[str, str]],
                checks: list[dict[str, str]], plot: tuple[str, ...], summary: str) -> Path:
    """Write index.html (and plots/) in out; the page's path."""
    groups: dict[tuple[str, str], list[dict[str, str]]] = defaultdict(list)
    for r in rows:
        groups[r["scenario"], r["trainset"]].append(r)
    parts = [f"<!doctype html><meta charset='utf-8'><title>{html.escape(name)}</title>",
             f"<style>{_STYLE}</style><h1>Campaign: {html.escape(name)}</h1>",
             f"<p>{html.escape(summary)}</p>"]
    figures = _figures(out, groups, addresses, checks, plot)
    for (scenario, trainset), runs in sorted(groups.items()):
        swept = [a for a in addresses if any(r.get(a) not in ("", None) for r in runs)]
        parts.append(f"<h2>{html.escape(scenario)} on {html.escape(trainset)}</h2>")
        parts.append(_matrix(runs, swept))
        parts += figures.get((scenario, trainset), [])
    bad = [r for r in rows if r["verdict"] != "pass"]
    if bad:
        parts.append("<h2>Runs that did not pass</h2><table><tr><th>run</th><th>scenario"
                     "</th><th>values</th><th>verdict</th><th>failed checks or reason</th>"
                     "<th>recording</th></tr>")
        for r in sorted(bad, key=lambda r: (len(r["run"]), r["run"])):
            values = ", ".join(f"{a}={r[a]}" for a in addresses if r.get(a)) + (
                f", seed={r['seed']}")
            rec = (f"<a href='{html.escape(r['recording'])}'>{html.escape(r['recording'])}"
                   "</a>") if r.get("recording") else "-"
            parts.append(f"<tr><td>{r['run']}</td><td>{html.escape(r['scenario'])}</td>"
                         f"<td>{html.escape(values)}</td><td>{r['verdict']}</td><td>"
                         f"{html.escape(r['failed_checks'] or r['reason'])}</td>"
                         f"<td>{rec}</td></tr>")
        parts.append("</table>")
    path = out / INDEX
    path.write_text("\n".join(parts) + "\n", encoding="utf-8")
    return path


def _cell(runs: list[dict[str, str]]) -> str:
    if not runs:
        return "<td class='none'>-</td>"
    passed = sum(r["verdict"] == "pass" for r in runs)
    cls = "pass" if passed == len(runs) else "fail"
    title = "runs " + ", ".join(f"{r['run']}: {r['verdict']}" for r in runs)
    return f"<td class='{cls}' title='{html.escape(title)}'>{passed}/{len(runs)} passed</td>"


def _matrix(runs: list[dict[str, str]], swept: list[str]) -> str:
    def values(a: str) -> list[str]:
        return sorted({r.get(a, "") for r in runs}, key=_key)

    out = ["<table>"]
    if not swept:
        out.append(f"<tr><th>all runs</th>{_cell(runs)}</tr>")
    elif len(swept) == 1:
        a = swept[0]
        out.append(f"<tr><th>{html.escape(a)}</th>"
                   + "".join(f"<th>{html.escape(v)}</th>" for v in values(a)) + "</tr>")
        out.append("<tr><th></th>" + "".join(_cell([r for r in runs if r.get(a, "") == v])
                                             for v in values(a)) + "</tr>")
    else:
        down, across = swept[0], swept[1]
        out.append(f"<tr><th>{html.escape(down)} \\ {html.escape(across)}</th>"
                   + "".join(f"<th>{html.escape(v)}</th>" for v in values(across)) + "</tr>")
        for d in values(down):
            out.append(f"<tr><th>{html.escape(d)}</th>" + "".join(
                _cell([r for r in runs if r.get(down, "") == d and r.get(across, "") == c])
                for c in values(across)) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


def _figures(out: Path, groups, addresses: list[str], checks: list[dict[str, str]],
             plot: tuple[str, ...]) -> dict[tuple[str, str], list[str]]:
    """PNG plots of each named check's figure against each swept value; html per group."""
    if not plot:
        return {}
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        note = ["<p>(plots need matplotlib: pip install 'railrig[report]')</p>"]
        return {g: note for g in groups}
    by_run = defaultdict(dict)
    for c in checks:
        by_run[c["digest"]][c["check"]] = c
    (out / PLOTS).mkdir(exist_ok=True)
    html_parts: dict[tuple[str, str], list[str]] = defaultdict(list)
    counter = itertools.count(1)
    for (scenario, trainset), runs in sorted(groups.items()):
        swept = [a for a in addresses if any(_num(r.get(a)) is not None for r in runs)]
        for check, address in itertools.product(plot, swept):
            judged = [(r, by_run[r["digest"]].get(check)) for r in runs]
            points = [(r, c) for r, c in judged if c and _num(c["value"]) is not None]
            # judged, but with no number to show (a speed never reached): on the top edge
            blank = [_num(r.get(address)) for r, c in judged if c and _num(c["value"]) is None]
            if not points:
                continue
            fig, ax = plt.subplots(figsize=(6.4, 3.6))
            for seed in sorted({r["seed"] for r, _ in points}, key=_key):
                mine = sorted(((_num(r.get(address)), _num(c["value"]), c["passed"] == "True")
                               for r, c in points if r["seed"] == seed),
                              key=lambda p: p[0])
                xs = [p[0] for p in mine]
                line = ax.plot(xs, [p[1] for p in mine], "-", alpha=0.5,
                               label=f"seed {seed}")[0]
                for x, y, ok in mine:
                    ax.plot([x], [y], "o" if ok else "x", color=line.get_color(),
                            markersize=6 if ok else 9)
            if blank:
                top = ax.get_ylim()[1]
                ax.plot(blank, [top] * len(blank), "v", color="red", clip_on=False,
                        markersize=9, label="no figure (never reached)")
            ax.set_xlabel(address)
            ax.set_ylabel(check, fontsize=8)
            ax.set_title(f"{scenario}: o passed, x failed", fontsize=9)
            ax.grid(True, alpha=0.3)
            ax.legend(fontsize=8)
            fig.tight_layout()
            name = f"{PLOTS}/{scenario}-{trainset}-{next(counter)}.png"
            fig.savefig(out / name, dpi=90)
            plt.close(fig)
            html_parts[scenario, trainset].append(
                f"<img src='{html.escape(name)}' alt='{html.escape(check)} against "
                f"{html.escape(address)}'>")
    return html_parts
