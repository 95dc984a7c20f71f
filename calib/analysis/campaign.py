"""A campaign store analysed as the commands read it: its default rule, its searches, its table.

Every reading command (`calib tables`, `calib report`, `calib compare`) decides success with a
predicate and a target ``(delta, confidence)``. The user's options (:class:`PredicateOptions`, built
from the command line by :mod:`calib.commands.options`) override what the store itself states:

- a store written by a k search (``k = {search = ...}``) is read under its search's own
  ``[target]`` (its predicate and its delta and confidence), and the table states the searches'
  verdicts for the searched cells, replayed from the stored trials
  (:func:`calib.sweep.runner.replay_searches`; a search is a pure function of its outcomes, so the
  replay gives the verdicts `calib run` printed);
- any other store gets :func:`calib.analysis.success.default_predicate` of the problem kinds it
  holds, at the default target (delta 0.1 at confidence 0.95).

:func:`analyse_store` is the whole reading: open the store, read its tidy rows
(:func:`calib.analysis.rows.load_rows`, one row per trial and retrieval), resolve the rule, replay
the searches, build the table (:func:`calib.analysis.tables.build_table`). Costs: one pass over the
stored rows plus, for a search store, one read of each searched trial.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, NamedTuple, Optional, Sequence, Union

from calib.errors import InputError

if TYPE_CHECKING:
    import pandas as pd

    from calib.analysis.success import Predicate
    from calib.sweep.store import Store


@dataclass(frozen=True)
class PredicateOptions:
    """What the user asked of the success rule; None everywhere means "the store's own".

    ``tolerances`` maps :func:`calib.analysis.success.make_predicate`'s tolerance names (gap, obj,
    feas, sign, distortion, cost) to a value or None; ``delta`` is 1 - the target success rate and
    ``confidence`` the level of the lower bounds, both in (0, 1) when given.
    """

    preset: Optional[str] = None
    faster: bool = False
    tolerances: dict = field(default_factory=dict)
    delta: Optional[float] = None
    confidence: Optional[float] = None

    def resolve(self, default: "Union[str, Predicate]" = "usable", stated: Any = None) -> tuple:
        """(predicate, confidence): ``default`` (a preset name or a predicate) when no preset was given,
        ``stated`` (a :class:`calib.analysis.tables.Confidence`, else delta 0.1 at 0.95) where delta or
        confidence were not given."""
        from calib.analysis.success import make_predicate
        from calib.analysis.tables import Confidence

        predicate = make_predicate(self.preset or default, faster=self.faster, **self.tolerances)
        stated = stated or Confidence()
        return predicate, Confidence(delta=stated.delta if self.delta is None else self.delta,
                                     level=stated.level if self.confidence is None else self.confidence)


def search_spec(raw_spec: dict, store_path: Union[str, Path]):
    """The parsed spec of a store written by a k search, else None (also when it no longer parses here)."""
    from calib.sweep.spec import parse_spec

    k = raw_spec.get("sweep", {}).get("k")
    if not (isinstance(k, dict) and "search" in k):
        return None
    try:
        return parse_spec(raw_spec, source=str(store_path))
    except InputError:
        return None


def store_defaults(store: "Store", rows: "pd.DataFrame") -> tuple:
    """(default predicate, default confidence, parsed search spec or None) of a store: a k search's
    own [target], else :func:`calib.analysis.success.default_predicate` of the kinds it holds."""
    from calib.analysis.success import default_predicate
    from calib.analysis.tables import Confidence

    spec = search_spec(store.stored_spec(), store.path)
    if spec is not None:
        return spec.target.predicate, Confidence(spec.target.delta, spec.target.confidence), spec
    return default_predicate(set(rows["kind"]) if not rows.empty else set()), Confidence(), None


def search_verdicts(spec, store: "Store") -> tuple:
    """(the :class:`calib.analysis.tables.SearchVerdicts` a table states for the searched cells, the
    replayed :class:`calib.sweep.runner.SearchCell` list) of the store's k searches."""
    from calib.analysis.tables import Confidence, SearchVerdicts
    from calib.sweep.runner import replay_searches

    cells = replay_searches(spec, store)
    verdicts = {}
    for cell in cells:
        search = cell.search
        verdict = (search.safe_k, search.reason) if search.done and not cell.interrupted else \
            (None, cell.interrupted or "search not finished")
        for ref in cell.refs:
            verdicts[(ref.instance_id, cell.projector.label, cell.retrieval)] = verdict
    target = spec.target
    return SearchVerdicts(target.predicate, Confidence(target.delta, target.confidence), verdicts), cells


class StoreAnalysis(NamedTuple):
    """What :func:`analyse_store` gives: the table (safe-k-table schema), the tidy rows it rests on,
    the stored spec (TOML as a dict) and, for a search store, (parsed spec, replayed cells)."""

    table: dict
    rows: "pd.DataFrame"
    spec: dict
    searched: Optional[tuple]


def analyse_store(path: Union[str, Path], options: PredicateOptions, *, taus: Optional[Sequence[float]] = None,
                  eps: Optional[float] = None, solver_errors: str = "exclude", policy: bool = False) -> StoreAnalysis:
    """The table of the store at ``path`` under ``options`` (defaults from the store: :func:`store_defaults`).

    ``taus`` is the tolerance ladder (one analysis per value), ``eps`` in (0, 1) the distortion at which
    the published bounds are compared, ``solver_errors`` 'exclude' or 'fail', ``policy`` adds the
    policy answer per cell. A store written by a k search states the searches' claims in the
    analysis of their own rule.
    """
    from calib.analysis.tables import build_table, load_rows
    from calib.sweep.store import Store

    if eps is not None and not 0.0 < eps < 1.0:
        raise InputError("--eps", f"must lie in (0, 1), got {eps!r}", "e.g. --eps 0.2")
    store = Store.open_existing(path)
    try:
        rows = load_rows(store)
        default, stated, searched = store_defaults(store, rows)
        predicate, confidence = options.resolve(default, stated)
        verdicts, cells = search_verdicts(searched, store) if searched is not None else (None, None)
        table = build_table(store, predicate, confidence, taus=taus, eps=eps, rows=rows, solver_errors=solver_errors,
                            policy=policy, searches=verdicts)
        spec = store.stored_spec()
    finally:
        store.close()
    return StoreAnalysis(table, rows, spec, (searched, cells) if searched is not None else None)


def target_text(predicate: "Predicate") -> str:
    """``'bound' (feasibility verdict matches, gap <= 1e-06)``: the predicate's name and what it checks."""
    return f"'{predicate.name}' ({predicate.describe()})"


def search_report(spec, cells: list) -> str:
    """The trace and verdict of every k search of a campaign (``cells``: its
    :class:`calib.sweep.runner.SearchCell` list), then the evidence notice."""
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
