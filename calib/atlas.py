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


def load_table(family: str, table: Union[str, Path, None] = None) -> dict:
    """The table answering for ``family``: the file ``table``, else the atlas (module text).

    Raises :class:`InputError` when no atlas exists (``make atlas`` creates it) or a file is invalid.
    """
    from calib.analysis.tablefile import read_table

    if table is not None:
        return read_table(table)
    paths, where = atlas_paths()
    if not paths:
        raise InputError(where, "no atlas is shipped yet",
                         f"`make atlas` creates it; or give a table file (`calib tables STORE --json FILE`) or set {ENV}")
    tables = [read_table(path) for path in paths]
    return next((found for found in tables if _holds(found, family)), tables[0])


def safe_k(family: str, size: dict, projector: str, retrieval: Optional[str] = None, scope: str = "class",
           table: Union[str, Path, None] = None, params: Optional[dict] = None, tau: Optional[float] = None,
           delta: Optional[float] = None, confidence: Optional[float] = None) -> dict:
    """The safe k for a problem of ``family`` at ``size`` sketched by ``projector``, as ``calib lookup`` answers it.

    Parameters
    ----------
    family : str
        a registered family name as in the table, e.g. ``"lp-quantile"``.
    size : dict
        the size in the family's own keys, e.g. ``{"rows": 2000, "features": 5}``; n (the JL point
        count) and the projected dimension m follow from the family's rules.
    projector : str
        projector label as in the table, e.g. ``"countsketch"``.
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
        the answer of ``calib lookup --json``: ``safe_k`` (None when no reduction meets the target),
        ``method``, ``flag``, ``extrapolated``, ``law``, ``measured_n``, ``k_model`` and the rest.
    """
    from calib.analysis.lookup import Query, answer, size_of

    import json

    texts = {key: value if isinstance(value, str) else json.dumps(value) for key, value in (params or {}).items()}
    n, m, label = size_of(family, size, texts)
    query = Query(family, n, projector, retrieval, texts, tau, m, scope, label)
    return answer(load_table(family, table), query, delta=delta, confidence=confidence)
