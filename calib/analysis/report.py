"""One self-contained HTML page for a campaign: notice, tables, laws, figures, timings, spec.

Self-contained: figures are embedded as base64 PNG data URIs and the style sheet is inline, so the
page needs no network and no other file. Every figure sits in ``<figure id="fig-<id>">`` with the
ids of :func:`calib.analysis.plots.figure_ids`. Figures are drawn for the first (strictest)
analysis of the table; the tables cover every analysis.
"""

from __future__ import annotations

import base64
import json
from html import escape

import pandas as pd

from calib.analysis.plots import Plot, all_plots
from calib.analysis.timing import speedup_at_safe_k

_STYLE = """
body { font-family: system-ui, sans-serif; margin: 2em auto; max-width: 1200px; color: #222; line-height: 1.4; }
h1, h2, h3 { color: #123; }
.notice { border: 2px solid #b36b00; background: #fff4e0; padding: 0.8em 1em; border-radius: 6px; }
table { border-collapse: collapse; margin: 0.5em 0 1.5em; font-size: 0.85em; }
th, td { border: 1px solid #ccc; padding: 0.25em 0.5em; text-align: right; }
th { background: #eef2f6; }
td.text, th.text { text-align: left; }
figure { margin: 1.5em 0; }
figure img { max-width: 100%; border: 1px solid #ddd; }
figcaption { font-size: 0.85em; color: #555; }
pre { background: #f6f8fa; padding: 1em; overflow-x: auto; font-size: 0.8em; }
"""


def _cell(value) -> str:
    if value is None or (isinstance(value, float) and pd.isna(value)):
        return "<td>–</td>"
    if isinstance(value, float):
        return f"<td>{value:.4g}</td>"
    if isinstance(value, (int, bool)):
        return f"<td>{value}</td>"
    return f'<td class="text">{escape(str(value))}</td>'


def html_table(header: list[str], lines: list[list]) -> str:
    """An HTML table; text cells left-aligned, numbers right-aligned with 4 significant digits."""
    head = "".join(f'<th class="text">{escape(name)}</th>' for name in header)
    body = "\n".join("<tr>" + "".join(_cell(value) for value in line) + "</tr>" for line in lines)
    return f"<table>\n<tr>{head}</tr>\n{body}\n</table>"


def _interval(values) -> str:
    return "–" if not values else f"[{values[0]:.3g}, {values[1]:.3g}]"


def _size_text(analysis: dict):
    """entry -> its size, followed by the class parameters that tell its family's classes apart."""
    from calib.analysis.tables import class_labels

    label = class_labels(analysis)
    return lambda entry: " ".join(filter(None, [entry["size"], label(entry)]))


def entries_table(analysis: dict) -> str:
    """One line per cell: the class safe k (the default answer), the safe k for the instances measured,
    solver errors, the transition and the published bounds (at the table's delta) with their ratios."""
    rules = sorted({name for entry in analysis["entries"] for name in entry["theory"]["bounds"]})
    header = ["family", "size", "projector", "retrieval", "m", "n", "instances", "class safe k", "class: why",
              "safe k (these instances)", "safe k / m", "why", "solver errors", "k50", "k50 interval", "k at target",
              "fit note", "eps"]
    header += [f"{rule} k (ratio)" for rule in rules]
    lines = []
    size = _size_text(analysis)
    for entry in analysis["entries"]:
        fit, bounds = entry["transition"], entry["theory"]["bounds"]
        line = [entry["family"], size(entry), entry["projector"], entry["retrieval"], entry["projected_dim"],
                entry["n_points"], entry["instances"], entry["class"]["safe_k"], entry["class"]["reason"], entry["safe_k"],
                entry["safe_fraction"], entry["safe_k_reason"], entry["solver_errors"], fit["k50"],
                _interval(fit["k50_interval"]), fit["k_target"], fit["reason"], entry["theory"]["eps"]]
        line += [f"{bounds[rule]['k']} ({bounds[rule]['ratio']:.3g}×)" if rule in bounds and bounds[rule]["ratio"]
                 else (bounds[rule]["k"] if rule in bounds else None) for rule in rules]
        lines.append(line)
    return html_table(header, lines)


def laws_table(analysis: dict) -> str:
    """One line per class: the fitted laws and the published constants with their ratios."""
    rules = sorted({name for law in analysis["laws"] for name in law["theory"]["rules"]})
    header = ["family", "params", "projector", "retrieval", "safe k: a", "C", "C s.e.", "n range", "residuals",
              "why no law", "k50: a", "k50: C"] + [f"{rule} C (ratio)" for rule in rules]
    lines = []
    for law in analysis["laws"]:
        safe, k50, theory = law["safe_k_law"], law["k50_law"], law["theory"]["rules"]
        residuals = ", ".join(f"{p['residual']:.3g}" for p in safe["points"] if p["residual"] is not None)
        n_range = f"[{safe['n_min']}, {safe['n_max']}]" if safe["n_min"] is not None else None
        line = [law["family"], json.dumps(law["class_params"], sort_keys=True), law["projector"], law["retrieval"],
                safe["a"], safe["C"], safe["C_se"], n_range, residuals or None, safe["reason"], k50["a"], k50["C"]]
        line += [f"{theory[rule]['C']:.4g}" + (f" ({theory[rule]['ratio']:.3g}×)" if theory[rule]["ratio"] else "")
                 if rule in theory else None for rule in rules]
        lines.append(line)
    return html_table(header, lines)


def grid_table(analysis: dict) -> str:
    """Every (cell, k) line of the analysis."""
    header = ["family", "size", "projector", "retrieval", "k", "trials", "successes", "errors", "solver errors",
              "instances", "rate", "Clopper-Pearson lower", "Wilson lower", "passes", "class lower", "class passes",
              "median error", "90% error"]
    size = _size_text(analysis)
    lines = [[entry["family"], size(entry), entry["projector"], entry["retrieval"], point["k"], point["trials"],
              point["successes"], point["errors"], point["solver_errors"], point["instances"], point["rate"],
              point["lower_bound"], point["wilson_lower"], "yes" if point["passes"] else "no", point["class_lower_bound"],
              "yes" if point["class_passes"] else "no", point["error_median"], point["error_q90"]]
             for entry in analysis["entries"] for point in entry["grid"]]
    return html_table(header, lines)


def _figure(plot: Plot) -> str:
    data = base64.b64encode(plot.png).decode("ascii")
    return (f'<figure id="fig-{escape(plot.fig_id)}"><img alt="{escape(plot.title)}" '
            f'src="data:image/png;base64,{data}"><figcaption>{escape(plot.title)}. {escape(plot.caption)}</figcaption></figure>')


def _frame_table(frame: pd.DataFrame) -> str:
    return html_table(list(frame.columns), frame.astype(object).where(frame.notna(), None).values.tolist())


def build_report(table: dict, timings: pd.DataFrame, spec: dict) -> str:
    """The HTML text of the report."""
    campaign, target = table["campaign"], table["target"]
    parts = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        f"<title>calib report: {escape(str(campaign['name']))}</title><style>{_STYLE}</style></head><body>",
        f"<h1>calib report: {escape(str(campaign['name']))}</h1>",
        f'<p class="notice"><strong>Read this first.</strong> {escape(table["notice"])}</p>',
        "<h2>Campaign</h2>",
        html_table(["field", "value"], [
            ["campaign", campaign["name"]], ["spec fingerprint", campaign["spec_fingerprint"]],
            ["root seed", campaign["root_seed"]], ["code version", table["code_version"]],
            ["target success rate", target["success_rate"]], ["confidence", target["confidence"]],
            ["bound", target["bound"]], ["class bound", target["class_bound"]], ["interval", target["interval"]],
            ["solver errors", target["solver_errors_rule"]], ["time limits", target["time_limit"]],
            ["eps of the bounds", table["theory"]["eps_convention"]], ["table checksum", table["checksum"]]]),
    ]
    for analysis in table["analyses"]:
        predicate = ", ".join(f"{key} = {value}" for key, value in analysis["predicate"].items())
        parts += [f"<h2>Safe k: predicate {escape(analysis['predicate']['name'])}, tau = {analysis['tau']}</h2>",
                  f"<p>Predicate: {escape(predicate)}.</p>"]
        parts += [f"<p>Left out: {escape(item['family'])} ({escape(item['reason'])}).</p>" for item in analysis["excluded"]]
        parts += [entries_table(analysis), "<h3>Scaling law across sizes</h3>", laws_table(analysis),
                  "<details><summary>Every k of every cell</summary>", grid_table(analysis), "</details>"]
    first = table["analyses"][0]
    parts += [f"<h2>Figures (predicate {escape(first['predicate']['name'])}, tau = {first['tau']})</h2>"]
    parts += [_figure(plot) for plot in all_plots(table, first, timings)]
    parts += ["<h2>Time saved</h2>",
              "<p>Median times in seconds; they vary from run to run and are therefore kept out of the safe-k table "
              "(written apart by <code>calib tables --timings</code>).</p>",
              "<h3>Speed-up at the safe k</h3>", _frame_table(speedup_at_safe_k(timings)),
              "<details><summary>Every k</summary>", _frame_table(timings), "</details>",
              "<h2>Sweep spec</h2>", f"<pre>{escape(json.dumps(spec, indent=2, sort_keys=True))}</pre>",
              f'<p class="notice">{escape(table["notice"])}</p>', "</body></html>"]
    return "\n".join(parts) + "\n"
