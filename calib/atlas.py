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


def safe_k(family: str, size: dict, projector: Optional[str] = None, retrieval: Optional[str] = None, scope: str = "class",
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
    from calib.analysis.lookup import Query, answer, read_timings, size_of, timings_beside
    from calib.analysis.tablefile import read_table

    import json

    texts = {key: value if isinstance(value, str) else json.dumps(value) for key, value in (params or {}).items()}
    n, m, label = size_of(family, size, texts)
    query = Query(family, n, projector, retrieval, texts, tau, m, scope, label)
    path = table_path(family, table)
    beside = timings_beside(path)
    return answer(read_table(path), query, delta=delta, confidence=confidence,
                  timings=read_timings(beside) if beside else [])
