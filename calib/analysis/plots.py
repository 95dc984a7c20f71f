"""Figures of a safe-k table (matplotlib, Agg canvas: no display, no pyplot global state).

Three figures per family, for one analysis (one tolerance) of the table:

- ``success-<family>``: success rate against k, one panel per size, one line per projector and
  retrieval, with the two-sided Clopper–Pearson band at the table's confidence, the logistic fit,
  the target rate and the safe k;
- ``law-<family>``: safe k against n with the fitted law k = a + C ln n (dashed where it
  extrapolates) and the published bounds at the table's eps;
- ``speedup-<family>``: error (median of the error metric, or the failure rate when the predicate
  checks no metric) against the speed-up of sketch + projected solve + retrieval over the original
  solve, one point per k, the safe k ringed;
- ``projectors-<family>`` (families swept with two projectors or more): k50 per projector with its
  interval (over instances when the cell has several), one row per size and retrieval, so projector
  types are compared on the same instances at a glance; ``calib compare`` gives the paired tests.
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter
from scipy import special

from calib import theory
from calib.keys import canonical_json
from calib.analysis.stats import clopper_pearson_interval
from calib.analysis.tables import class_namer

_PANEL = (4.2, 3.2)
_DPI = 96
#: one colour per published bound, the same in every figure, none of them used for measured data (C0..C9)
BOUND_COLOURS = {"achlioptas": "black", "chi2-union": "dimgray", "dasgupta-gupta": "darkgoldenrod",
                 "frankl-maehara": "darkviolet", "ln-over-eps2": "teal"}


@dataclass(frozen=True)
class Plot:
    """One rendered figure: id (stable, used as HTML anchor), title, caption, PNG bytes."""

    fig_id: str
    title: str
    caption: str
    png: bytes


def _png(figure: Figure) -> bytes:
    FigureCanvasAgg(figure)
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=_DPI, bbox_inches="tight", metadata={"Software": None})
    return buffer.getvalue()


def _panels(count: int, title: str) -> tuple[Figure, list]:
    columns = min(3, count)
    rows = math.ceil(count / columns)
    figure = Figure(figsize=(_PANEL[0] * columns, _PANEL[1] * rows + 0.4), layout="constrained")
    axes = figure.subplots(rows, columns, squeeze=False).ravel()
    for unused in axes[count:]:
        unused.set_visible(False)
    figure.suptitle(title)
    return figure, list(axes[:count])


def _log_x(ax) -> None:
    """Log-scaled x axis with plain labels at 1, 2, 5 x 10^j and no minor labels."""
    ax.set_xscale("log")
    axis = ax.xaxis
    axis.set_major_locator(LogLocator(subs=(1.0, 2.0, 5.0)))
    axis.set_major_formatter(FuncFormatter(lambda value, _: f"{value:g}"))
    axis.set_minor_formatter(NullFormatter())


def _line_label(entry: dict) -> str:
    return f"{entry['projector']} / {entry['retrieval']}"


def _families(analysis: dict) -> list[str]:
    return sorted({entry["family"] for entry in analysis["entries"]})


def success_plot(analysis: dict, family: str, target: dict) -> Plot:
    """Success vs k for one family (see the module text)."""
    entries = [entry for entry in analysis["entries"] if entry["family"] == family]
    name = class_namer(entries)
    panels = sorted({(entry["n_points"], entry["size"], name(entry["class_params"])) for entry in entries})
    figure, axes = _panels(len(panels), f"{family}: success rate against k ({analysis['predicate']['name']}, tau = {analysis['tau']})")
    colours = {label: f"C{i}" for i, label in enumerate(sorted({_line_label(entry) for entry in entries}))}
    for ax, (n, size, params) in zip(axes, panels):
        for entry in (e for e in entries if (e["n_points"], e["size"], name(e["class_params"])) == (n, size, params)):
            colour = colours[_line_label(entry)]
            k = np.array([point["k"] for point in entry["grid"]], dtype=float)
            successes = np.array([point["successes"] for point in entry["grid"]])
            trials = np.array([point["trials"] for point in entry["grid"]])
            low, high = clopper_pearson_interval(successes, trials, target["confidence"])
            ax.fill_between(k, low, high, color=colour, alpha=0.2, linewidth=0)
            ax.plot(k, successes / trials, "o-", color=colour, markersize=3, label=_line_label(entry))
            fit = entry["transition"]
            if fit["k50"] is not None:
                curve = np.geomspace(k.min(), k.max(), 200)
                ax.plot(curve, special.expit(fit["intercept"] + fit["slope"] * np.log(curve)), "--", color=colour, linewidth=1)
            if entry["safe_k"] is not None:
                ax.axvline(entry["safe_k"], color=colour, linestyle=":", linewidth=1)
        ax.axhline(target["success_rate"], color="grey", linewidth=0.8)
        _log_x(ax)
        ax.set_ylim(-0.03, 1.03)
        ax.set_title(f"{size} {params} (n = {n})", fontsize=9)
        ax.set_xlabel("k")
        ax.set_ylabel("success rate")
    handles, labels = axes[0].get_legend_handles_labels()
    figure.legend(handles, labels, loc="outside lower center", ncols=min(4, max(1, len(labels))), fontsize=7)
    caption = (f"Dots: measured success rate; band: two-sided Clopper-Pearson interval at {target['confidence']:.0%}; "
               f"dashed: logistic fit on ln k; grey line: target {target['success_rate']:g}; dotted: safe k.")
    return Plot(f"success-{family}", f"Success against k: {family}", caption, _png(figure))


def law_plot(analysis: dict, family: str) -> Plot:
    """Safe k vs n with the fitted law and the published bounds for one family."""
    laws = [law for law in analysis["laws"] if law["family"] == family]
    name = class_namer(laws)
    figure = Figure(figsize=(7.6, 4.4), layout="constrained")
    ax = figure.subplots()
    n_all = [point["n"] for law in laws for point in law["safe_k_law"]["points"]]
    largest_m = max((entry["projected_dim"] for entry in analysis["entries"] if entry["family"] == family), default=None)
    span = np.geomspace(max(2.0, min(n_all) / 2.0), max(n_all) * 2.0, 200)
    for i, law in enumerate(laws):
        colour = f"C{i}"
        fit = law["safe_k_law"]
        label = f"{law['projector']} / {law['retrieval']} {name(law['class_params'])}".strip()
        measured = [(point["n"], point["safe_k"]) for point in fit["points"] if point["safe_k"] is not None]
        if measured:
            ax.plot(*zip(*measured), "o", color=colour, label=f"safe k: {label}")
        if fit["a"] is not None:
            values = fit["a"] + fit["C"] * np.log(span)
            # a law is a statement about k: drawn only where it is one, 1 <= k <= the largest projected dimension
            drawable = (values >= 1.0) & (values <= (largest_m or np.inf))
            inside = drawable & (span >= fit["n_min"]) & (span <= fit["n_max"])
            ax.plot(span[inside], values[inside], "-", color=colour, label=f"k = {fit['a']:.3g} + {fit['C']:.3g} ln n")
            for side in (drawable & (span < fit["n_min"]), drawable & (span > fit["n_max"])):
                ax.plot(span[side], values[side], "--", color=colour)
    eps = laws[0]["theory"]["eps"] if laws else None
    if eps is not None:
        for name, bound in sorted(theory.bounds_for(laws[0]["kind"]).items()):
            ax.plot(span, bound.k(span, np.asarray(eps)), ":", color=BOUND_COLOURS.get(name, "grey"), label=f"{name} at eps = {eps:g}")
    _log_x(ax)
    ax.set_yscale("log")
    ax.set_xlabel("n (points the JL theory counts)")
    ax.set_ylabel("k")
    ax.set_title(f"{family}: safe k against n" + ("" if eps is not None else " (no eps: bounds not drawn)"), fontsize=10)
    ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
    caption = ("Dots: measured safe k per size; solid: least-squares law over the measured sizes, dashed where it "
               "extrapolates, drawn only where 1 <= k <= the largest projected dimension; dotted: published bounds "
               "(one colour each, in every figure) at the eps the table states (" +
               (laws[0]["theory"]["eps_source"] if laws else "") + ").")
    return Plot(f"law-{family}", f"Safe k against n: {family}", caption, _png(figure))


def speedup_plot(analysis: dict, family: str, timings: pd.DataFrame) -> Plot:
    """Error vs speed-up for one family, one point per (cell, k)."""
    entries = [entry for entry in analysis["entries"] if entry["family"] == family]
    measured = [entry for entry in entries if any(point["error_median"] is not None for point in entry["grid"])]
    metric = measured[0]["error_metric"] if measured else None
    figure = Figure(figsize=(8.0, 4.4), layout="constrained")
    ax = figure.subplots()
    name = class_namer(entries)

    def _label(entry: dict) -> str:
        return f"{entry['projector']} / {entry['retrieval']} / {entry['size']} {name(entry['class_params'])}".strip()

    labels = sorted({_label(entry) for entry in entries})
    colours = {label: f"C{i % 10}" for i, label in enumerate(labels)}
    for entry in entries:
        label = _label(entry)
        times = timings[(timings["family"] == family) & (timings["params"] == canonical_json(entry["params"]))
                        & (timings["projector"] == entry["projector"]) & (timings["retrieval"] == entry["retrieval"])]
        speed = dict(zip(times["k"], times["speedup"]))
        points = [(speed.get(point["k"]), point["error_median"] if metric else 1.0 - point["rate"], point["k"])
                  for point in entry["grid"]]
        points = [(x, y, k) for x, y, k in points if x is not None and np.isfinite(x) and y is not None]
        if not points:
            continue
        xs, ys, ks = zip(*points)
        ax.plot(xs, ys, "o-", color=colours[label], markersize=3, linewidth=0.8, label=label)
        for x, y, k in points:
            if k == entry["safe_k"]:
                ax.plot([x], [y], "o", markersize=10, markerfacecolor="none", markeredgecolor=colours[label])
    _log_x(ax)
    if metric:
        ax.set_yscale("symlog", linthresh=1e-6)
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("speed-up (original solve / sketch + projected solve + retrieval, medians)")
    ax.set_ylabel(f"median |{metric}|" if metric else "failure rate")
    ax.set_title(f"{family}: error against speed-up", fontsize=10)
    ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
    caption = "One point per swept k; the ringed point is the safe k. Timings vary from run to run."
    return Plot(f"speedup-{family}", f"Error against speed-up: {family}", caption, _png(figure))


def _compares_projectors(analysis: dict, family: str) -> bool:
    """Two projectors or more in the family, and at least one fitted k50 to draw."""
    entries = [entry for entry in analysis["entries"] if entry["family"] == family]
    return len({entry["projector"] for entry in entries}) > 1 and any(entry["transition"]["k50"] for entry in entries)


def projectors_plot(analysis: dict, family: str, target: dict) -> Plot:
    """k50 per projector with its interval, one row per (size, class, retrieval) of one family."""
    entries = [entry for entry in analysis["entries"] if entry["family"] == family]
    name = class_namer(entries)
    rows = sorted({(entry["n_points"], entry["size"], name(entry["class_params"]), entry["retrieval"]) for entry in entries})
    projectors = sorted({entry["projector"] for entry in entries})
    figure = Figure(figsize=(7.2, 0.9 + 0.5 * len(rows) * max(1, len(projectors)) / 2.0), layout="constrained")
    ax = figure.subplots()
    step = 0.8 / max(1, len(projectors))
    missing = 0
    for row, (n, size, params, retrieval) in enumerate(rows):
        for index, projector in enumerate(projectors):
            match = [e for e in entries if (e["n_points"], e["size"], name(e["class_params"]), e["retrieval"], e["projector"])
                     == (n, size, params, retrieval, projector)]
            fit = match[0]["transition"] if match else None
            y = row - 0.4 + step * (index + 0.5)
            if fit is None or fit["k50"] is None:
                missing += bool(match)
                continue
            low, high = fit["k50_interval"]
            ax.errorbar([fit["k50"]], [y], xerr=[[fit["k50"] - low], [high - fit["k50"]]], fmt="o", markersize=4,
                        color=f"C{index}", capsize=2, label=projector)
    ax.set_yticks(range(len(rows)), [" ".join(filter(None, [size, params, retrieval])) for _, size, params, retrieval in rows], fontsize=7)
    ax.invert_yaxis()
    _log_x(ax)
    ax.set_xlabel("k50 (fitted k at 50% success)")
    ax.set_title(f"{family}: k50 per projector", fontsize=10)
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        unique = dict(zip(labels, handles))  # one legend entry per projector
        figure.legend(unique.values(), unique.keys(), loc="outside lower center", ncols=len(unique), fontsize=7)
    caption = (f"Dot: k50 of the logistic fit; bar: its interval at {target['confidence']:.0%} (over instances when the "
               "cell has several). Cells whose outcomes separate completely have no k50 and are not drawn"
               + (f" ({missing} here)" if missing else "") + ". `calib compare` tests the differences paired on the same instances.")
    return Plot(f"projectors-{family}", f"k50 per projector: {family}", caption, _png(figure))


def figure_ids(analysis: dict) -> list[str]:
    """Ids of every figure :func:`all_plots` draws for ``analysis``."""
    ids = []
    for family in _families(analysis):
        ids += [f"{kind}-{family}" for kind in ("success", "law", "speedup")]
        ids += [f"projectors-{family}"] if _compares_projectors(analysis, family) else []
    return ids


def all_plots(table: dict, analysis: dict, timings: pd.DataFrame) -> list[Plot]:
    """Every figure of one analysis, in :func:`figure_ids` order."""
    plots = []
    for family in _families(analysis):
        plots += [success_plot(analysis, family, table["target"]), law_plot(analysis, family),
                  speedup_plot(analysis, family, timings)]
        if _compares_projectors(analysis, family):
            plots.append(projectors_plot(analysis, family, table["target"]))
    return plots
