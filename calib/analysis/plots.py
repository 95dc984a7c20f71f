"""Figures of a safe-k table (matplotlib, Agg canvas: no display, no pyplot global state), as SVG.

Up to four figures per family, for one analysis (one tolerance) of the table:

- ``success-<family>``: success rate against k, one panel per size and class, one line per
  projector and retrieval, with the two-sided Clopper–Pearson band at the table's confidence, the
  logistic fit, the target rate and the safe k. A panel where no tested k succeeded even once is
  not drawn (it would be an empty frame): the caption lists those sizes, and a family with no
  panel left has no figure, only that sentence (:func:`figure_plan`);
- ``law-<family>``: safe k against n with the fitted law k = a + C ln n (dashed where it
  extrapolates) and the published bounds at the table's eps; one legend entry per class and
  projector (its law in the entry) and one per bound;
- ``speedup-<family>``: error (median of the error metric, or the failure rate when the predicate
  checks no metric) against the speed-up of sketch + projected solve + retrieval over the original
  solve, one point per k, colour = projector and retrieval, marker = size, the safe k ringed; on a
  log axis with errors below :data:`ERROR_FLOOR` drawn at the floor (an exact recovery's 1e-15 has
  no place on a log axis). Not drawn when nothing was timed (point sets have no solve to save);
- ``projectors-<family>`` (families swept with two projectors or more): k50 per projector with its
  interval (over instances when the cell has several), one row per size and retrieval, so projector
  types are compared on the same instances at a glance; ``calib compare`` gives the paired tests.

Figures are SVG (vector: text and lines stay sharp at any zoom) with text kept as text, fonts of
:data:`FONT` points, and stable bytes for equal inputs (no date, a fixed id salt).
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable

import matplotlib
import numpy as np
import pandas as pd
from matplotlib.backends.backend_svg import FigureCanvasSVG
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter
from scipy import special

from calib import theory
from calib.analysis.classnames import class_namer
from calib.analysis.law import law_formula
from calib.analysis.summary import natural_key
from calib.keys import canonical_json
from calib.verdicts.stats import clopper_pearson_interval

if TYPE_CHECKING:
    from calib.analysis.records import Analysis, Entry, SafeKTable, TableTarget

_PANEL = (4.2, 3.2)
#: font size of legends, ticks and panel titles (points)
FONT = 9
#: errors below this are drawn at it on the error axis (log scale)
ERROR_FLOOR = 1e-9
#: marker per size in the error-against-speed-up figure
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*")
#: one colour per published bound, the same in every figure, none of them used for measured data (C0..C9)
BOUND_COLOURS = {"achlioptas": "black", "chi2-union": "dimgray", "dasgupta-gupta": "darkgoldenrod",
                 "frankl-maehara": "darkviolet", "ln-over-eps2": "teal"}


@dataclass(frozen=True)
class Plot:
    """One rendered figure: id (stable, used as HTML anchor), title, caption, SVG bytes."""

    fig_id: str
    title: str
    caption: str
    svg: bytes


def _svg(figure: Figure) -> bytes:
    FigureCanvasSVG(figure)
    buffer = io.BytesIO()
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "calib"}):
        figure.savefig(buffer, format="svg", bbox_inches="tight", metadata={"Date": None, "Creator": None})
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


def _line_label(entry: Entry) -> str:
    return f"{entry.projector} / {entry.retrieval}"


def _families(analysis: Analysis) -> list[str]:
    return sorted({entry.family for entry in analysis.entries})


def _panel_key(name):
    return lambda entry: (natural_key(entry.size), entry.size, name(entry.class_params), entry.n_points)


def panel_texts(analysis: Analysis, family: str) -> dict[str, bool]:
    """Each size (with its class text) of ``family`` -> whether any tested k of any projector succeeded once there."""
    entries = [entry for entry in analysis.entries if entry.family == family]
    name = class_namer([entry.class_params for entry in entries])
    panels: dict[str, bool] = {}
    for entry in sorted(entries, key=_panel_key(name)):
        text = " ".join(filter(None, [entry.size, name(entry.class_params)]))
        panels[text] = panels.get(text, False) or any(point.successes > 0 for point in entry.grid)
    return panels


def empty_panels(analysis: Analysis, family: str) -> list[str]:
    """Sizes (with their class text) of ``family`` where no tested k of any projector succeeded once."""
    return [text for text, drawn in panel_texts(analysis, family).items() if not drawn]


def success_plot(analysis: Analysis, family: str, target: TableTarget) -> Plot:
    """Success vs k for one family (see the module text); panels without a single success are left out."""
    entries = [entry for entry in analysis.entries if entry.family == family]
    name = class_namer([entry.class_params for entry in entries])
    key = _panel_key(name)
    empty = set(empty_panels(analysis, family))
    panels = [panel for panel in sorted({key(entry) for entry in entries})
              if " ".join(filter(None, [panel[1], panel[2]])) not in empty]
    figure, axes = _panels(len(panels), f"{family}: success rate against k ({analysis.predicate.name}, tau = {analysis.tau})")
    colours = {label: f"C{i % 10}" for i, label in enumerate(sorted({_line_label(entry) for entry in entries}))}
    for ax, panel in zip(axes, panels):
        _, size, params, n = panel
        for entry in (e for e in entries if key(e) == panel):
            colour = colours[_line_label(entry)]
            k = np.array([point.k for point in entry.grid], dtype=float)
            successes = np.array([point.successes for point in entry.grid])
            trials = np.array([point.trials for point in entry.grid])
            low, high = clopper_pearson_interval(successes, trials, target.confidence)
            ax.fill_between(k, low, high, color=colour, alpha=0.2, linewidth=0)
            ax.plot(k, successes / trials, "o-", color=colour, markersize=3, label=_line_label(entry))
            fit = entry.transition
            if fit.k50 is not None:
                curve = np.geomspace(k.min(), k.max(), 200)
                ax.plot(curve, special.expit(fit.intercept + fit.slope * np.log(curve)), "--", color=colour, linewidth=1)
            if entry.safe_k is not None:
                ax.axvline(entry.safe_k, color=colour, linestyle=":", linewidth=1)
        ax.axhline(target.success_rate, color="grey", linewidth=0.8)
        _log_x(ax)
        ax.set_ylim(-0.03, 1.03)
        ax.set_title(f"{size} {params} (n = {n})".replace("  ", " "), fontsize=FONT)
        ax.set_xlabel("k")
        ax.set_ylabel("success rate")
        ax.tick_params(labelsize=FONT)
    legend = {}
    for ax in axes:
        for handle, label in zip(*ax.get_legend_handles_labels()):
            legend.setdefault(label, handle)
    figure.legend(legend.values(), legend.keys(), loc="outside lower center", ncols=min(4, max(1, len(legend))), fontsize=FONT)
    caption = (f"Dots: measured success rate; band: two-sided Clopper-Pearson interval at {target.confidence:.0%}; "
               f"dashed: logistic fit on ln k; grey line: target {target.success_rate:g}; dotted: safe k."
               + (f" Not drawn, since no tested k succeeded even once there: {'; '.join(sorted(empty, key=natural_key))}."
                  if empty else ""))
    return Plot(f"success-{family}", f"Success against k: {family}", caption, _svg(figure))


def law_plot(analysis: Analysis, family: str) -> Plot:
    """Safe k vs n with the fitted law and the published bounds for one family."""
    laws = [law for law in analysis.laws if law.family == family]
    name = class_namer([law.class_params for law in laws])
    figure = Figure(figsize=(7.6, 4.4), layout="constrained")
    ax = figure.subplots()
    n_all = [point.n for law in laws for point in law.safe_k_law.points]
    largest_m = max((entry.projected_dim for entry in analysis.entries if entry.family == family), default=None)
    span = np.geomspace(max(2.0, min(n_all) / 2.0), max(n_all) * 2.0, 200)
    for i, law in enumerate(laws):
        colour = f"C{i % 10}"
        fit = law.safe_k_law
        label = f"{law.projector} / {law.retrieval} {name(law.class_params)}".strip()
        measured = [(point.n, point.safe_k) for point in fit.points if point.safe_k is not None]
        formula = "" if fit.a is None else ": " + law_formula(fit.a, fit.C, None)
        if measured:
            ax.plot(*zip(*measured), "o", color=colour, label=f"{label}{formula}")
        if fit.a is not None:
            values = fit.a + fit.C * np.log(span)
            # a law is a statement about k: drawn only where it is one, 1 <= k <= the largest projected dimension
            drawable = (values >= 1.0) & (values <= (largest_m or np.inf))
            inside = drawable & (span >= fit.n_min) & (span <= fit.n_max)
            ax.plot(span[inside], values[inside], "-", color=colour)
            for side in (drawable & (span < fit.n_min), drawable & (span > fit.n_max)):
                ax.plot(span[side], values[side], "--", color=colour)
    eps = laws[0].theory.eps if laws else None
    if eps is not None:
        for name, bound in sorted(theory.bounds_for(laws[0].kind).items()):
            ax.plot(span, bound.k(span, np.asarray(eps)), ":", color=BOUND_COLOURS.get(name, "grey"), label=f"{name} at eps = {eps:g}")
    _log_x(ax)
    ax.set_yscale("log")
    ax.set_xlabel("n (points the JL theory counts)")
    ax.set_ylabel("k")
    ax.tick_params(labelsize=FONT)
    ax.set_title(f"{family}: safe k against n" + ("" if eps is not None else " (no eps: bounds not drawn)"), fontsize=FONT + 1)
    ax.legend(fontsize=FONT, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
    caption = ("Dots: measured safe k per size (the legend gives each class's law); solid: least-squares law "
               "k = a + C ln n over the measured sizes, dashed where it extrapolates, drawn only where "
               "1 <= k <= the largest projected dimension; dotted: published bounds (one colour each, in every figure) "
               "at the eps the table states (" + (laws[0].theory.eps_source if laws else "") + ").")
    return Plot(f"law-{family}", f"Safe k against n: {family}", caption, _svg(figure))


def _speed_points(entry: Entry, metric, timings: pd.DataFrame) -> list[tuple]:
    """(speed-up, error or failure rate, k) per timed k of one entry (point sets: none, no solve)."""
    if entry.kind == "points" or timings is None or timings.empty:
        return []
    times = timings[(timings["family"] == entry.family) & (timings["params"] == canonical_json(entry.params))
                    & (timings["projector"] == entry.projector) & (timings["retrieval"] == entry.retrieval)]
    speed = dict(zip(times["k"], times["speedup"]))
    points = [(speed.get(point.k), point.error_median if metric else 1.0 - point.rate, point.k)
              for point in entry.grid]
    return [(float(x), float(y), k) for x, y, k in points if x is not None and np.isfinite(x) and y is not None]


def _speed_metric(entries: list[Entry]):
    measured = [entry for entry in entries if any(point.error_median is not None for point in entry.grid)]
    return measured[0].error_metric if measured else None


def has_speed_points(analysis: Analysis, family: str, timings: pd.DataFrame) -> bool:
    """Whether the error-against-speed-up figure of ``family`` has a point to draw."""
    entries = [entry for entry in analysis.entries if entry.family == family]
    metric = _speed_metric(entries)
    return any(_speed_points(entry, metric, timings) for entry in entries)


def speedup_plot(analysis: Analysis, family: str, timings: pd.DataFrame) -> Plot:
    """Error vs speed-up for one family, one point per (cell, k): colour = projector / retrieval (and
    class), marker = size; a compact legend of each."""
    entries = [entry for entry in analysis.entries if entry.family == family]
    metric = _speed_metric(entries)
    figure = Figure(figsize=(8.0, 4.4), layout="constrained")
    ax = figure.subplots()
    name = class_namer([entry.class_params for entry in entries])

    def _colour_label(entry: Entry) -> str:
        return f"{entry.projector} / {entry.retrieval} {name(entry.class_params)}".strip()

    colours = {label: f"C{i % 10}" for i, label in enumerate(sorted({_colour_label(entry) for entry in entries}))}
    sizes = sorted({entry.size for entry in entries}, key=natural_key)
    markers = {size: MARKERS[i % len(MARKERS)] for i, size in enumerate(sizes)}
    floor = ERROR_FLOOR if metric else 0.0
    clipped = False
    for entry in entries:
        points = _speed_points(entry, metric, timings)
        if not points:
            continue
        xs, ys, ks = zip(*points)
        ys = [max(y, floor) for y in ys] if metric else list(ys)
        clipped |= metric is not None and any(y <= floor for y in ys)
        colour = colours[_colour_label(entry)]
        ax.plot(xs, ys, "-", color=colour, linewidth=0.8, marker=markers[entry.size], markersize=4)
        for x, y, k in zip(xs, ys, ks):
            if k == entry.safe_k:
                ax.plot([x], [y], "o", markersize=11, markerfacecolor="none", markeredgecolor=colour)
    _log_x(ax)
    if metric:
        ax.set_yscale("log")
        ax.set_ylim(bottom=floor / 2)
    else:
        ax.set_ylim(-0.03, 1.03)
    ax.set_xlabel("speed-up (original solve / sketch + projected solve + retrieval, medians)")
    ax.set_ylabel(f"median |{metric}|" if metric else "failure rate")
    ax.tick_params(labelsize=FONT)
    ax.set_title(f"{family}: error against speed-up", fontsize=FONT + 1)
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], color=colour, linewidth=2, label=label) for label, colour in colours.items()]
    handles += [Line2D([], [], color="grey", linestyle="none", marker=marker, label=size) for size, marker in markers.items()]
    ax.legend(handles=handles, fontsize=FONT, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0)
    caption = ("One point per tested k (colour: projector and retrieval; marker: size); the ringed point is the safe k. "
               + (f"Errors below {ERROR_FLOOR:g} (exact up to solver tolerance) are drawn at {ERROR_FLOOR:g}. " if clipped else "")
               + "Timings vary from run to run.")
    return Plot(f"speedup-{family}", f"Error against speed-up: {family}", caption, _svg(figure))


def _compares_projectors(analysis: Analysis, family: str) -> bool:
    """Two projectors or more in the family, and at least one fitted k50 to draw."""
    entries = [entry for entry in analysis.entries if entry.family == family]
    return len({entry.projector for entry in entries}) > 1 and any(entry.transition.k50 for entry in entries)


def projectors_plot(analysis: Analysis, family: str, target: TableTarget) -> Plot:
    """k50 per projector with its interval, one row per (size, class, retrieval) of one family."""
    entries = [entry for entry in analysis.entries if entry.family == family]
    name = class_namer([entry.class_params for entry in entries])
    rows = sorted({(entry.n_points, entry.size, name(entry.class_params), entry.retrieval) for entry in entries})
    projectors = sorted({entry.projector for entry in entries})
    figure = Figure(figsize=(7.2, 0.9 + 0.5 * len(rows) * max(1, len(projectors)) / 2.0), layout="constrained")
    ax = figure.subplots()
    step = 0.8 / max(1, len(projectors))
    missing = 0
    for row, (n, size, params, retrieval) in enumerate(rows):
        for index, projector in enumerate(projectors):
            match = [e for e in entries if (e.n_points, e.size, name(e.class_params), e.retrieval, e.projector)
                     == (n, size, params, retrieval, projector)]
            fit = match[0].transition if match else None
            y = row - 0.4 + step * (index + 0.5)
            if fit is None or fit.k50 is None:
                missing += bool(match)
                continue
            low, high = fit.k50_interval
            ax.errorbar([fit.k50], [y], xerr=[[fit.k50 - low], [high - fit.k50]], fmt="o", markersize=4,
                        color=f"C{index}", capsize=2, label=projector)
    ax.set_yticks(range(len(rows)), [" ".join(filter(None, [size, params, retrieval])) for _, size, params, retrieval in rows], fontsize=FONT)
    ax.invert_yaxis()
    _log_x(ax)
    ax.set_xlabel("k50 (fitted k at 50% success)")
    ax.set_title(f"{family}: k50 per projector", fontsize=FONT + 1)
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        unique = dict(zip(labels, handles))  # one legend entry per projector
        figure.legend(unique.values(), unique.keys(), loc="outside lower center", ncols=len(unique), fontsize=FONT)
    caption = (f"Dot: k50 of the logistic fit; bar: its interval at {target.confidence:.0%} (over instances when the "
               "cell has several). Cells whose outcomes separate completely have no k50 and are not drawn"
               + (f" ({missing} here)" if missing else "") + ". `calib compare` tests the differences paired on the same instances.")
    return Plot(f"projectors-{family}", f"k50 per projector: {family}", caption, _svg(figure))


@dataclass(frozen=True)
class Planned:
    """One figure to draw (``draw`` makes it) or, with ``draw`` None, a sentence saying why it is not drawn."""

    fig_id: str
    draw: Callable[[], Plot] | None
    note: str = ""


def figure_plan(table: SafeKTable, analysis: Analysis, timings: pd.DataFrame) -> list[Planned]:
    """Every figure of one analysis in order, or the sentence replacing it (module text)."""
    plan = []
    for family in _families(analysis):
        if not any(panel_texts(analysis, family).values()):
            plan.append(Planned(f"success-{family}", None,
                                f"{family}: no success at any tested k, at any size, with any projector: no success "
                                f"figure (the class does not reduce under this predicate)."))
        else:
            plan.append(Planned(f"success-{family}", lambda family=family: success_plot(analysis, family, table.target)))
        plan.append(Planned(f"law-{family}", lambda family=family: law_plot(analysis, family)))
        if has_speed_points(analysis, family, timings):
            plan.append(Planned(f"speedup-{family}", lambda family=family: speedup_plot(analysis, family, timings)))
        else:
            kind = next(entry.kind for entry in analysis.entries if entry.family == family)
            why = "a point set has no solve to save" if kind == "points" else "nothing was timed"
            plan.append(Planned(f"speedup-{family}", None, f"{family}: no error-against-speed-up figure ({why})."))
        if _compares_projectors(analysis, family):
            plan.append(Planned(f"projectors-{family}", lambda family=family: projectors_plot(analysis, family, table.target)))
    return plan


def figure_ids(table: SafeKTable, analysis: Analysis, timings: pd.DataFrame) -> list[str]:
    """Ids of every figure :func:`all_plots` draws for ``analysis``."""
    return [item.fig_id for item in figure_plan(table, analysis, timings) if item.draw is not None]


def all_plots(table: SafeKTable, analysis: Analysis, timings: pd.DataFrame) -> list[Plot]:
    """Every figure of one analysis, in :func:`figure_ids` order."""
    return [item.draw() for item in figure_plan(table, analysis, timings) if item.draw is not None]
