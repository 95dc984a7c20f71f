"""One self-contained HTML page for a campaign: notice, tables, laws, figures, timings, spec.

Self-contained: figures are embedded as base64 SVG data URIs (vector: sharp at any zoom) and the
style sheet is inline, so the page needs no network and no other file. Every figure sits in
``<figure id="fig-<id>">`` with the ids of :func:`calib.analysis.plots.figure_ids`; a figure that
would be empty is replaced by a sentence saying why. Figures are drawn for the first (strictest)
analysis of the table; the tables cover every analysis. The page opens with the one-screen answer
of :mod:`calib.analysis.summary` (the same lines `calib tables` prints first); every list of cells
is in numeric order of size.
"""

from __future__ import annotations

import base64
import json
from html import escape

from typing import TYPE_CHECKING, Optional

import pandas as pd

from calib.analysis.plots import Plot, figure_plan
from calib.analysis.predict import report_section
from calib.analysis.summary import entry_order, predicate_text
from calib.analysis.timing import nothing_saved, speedup_at_safe_k

if TYPE_CHECKING:
    from calib.analysis.records import Analysis, Entry, SafeKTable

_STYLE = """
body { font-family: system-ui, sans-serif; margin: 1.5em auto; max-width: 1200px; padding: 0 1em; color: #222; line-height: 1.4; }
h1, h2, h3 { color: #123; }
.notice { border: 2px solid #b36b00; background: #fff4e0; padding: 0.8em 1em; border-radius: 6px; }
.cards { display: grid; grid-template-columns: repeat(auto-fill, minmax(440px, 1fr)); gap: 1em; }
.card { border: 1px solid #c8d3de; border-radius: 8px; padding: 0.6em 0.9em; background: #fbfcfe; }
.card h3 { margin: 0.1em 0 0.4em; font-size: 1em; }
.card p { margin: 0.35em 0; font-size: 0.85em; }
.card .none { color: #8a4b00; }
.muted { color: #666; }
table { border-collapse: collapse; margin: 0.5em 0 1.2em; font-size: 0.8em; max-width: 100%; }
th, td { border: 1px solid #ccc; padding: 0.2em 0.45em; text-align: right; vertical-align: top; white-space: nowrap; }
th { background: #eef2f6; }
td.text, th.text { text-align: left; white-space: normal; overflow-wrap: break-word; }
td.note { text-align: left; white-space: normal; min-width: 12em; max-width: 28em; }
.fold { overflow-x: auto; max-width: 100%; }
figure { margin: 1.5em 0; }
figure img { max-width: 100%; border: 1px solid #ddd; }
.glance td.answer { text-align: left; }
.glance tr.sketch td.answer { color: #1a6b1a; font-weight: 600; }
.glance tr.dont td.answer { color: #8a4b00; }
figcaption { font-size: 0.85em; color: #555; }
pre { background: #f6f8fa; padding: 1em; overflow-x: auto; font-size: 0.8em; }
"""


_NOTE_LENGTH = 40  # text cells longer than this wrap in a note column


def _number(value) -> str:
    """4 significant digits; an exact zero (e.g. a Wilson bound of 0/n) prints as 0."""
    return "0" if value == 0 else f"{value:.4g}"


def _cell(value) -> str:
    if value is None or (isinstance(value, float) and pd.isna(value)):
        return "<td>–</td>"
    if isinstance(value, bool):
        return f"<td>{'yes' if value else 'no'}</td>"
    if isinstance(value, float):
        return f"<td>{_number(value)}</td>"
    if isinstance(value, int):
        return f"<td>{value}</td>"
    text = str(value).replace(",", ", ")  # sizes like rows=60,cols=120 may wrap after a comma
    return f'<td class="{"note" if len(text) > _NOTE_LENGTH else "text"}">{escape(text)}</td>'


def html_table(header: list[str], lines: list[list]) -> str:
    """An HTML table inside a folding wrapper; long texts wrap, numbers right-aligned with 4 digits."""
    head = "".join(f'<th class="text">{escape(name)}</th>' for name in header)
    body = "\n".join("<tr>" + "".join(_cell(value) for value in line) + "</tr>" for line in lines)
    return f'<div class="fold"><table>\n<tr>{head}</tr>\n{body}\n</table></div>'


def _interval(values) -> str:
    return "–" if not values else f"[{values[0]:.3g}, {values[1]:.3g}]"


def _sorted(analysis: Analysis) -> list[Entry]:
    """The analysis's entries in display order: class, size numerically, projector, retrieval."""
    from calib.analysis.tables import class_labels

    label = class_labels(analysis)
    return sorted(analysis.entries, key=lambda entry: entry_order(entry, label(entry)))


def _size_text(analysis: Analysis):
    """entry -> its size, followed by the class parameters that tell its family's classes apart."""
    from calib.analysis.tables import class_labels

    label = class_labels(analysis)
    return lambda entry: " ".join(filter(None, [entry.size, label(entry)]))


def _k_text(k, fraction) -> str:
    if k is None:
        return "none"
    return f"{k} (= m: no reduction)" if fraction >= 1 else f"{k} ({fraction:.0%})"


def _law_text(law: Optional[dict]) -> str:
    if law is None:
        return "no law across sizes"
    from calib.analysis.law import law_formula

    if law["C"] is None:  # the line of calib.analysis.answers.law_line, its bounds' constants records
        return f"No law across sizes: {law['reason']}."
    rules = "; ".join(f"{name} C = {rule.C:.4g}" for name, rule in sorted(law["rules"].items()) if rule.C is not None)
    censored = f" ({law['censored']} censored size(s) not fitted)" if law["censored"] else ""
    return (f"Law ({law['scope']} scope): safe {law_formula(law['a'], law['C'], None)}{censored}; published bounds at "
            f"eps = {law['eps']:g}: {rules}.")


def answer_card(answer: dict) -> str:
    """One class: its safe k per size in both scopes, the policy k, the ladder, the law and the time."""
    title = " ".join(filter(None, [answer["family"], answer["label"]]))
    header = ["size", "m", "instances", "class safe k (k/m)", "these instances"]
    with_policy = any(line["policy_answer"] is not None for line in answer["sizes"])
    header += ["policy k"] if with_policy else []
    lines = []
    for line in answer["sizes"]:
        row = [line["size"], line["m"], line["instances"], _k_text(line["class_safe_k"], line["class_fraction"]),
               _k_text(line["safe_k"], line["fraction"])]
        if with_policy:
            row.append("none" if line["policy_k"] is None else line["policy_k"])
        lines.append(row)
    parts = [f'<div class="card"><h3>{escape(title)} · {escape(answer["projector"])} · {escape(answer["retrieval"])}</h3>',
             html_table(header, lines)]
    refusals = sorted({line["class_reason"] for line in answer["sizes"] if line["class_safe_k"] is None and line["class_reason"]})
    parts += [f'<p class="none">Class: {escape(reason)}.</p>' for reason in refusals[:1]]
    for other in answer["ladder"]:
        values = ", ".join("none" if k is None else str(k) for k in other["safe_k"])
        parts.append(f'<p class="muted">At tau = {other["tau"]:g} (these instances): {escape(values)}.</p>')
    parts.append(f"<p>{escape(_law_text(answer['law']))}</p>")
    time = answer["time"]
    parts.append(f'<p class="{"none" if time.startswith("no saving") else ""}">Time: {escape(time)}.</p></div>')
    return "\n".join(parts)


def entries_table(analysis: Analysis) -> str:
    """One line per cell: the class safe k (the default answer), the safe k for the instances measured,
    solver errors, the transition and the published bounds (at the table's delta) with their ratios."""
    rules = sorted({name for entry in analysis.entries for name in entry.theory.bounds})
    header = ["family", "size", "projector", "retrieval", "m", "n", "instances", "class safe k", "class: why",
              "safe k (these instances)", "safe k / m", "why", "solver errors", "k50", "k50 interval", "k at target",
              "fit note", "eps"]
    header += [f"{rule} k (ratio)" for rule in rules]
    lines = []
    size = _size_text(analysis)
    for entry in _sorted(analysis):
        fit, bounds = entry.transition, entry.theory.bounds
        line = [entry.family, size(entry), entry.projector, entry.retrieval, entry.projected_dim,
                entry.n_points, entry.instances, entry.class_.safe_k, entry.class_.reason, entry.safe_k,
                entry.safe_fraction, entry.safe_k_reason, entry.solver_errors, fit.k50,
                _interval(fit.k50_interval), fit.k_target, fit.reason, entry.theory.eps]
        line += [f"{bounds[rule].k} ({bounds[rule].ratio:.3g}×)" if rule in bounds and bounds[rule].ratio
                 else (bounds[rule].k if rule in bounds else None) for rule in rules]
        lines.append(line)
    return html_table(header, lines)


def laws_table(analysis: Analysis) -> str:
    """One line per class: the fitted laws and the published constants with their ratios."""
    from calib.analysis.tables import class_labels

    label = class_labels(analysis)
    rules = sorted({name for law in analysis.laws for name in law.theory.rules})
    header = ["family", "class", "projector", "retrieval", "safe k: a", "C", "C s.e.", "n range", "residuals",
              "why no law", "k50: a", "k50: C"] + [f"{rule} C (ratio)" for rule in rules]
    lines = []
    for law in analysis.laws:
        safe, k50, theory = law.safe_k_law, law.k50_law, law.theory.rules
        residuals = ", ".join(f"{p.residual:.3g}" for p in safe.points if p.residual is not None)
        n_range = f"[{safe.n_min}, {safe.n_max}]" if safe.n_min is not None else None
        line = [law.family, label(law) or None, law.projector, law.retrieval,
                safe.a, safe.C, safe.C_se, n_range, residuals or None, safe.reason or None, k50.a, k50.C]
        line += [f"{theory[rule].C:.4g}" + (f" ({theory[rule].ratio:.3g}×)" if theory[rule].ratio else "")
                 if rule in theory and theory[rule].C is not None else None for rule in rules]
        lines.append(line)
    return html_table(header, lines)


def grid_table(analysis: Analysis) -> str:
    """Every (cell, k) line of the analysis."""
    header = ["family", "size", "projector", "retrieval", "k", "trials", "successes", "errors", "solver errors",
              "instances", "rate", "Clopper-Pearson lower", "Wilson lower", "passes", "class lower", "class passes",
              "median error", "90% error"]
    size = _size_text(analysis)
    lines = [[entry.family, size(entry), entry.projector, entry.retrieval, point.k, point.trials,
              point.successes, point.errors, point.solver_errors, point.instances, point.rate,
              point.lower_bound, point.wilson_lower, point.passes, point.class_lower_bound,
              point.class_passes, point.error_median, point.error_q90]
             for entry in _sorted(analysis) for point in entry.grid]
    return html_table(header, lines)


def time_verdict(timings: pd.DataFrame, analysis: Analysis) -> str:
    """The plain statement that opens the time section: a saving counts only where it is also usable
    often enough (a policy k), never from a fast but unusable answer."""
    blocks = [(entry, entry.policy) for entry in analysis.entries if entry.policy and entry.policy.k]
    if blocks:
        entry, block = max(blocks, key=lambda item: item[1].speedup or 0.0)
        return (f"{len(blocks)} cell(s) have a policy k (usable and faster end to end in enough trials); the largest "
                f"median speed-up there is {block.speedup:.3g}x ({entry.family} {entry.size}, {entry.projector}, "
                f"{entry.retrieval}, k = {block.k}).")
    if timings.empty or nothing_saved(timings):
        return ("Nothing saved time: at every k of every cell the median end-to-end time was at least the "
                "original's baseline time (speed-up <= 1).")
    return ("No k saves time with a usable answer: some reductions ran faster than the baseline, but never usable "
            "and faster in enough trials to meet the target.")


def policy_table(analysis: Analysis) -> str:
    """One line per cell: its policy k (or the explicit answer that no k saves time)."""
    header = ["family", "size", "projector", "retrieval", "policy k", "median end to end (s)", "baseline (s)",
              "speed-up", "answer"]
    size = _size_text(analysis)
    lines = [[entry.family, size(entry), entry.projector, entry.retrieval, block.k, block.time_median_s,
              block.baseline_median_s, block.speedup, block.answer]
             for entry in _sorted(analysis) if (block := entry.policy)]
    return html_table(header, lines) if lines else "<p>No cell with a solved problem: no policy answer.</p>"


def _figure(plot: Plot) -> str:
    data = base64.b64encode(plot.svg).decode("ascii")
    return (f'<figure id="fig-{escape(plot.fig_id)}"><img alt="{escape(plot.title)}" '
            f'src="data:image/svg+xml;base64,{data}"><figcaption>{escape(plot.title)}. {escape(plot.caption)}</figcaption></figure>')


def figures(table: SafeKTable, analysis: Analysis, timings: pd.DataFrame) -> list[str]:
    """The figures of :func:`calib.analysis.plots.figure_plan`, each or the sentence replacing it."""
    return [_figure(item.draw()) if item.draw is not None else f'<p class="muted">{escape(item.note)}</p>'
            for item in figure_plan(table, analysis, timings)]


def glance_table(table: SafeKTable, analysis: Analysis, timings: pd.DataFrame) -> str:
    """The one-screen answer (:func:`calib.analysis.summary.summary_lines`) as an HTML table."""
    from calib.analysis.summary import answer_table, best_lines, retrieval_note, summary_lines
    from calib.analysis.tables import class_labels

    lines = summary_lines(analysis, timings, class_labels(analysis))
    header, rows, one = answer_table(lines)
    head = "".join(f'<th class="text">{escape(name)}</th>' for name in header)
    note = retrieval_note(lines, one)
    body = []
    for line, values in zip(best_lines(lines), rows):
        css = "sketch" if line["verdict"] == "sketch" else "dont"
        body.append(f'<tr class="{css}">' + "".join(f'<td class="text">{escape(value)}</td>' for value in values[:2])
                    + "".join(f"<td>{escape(value)}</td>" for value in values[2:-1])
                    + f'<td class="answer">{escape(values[-1])}</td></tr>')
    caption = f"<p>{escape(note)}.</p>" if note else ""
    return f'<div class="fold glance">{caption}<table>\n<tr>{head}</tr>\n' + "\n".join(body) + "\n</table></div>"


def retrieval_table(analysis: Analysis) -> str:
    """Per LP class, size and projector holding several retrievals: each retrieval's class safe k, and its
    success rate and median error at the largest tested k below m ("" when no cell holds two retrievals)."""
    cells: dict = {}
    for entry in _sorted(analysis):
        if entry.kind == "lp":
            cells.setdefault((entry.family, entry.size, entry.projector), []).append(entry)
    rows = []
    for (family, size, projector), entries in cells.items():
        if len(entries) < 2:
            continue
        below = [point.k for point in entries[0].grid if point.k < entries[0].projected_dim]
        k = max(below) if below else None
        for entry in entries:
            point = next((point for point in entry.grid if point.k == k), None)
            rows.append([family, size, projector, entry.retrieval, _k_text(entry.class_.safe_k, entry.class_.safe_fraction),
                         "–" if point is None else k, "–" if point is None else f"{point.successes}/{point.trials}",
                         "–" if point is None or point.error_median is None else _number(point.error_median)])
    if not rows:
        return ""
    return ("<h2>Judged on the decision</h2><p>The same projected solves, retrieved two ways. <code>completion</code> "
            "keeps the user's decision variables of the projected solution (coefficients, servings, flows, the signal) "
            "and completes the residual and slack columns exactly, so its point is what a user would take; "
            "<code>basis-lstsq</code> and the other retrievals judge every column. Where completion does not help, "
            "the decision itself is off (a covering LP's projected optimum collapses to buying nothing): "
            "docs/decision.md.</p>"
            + html_table(["class", "size", "projector", "retrieval", "class safe k (k/m)", "largest k < m", "successes",
                          "median error"], rows))


def _frame_table(frame: pd.DataFrame) -> str:
    return html_table(list(frame.columns), frame.astype(object).where(frame.notna(), None).values.tolist())


def _campaign_table(table: SafeKTable) -> str:
    campaign, target = table.campaign, table.target
    return html_table(["field", "value"], [
        ["campaign", campaign.name], ["spec fingerprint", campaign.spec_fingerprint],
        ["root seed", campaign.root_seed], ["code version", table.code_version],
        ["target success rate", target.success_rate], ["confidence", target.confidence],
        ["bound", target.bound], ["class bound", target.class_bound], ["interval", target.interval],
        ["solver errors", target.solver_errors_rule], ["time limits", target.time_limit],
        ["eps of the bounds", table.theory.eps_convention], ["table checksum", table.checksum]])


def build_report(table: SafeKTable, timings: pd.DataFrame, spec: dict) -> str:
    """The HTML text of the report: the answer per class first, then figures, then the detailed tables."""
    from calib.analysis.answers import class_answers
    from calib.analysis.tables import class_labels

    campaign, target = table.campaign, table.target
    first = table.analyses[0]
    taus = [analysis.tau for analysis in table.analyses]
    ladder = ("" if len(taus) < 2 else " The table holds a ladder of tolerances, tau = " +
              ", ".join(f"{tau:g}" for tau in taus if tau is not None) + "; the cards use the strictest and list the others.")
    answers = class_answers(table, first, timings, class_labels(first))
    parts = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>calib report: {escape(str(campaign.name))}</title><style>{_STYLE}</style></head><body>",
        f"<h1>calib report: {escape(str(campaign.name))}</h1>",
        f'<p class="notice"><strong>Read this first.</strong> {escape(table.notice)}</p>',
        "<h2>The answer</h2>",
        f"<p>Per class, size and projector: the class safe k (the smallest tested k whose success rate is at least "
        f"{target.success_rate:g} with {target.confidence:.0%} confidence for the class the instances were drawn "
        f"from), the share k/m of the projected dimension it keeps, the speed-up there (the original solved by its "
        f"fastest method over sketch + projected solve + retrieval, medians) and whether to sketch. "
        f"Success: {escape(predicate_text(first.predicate))}.{escape(ladder)}</p>",
        glance_table(table, first, timings),
        "<h2>Per class</h2>",
        "<p>Each card gives the safe k in both scopes (the class, the default answer; and the instances measured), "
        "the policy k, the other tolerances, the law across sizes and the time verdict.</p>",
        '<div class="cards">', *[answer_card(answer) for answer in answers], "</div>",
    ]
    parts += [f"<p>Left out: {escape(item.family)} ({escape(item.reason)}).</p>" for item in first.excluded]
    parts += [retrieval_table(first)]
    parts += [f"<h2>Figures ({escape(predicate_text(first.predicate))})</h2>"]
    parts += figures(table, first, timings)
    parts += ["<h2>Time against the fair baseline</h2>", f"<p><strong>{escape(time_verdict(timings, first))}</strong></p>",
              "<p>End to end = sketch + projected solve + retrieval (with any extra solves of a repair or a warm "
              "start); the baseline is the original solved by the fastest configured method that reaches its verdict. "
              "Median times in seconds; they vary from run to run and are therefore kept out of the safe-k table "
              "(written apart by <code>calib tables --timings</code>).</p>",
              "<h3>Policy k per cell</h3>", policy_table(first),
              "<h3>Speed-up at the safe k</h3>", _frame_table(speedup_at_safe_k(timings)),
              "<details><summary>Every k</summary>", _frame_table(timings), "</details>"]
    parts.append(report_section([table.to_dict()]))  # calib.analysis.predict reads the plain table
    for analysis in table.analyses:
        parts += [f"<h2>Detailed table: {escape(predicate_text(analysis.predicate))}</h2>",
                  entries_table(analysis), "<h3>Scaling law across sizes</h3>", laws_table(analysis),
                  "<details><summary>Every k of every cell</summary>", grid_table(analysis), "</details>"]
    parts += ["<h2>Campaign</h2>", _campaign_table(table),
              "<h2>Sweep spec</h2>", f"<pre>{escape(json.dumps(spec, indent=2, sort_keys=True))}</pre>",
              f'<p class="notice">{escape(table.notice)}</p>', "</body></html>"]
    return "\n".join(parts) + "\n"
