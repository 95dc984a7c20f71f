"""The shipped atlas: safe-k answers for other tools, read from a table file or the atlas.

The atlas is the safe-k tables that ``make atlas`` writes under ``results/atlas/`` from
``instances/atlas.toml`` (every LP, SDP and QP family class, predicate ``bound``),
``instances/atlas-points.toml`` (point sets, predicate ``distortion``),
``instances/atlas-clustering.toml`` (clustering, predicate ``clustering``) and
``instances/atlas-milp.toml`` (integer programs, predicate ``usable``). Each file follows the
table schema ``calib/schemas/safe-k-table.v3.json`` (the contract for tools that read it without
calib) and carries a checksum of its content; :func:`calib.analysis.tablefile.read_table` refuses
a file that is edited, of another format version or not valid.

Which table answers (first that applies):

1. ``table=`` (a path of a table file written by ``calib tables --json``);
2. the environment variable :data:`ENV` (``CALIB_ATLAS``): a table file, or a folder holding
   :data:`ATLAS_FILES`;
3. the shipped atlas, :data:`ATLAS_FILES` in ``results/atlas/`` of the calib checkout.

Among the atlas files, the first whose entries hold the asked family answers. The answer is the
one of ``calib lookup --json`` (:func:`calib.analysis.lookup.answer`): the measured safe k at a
measured size, else the law k = a + C ln n over the uncensored sizes, never above the projected
dimension m. Safe-k tables are empirical evidence on the instances measured, not proofs: check a
policy on your own instances with ``calib probe``.

A rule file (``calib tables STORE --rule FILE``, :mod:`calib.analysis.rulefile`) answers a new
model of a class in one call, :func:`rule_k`: k = max(ceil(f m), ceil(a + C ln n)) with the scope
and confidence the rule holds at, withheld when the model's structure lies outside the ranges the
rule was measured on (:mod:`calib.analysis.fitcheck`).

Cost: reading a table is a JSON parse and one schema validation (milliseconds for the atlas);
nothing heavy (no solver, no pandas) is imported.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Optional, Union

from calib.errors import InputError

#: environment variable naming a table file, or a folder holding the atlas files
ENV = "CALIB_ATLAS"
#: the atlas files, in the order they are asked
ATLAS_FILES = ("safe_k.json", "safe_k-points.json", "safe_k-clustering.json", "safe_k-milp.json")
#: the folder of the shipped atlas (the calib checkout's results/atlas)
SHIPPED = Path(__file__).resolve().parent.parent / "results" / "atlas"


def atlas_paths() -> tuple[list[Path], str]:
    """(existing atlas table files, where they were looked for): :data:`ENV` first, else :data:`SHIPPED`."""
    named = os.environ.get(ENV)
    if named:
        place = Path(named)
        if place.is_file():
            return [place], f"{ENV}={named}"
        return [place / name for name in ATLAS_FILES if (place / name).is_file()], f"{ENV}={named}"
    return [SHIPPED / name for name in ATLAS_FILES if (SHIPPED / name).is_file()], str(SHIPPED / ATLAS_FILES[0])


def _holds(table: dict, family: str) -> bool:
    return any(entry["family"] == family for analysis in table["analyses"] for entry in analysis["entries"])


def table_path(family: str, table: Union[str, Path, None] = None) -> Path:
    """The file of the table answering for ``family``: ``table``, else the atlas file holding the family
    (the first atlas file when none does). Raises :class:`InputError` when no atlas exists (``make
    atlas`` creates it) or a file is invalid."""
    from calib.analysis.tablefile import read_table

    if table is not None:
        return Path(table)
    paths, where = atlas_paths()
    if not paths:
        raise InputError(where, "no atlas is shipped yet",
                         f"`make atlas` creates it; or give a table file (`calib tables STORE --json FILE`) or set {ENV}")
    return next((path for path in paths if _holds(read_table(path), family)), paths[0])


def load_table(family: str, table: Union[str, Path, None] = None) -> dict:
    """The table answering for ``family``: the file ``table``, else the atlas (module text).

    Raises :class:`InputError` when no atlas exists (``make atlas`` creates it) or a file is invalid.
    """
    from calib.analysis.tablefile import read_table

    return read_table(table_path(family, table))


def safe_k(family: str, size: Optional[dict] = None, projector: Optional[str] = None, retrieval: Optional[str] = None,
           scope: str = "class", table: Union[str, Path, None] = None, params: Optional[dict] = None,
           tau: Optional[float] = None, delta: Optional[float] = None, confidence: Optional[float] = None,
           mps: Union[str, Path, None] = None, force: bool = False) -> dict:
    """The safe k for a problem of ``family`` at ``size`` sketched by ``projector``, as ``calib lookup`` answers it.

    Parameters
    ----------
    family : str
        a registered family name as in the table, e.g. ``"lp-quantile"``.
    size : dict
        the size in the family's own keys, e.g. ``{"rows": 2000, "features": 5}``; n (the JL point
        count) and the projected dimension m follow from the family's rules. The fit check compares
        a fresh instance of the class at that size with the instances behind the answer.
    mps : path, optional
        instead of ``size``: the user's LP in an MPS file; its own features are checked against the
        class's (:mod:`calib.analysis.modelfit`), and the answer is withheld (``safe_k`` None,
        ``withheld`` True, the reason in ``flag``) when it lies outside them.
    force : bool
        show the class's answer even for a model outside the measured structure (flagged).
    projector : str, optional
        projector label as in the table, e.g. ``"countsketch"``; default: the table's best projector for
        the class (the smallest safe k, then the largest measured speed-up), the others' safe k in
        ``other_projectors``.
    retrieval : str, optional
        retrieval method, needed when the table has several for the class.
    scope : {"class", "instances"}
        ``"class"`` (default): the answer for the class the measured instances were drawn from;
        ``"instances"``: for the instances measured only.
    table : path, optional
        a table file; default the atlas (module text).
    params : dict, optional
        non-size parameters that pick a class when several share the family (e.g. ``{"rank": 10}``).
    tau, delta, confidence : float, optional
        tolerance (nearest stricter in the table), target 1 - delta and confidence; default the table's.

    Returns
    -------
    dict
        the answer of ``calib lookup --json``: ``answer`` (the one-line answer), ``safe_k`` (None when no
        reduction meets the target, with the reason in ``flag``, never empty then), ``method``,
        ``extrapolated``, ``law``, ``measured_n``, ``speedup`` (the measured speed-up at the answered k
        from the timings file beside the table, or None), ``k_model`` and the rest.
    """
    from calib.analysis import modelfit
    from calib.analysis.lookup import Query, answer, read_timings, size_of, size_of_mps, timings_beside
    from calib.analysis.records import SafeKTable
    from calib.analysis.tablefile import read_table

    import json

    texts = {key: value if isinstance(value, str) else json.dumps(value) for key, value in (params or {}).items()}
    if mps is not None:
        n, m, label = size_of_mps(mps)
        model = modelfit.mps_model(mps)
    elif size is not None:
        n, m, label = size_of(family, size, texts)
        model = modelfit.size_request(family, size, texts)
    else:
        raise InputError("safe_k", "no model given", "give size={...} in the family's keys or mps=FILE")
    query = Query(family, n, projector, retrieval, texts, tau, m, scope, label)
    path = table_path(family, table)
    beside = timings_beside(path)
    return answer(SafeKTable.from_dict(read_table(path)), query, delta=delta, confidence=confidence,
                  timings=read_timings(beside) if beside else [], model=model, force=force)


def rule_k(rules: Union[str, Path], projector: str, mps: Union[str, Path, None] = None, features: Optional[dict] = None,
           n: Optional[int] = None, m: Optional[int] = None, family: Optional[str] = None, retrieval: Optional[str] = None,
           tau: Optional[float] = None, params: Optional[dict] = None, force: bool = False) -> dict:
    """The k for a new model from a rule file (``calib tables --rule FILE``), in one call.

    The model is an MPS file (``mps``: its standard form's features, n = its columns + 1, m = its
    rows), or its ``features`` (a record of :mod:`calib.features`) with ``n`` and ``m``. The class
    is the file's only one with ``projector`` (narrowed by ``family``, class ``params`` such as
    ``{"rank": 10}``, ``retrieval`` and ``tau`` when several match). Its structure is checked against the feature ranges the rule holds for
    (:mod:`calib.analysis.fitcheck`): outside them the k is withheld (None) unless ``force``.

    Returns a dict: ``k`` (None when withheld, when the class has no rule, or when the rule's k
    exceeds m), ``k_fraction_rule`` and ``k_log_rule`` (each rule's k), ``scope``, ``confidence``,
    ``target``, ``statement``, ``fit`` (the fit check), ``extrapolated`` (n outside the measured
    range), ``withheld`` and ``reason``.
    """
    import json

    from calib.analysis.fitcheck import compare
    from calib.analysis.rulefile import read_rules, rule_k as k_of

    document = read_rules(rules)
    if mps is not None:
        from calib.features import instance_features
        from calib.problems.mps import read_mps_standard

        lp = read_mps_standard(mps)
        features, n, m = instance_features("lp", lp), lp.jl_points, int(lp.n_rows)
    if features is None or n is None or m is None:
        raise InputError("rule_k", "no model given", "give mps=FILE, or features with n and m")
    found = [item for item in document["classes"] if item["projector"] == projector
             and (family is None or item["family"] == family) and (retrieval is None or item["retrieval"] == retrieval)
             and (tau is None or item["tau"] == tau)
             and all(item["class_params"].get(key) == value for key, value in (params or {}).items())]
    if len(found) != 1:
        shown = found or document["classes"]
        offered = sorted({f"{item['family']} {json.dumps(item['class_params'], sort_keys=True)} / {item['projector']} / "
                          f"{item['retrieval']} / tau {item['tau']}" for item in shown})
        raise InputError(str(rules), f"{len(found)} classes match projector {projector!r}" +
                         (f" and family {family!r}" if family else ""),
                         "narrow with family, params, retrieval, tau; " + ("matching: " if found else "the file has: ")
                         + "; ".join(offered[:12]) + (f"; ... ({len(offered)} in all)" if len(offered) > 12 else ""))
    rule = found[0]
    fit = compare(features, rule["feature_ranges"])
    answer = k_of(rule, n, m) if rule["scope"] is not None else {"k": None, "k_fraction_rule": None, "k_log_rule": None,
                                                                    "no_reduction": False, "extrapolated": False}
    withheld = fit["verdict"] == "outside" and not force and answer["k"] is not None
    reason = (rule["reason"] if rule["scope"] is None else
              f"withheld: the model lies outside the structure this rule was measured on ({fit['reason']}); measure it: "
              f"`calib probe FILE --find-k` (force=True shows the rule's k)" if withheld else
              "no reduction: the rule's k reaches m" if answer["no_reduction"] else "")
    if rule["scope"] == "instances" and not withheld:
        reason = "; ".join(filter(None, [reason, f"the rule holds for the {rule['unit']}s measured (scope instances): "
                                                 f"for another model it is evidence, not a claim about its class"]))
    return {"family": rule["family"], "class_params": rule["class_params"], "projector": projector,
            "retrieval": rule["retrieval"], "tau": rule["tau"], "n": n, "m": m, "scope": rule["scope"],
            "confidence": document["target"]["confidence"], "target": document["target"]["success_rate"],
            "statement": rule["statement"], "fit": fit, **answer, "k": None if withheld else answer["k"],
            "withheld": withheld, "reason": reason}
