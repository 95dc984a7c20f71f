"""A campaign store analysed as the commands read it: its default rule, its searches, its table.

Every reading command (`calib tables`, `calib report`, `calib compare`) decides success with a
predicate and a target ``(delta, confidence)``. The user's options (:class:`PredicateOptions`, built
from the command line by :mod:`calib.commands.options`) override what the store itself states:

- a store written by a k search (``k = {search = ...}``) is read under its search's own
  ``[target]`` (its predicate and its delta and confidence, read back by
  :func:`calib.verdicts.target.stored_target` without validating the rest of the spec), and the
  table states the searches' verdicts for the searched cells, replayed from the stored trials by
  the caller's ``replay`` (the commands pass the engine's replay: a search is a pure function of its
  outcomes, so the replay gives the verdicts `calib run` printed; the analysis never imports the
  engine);
- any other store gets :func:`calib.verdicts.success.default_predicate` of the problem kinds it
  holds, at the default target (delta 0.1 at confidence 0.95).

:func:`analyse_store` is the whole reading: open the store, read its tidy rows
(:func:`calib.analysis.rows.load_rows`, one row per trial and retrieval), resolve the rule, replay
the searches, build the table (:func:`calib.analysis.tables.build_table`). Costs: one pass over the
stored rows plus, for a search store, one read of each searched trial.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, NamedTuple, Optional, Sequence, Union

from calib.errors import InputError

if TYPE_CHECKING:
    import pandas as pd

    from calib.store.database import Store
    from calib.verdicts.success import Predicate
    from calib.verdicts.target import SearchTarget


@dataclass(frozen=True)
class PredicateOptions:
    """What the user asked of the success rule; None everywhere means "the store's own".

    ``tolerances`` maps :func:`calib.verdicts.success.make_predicate`'s tolerance names (gap, obj,
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
        ``stated`` (a :class:`calib.verdicts.saferule.Confidence`, else delta 0.1 at 0.95) where delta or
        confidence were not given."""
        from calib.verdicts.saferule import Confidence
        from calib.verdicts.success import make_predicate

        predicate = make_predicate(self.preset or default, faster=self.faster, **self.tolerances)
        stated = stated or Confidence()
        return predicate, Confidence(delta=stated.delta if self.delta is None else self.delta,
                                     level=stated.level if self.confidence is None else self.confidence)


def store_defaults(store: "Store", rows: "pd.DataFrame") -> tuple:
    """(default predicate, default confidence, the k search's :class:`calib.verdicts.target.SearchTarget`
    or None) of a store: a k search's own [target] (:func:`calib.verdicts.target.stored_target`), else
    :func:`calib.verdicts.success.default_predicate` of the kinds it holds."""
    from calib.verdicts.saferule import Confidence
    from calib.verdicts.success import default_predicate
    from calib.verdicts.target import stored_target

    target = stored_target(store.stored_spec())
    if target is not None:
        return target.predicate, Confidence(target.delta, target.confidence), target
    return default_predicate(set(rows["kind"]) if not rows.empty else set()), Confidence(), None


class SearchReplay(NamedTuple):
    """A store's k searches replayed from its stored trials: the parsed spec that ran them
    (:class:`calib.sweep.spec.Spec`) and one replayed cell per searched (size, projector, retrieval)
    (:class:`calib.sweep.runner.SearchCell`: ``search``, ``refs``, ``projector``, ``retrieval``,
    ``interrupted``, read here by attribute only)."""

    spec: Any
    cells: list


#: what :func:`analyse_store` asks for a search store: the open store -> its replayed searches, or
#: None when they cannot be replayed (a stored spec that no longer parses here)
Replay = Callable[["Store"], Optional[SearchReplay]]


def search_verdicts(target: "SearchTarget", cells: Sequence[Any]):
    """The :class:`calib.analysis.tables.SearchVerdicts` a table states for the searched cells:
    (instance id, projector label, retrieval) -> (safe k or None, reason) of each replayed cell, under
    the search's ``target``. Costs: O(cells x instances)."""
    from calib.analysis.tables import SearchVerdicts
    from calib.verdicts.saferule import Confidence

    verdicts = {}
    for cell in cells:
        search = cell.search
        verdict = (search.safe_k, search.reason) if search.done and not cell.interrupted else \
            (None, cell.interrupted or "search not finished")
        for ref in cell.refs:
            verdicts[(ref.instance_id, cell.projector.label, cell.retrieval)] = verdict
    return SearchVerdicts(target.predicate, Confidence(target.delta, target.confidence), verdicts)


class StoreAnalysis(NamedTuple):
    """What :func:`analyse_store` gives: the table (safe-k-table schema), the tidy rows it rests on,
    the stored spec (TOML as a dict) and, for a search store whose searches replayed, the
    :class:`SearchReplay`."""

    table: dict
    rows: "pd.DataFrame"
    spec: dict
    searched: Optional[SearchReplay]


def analyse_store(path: Union[str, Path], options: PredicateOptions, *, taus: Optional[Sequence[float]] = None,
                  eps: Optional[float] = None, solver_errors: str = "exclude", policy: bool = False,
                  replay: Optional[Replay] = None) -> StoreAnalysis:
    """The table of the store at ``path`` under ``options`` (defaults from the store: :func:`store_defaults`).

    ``taus`` is the tolerance ladder (one analysis per value), ``eps`` in (0, 1) the distortion at which
    the published bounds are compared, ``solver_errors`` 'exclude' or 'fail', ``policy`` adds the
    policy answer per cell. A store written by a k search states the searches' claims (replayed by
    ``replay``; without one, or when it gives None, the table states none) in the analysis of their
    own rule.
    """
    from calib.analysis.rows import load_rows
    from calib.analysis.tables import build_table
    from calib.store.database import Store

    if eps is not None and not 0.0 < eps < 1.0:
        raise InputError("--eps", f"must lie in (0, 1), got {eps!r}", "e.g. --eps 0.2")
    store = Store.open_existing(path)
    try:
        rows = load_rows(store)
        default, stated, target = store_defaults(store, rows)
        predicate, confidence = options.resolve(default, stated)
        searched = replay(store) if target is not None and replay is not None else None
        verdicts = search_verdicts(target, searched.cells) if searched is not None else None
        table = build_table(store, predicate, confidence, taus=taus, eps=eps, rows=rows, solver_errors=solver_errors,
                            policy=policy, searches=verdicts)
        spec = store.stored_spec()
    finally:
        store.close()
    return StoreAnalysis(table, rows, spec, searched)


def target_text(predicate: "Predicate") -> str:
    """``'bound' (feasibility verdict matches, gap <= 1e-06)``: the predicate's name and what it checks."""
    return f"'{predicate.name}' ({predicate.describe()})"
