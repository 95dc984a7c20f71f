"""A campaign's k searches as the commands show them: replayed from a store, and their report.

Not a command (it has no ``register``): `calib run` prints :func:`search_report` after a search
campaign, and `calib tables` and `calib report` pass :func:`replay_stored` to
:func:`calib.analysis.campaign.analyse_store`, which states the replayed verdicts in the table. It
sits in the commands layer because it joins the engine (the spec parser and the replay of
:func:`calib.sweep.runner.replay_searches`, the search's trace :func:`calib.sweep.search.trace_lines`)
with the analysis (the evidence notice, the rule's wording), which never import each other
(docs/layers.md). Costs: a replay reads each searched trial once; the report is linear in the
searches' steps.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Optional

from calib.errors import InputError

if TYPE_CHECKING:
    from calib.analysis.campaign import SearchReplay
    from calib.store.database import Store


def replay_stored(store: "Store") -> "Optional[SearchReplay]":
    """The k searches of an open ``store`` written by a k search, replayed from its stored trials
    (:func:`calib.sweep.runner.replay_searches`) under its stored spec; None when the stored spec is
    not a search's or no longer parses here (a plugin missing, a key since renamed)."""
    from calib.analysis.campaign import SearchReplay
    from calib.sweep.runner import replay_searches
    from calib.sweep.spec import parse_spec

    raw_spec = store.stored_spec()
    k = raw_spec.get("sweep", {}).get("k")
    if not (isinstance(k, dict) and "search" in k):
        return None
    try:
        spec = parse_spec(raw_spec, source=str(store.path))
    except InputError:
        return None
    return SearchReplay(spec, replay_searches(spec, store))


def search_report(spec, cells: list) -> str:
    """The trace and verdict of every k search of a campaign (``spec``: its parsed spec; ``cells``: its
    :class:`calib.sweep.runner.SearchCell` list), then the evidence notice."""
    from calib.analysis.campaign import target_text
    from calib.analysis.tables import NOTICE
    from calib.sweep.search import trace_lines
    from calib.wording import fold

    target = spec.target
    lines = [f"k search: smallest k with success rate >= {target.rate:g} under {target_text(target.predicate)}, per cell"]
    for cell in cells:
        lines.append(cell.label + (f" ({cell.interrupted})" if cell.interrupted else ""))
        lines += trace_lines(cell.search, f"success rate >= {target.rate:g}")
    lines.append(NOTICE)
    return fold(lines)
