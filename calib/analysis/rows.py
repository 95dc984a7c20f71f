"""The store edge of the analysis: the tidy frame of stored rows every statistic is computed from.

:func:`load_rows` reads a campaign store (SQLite, :class:`calib.store.database.Store`) into one row per
(trial, retrieval) with the instance's columns (family, params, size label, class parameters,
projected dimension m, JL point count n) and every metric field of :data:`calib.metrics.FIELDS`
expanded into its own column. Everything downstream (:mod:`calib.analysis.cells`,
:mod:`calib.analysis.tables`) is a pure function of that frame.
"""

from __future__ import annotations

import json

import pandas as pd

from calib.checks import is_integer
from calib.errors import InputError
from calib.metrics import FIELDS
from calib.solvers.result import FORMER_STATUSES
from calib.store.database import Store
from calib.store.sqlite import DAMAGED_FIX


def _size_keys(family: str, params: dict) -> tuple:
    from calib.families import REGISTRY

    return REGISTRY[family].size_keys if family in REGISTRY else tuple(sorted(params))


def _size_label(family: str, params: dict) -> str:
    from calib.families.base import size_label

    return size_label(_size_keys(family, params), params)


def _class_params(family: str, params: dict) -> str:
    keys = set(_size_keys(family, params))
    return json.dumps({key: value for key, value in params.items() if key not in keys}, sort_keys=True)


def load_rows(store: Store) -> pd.DataFrame:
    """Tidy table: one row per (trial, retrieval) with instance columns and every metric field.

    Rows that calib could not have written (metrics or parameters that are not JSON objects, a
    trial without its instance, a k that is not a positive integer) are refused with
    :class:`InputError` naming the store and the trial, never guessed around.
    """
    db = store.db
    try:
        trials = pd.read_sql_query("SELECT * FROM trials ORDER BY trial_id, retrieval", db)
        stored = {row[1] for row in db.execute("PRAGMA table_info(instances)")}
        features = "features" if "features" in stored else "NULL AS features"  # read-only stores before format 4
        instances = pd.read_sql_query(
            f"SELECT instance_id, family, params, idx, kind, projected_dim, n_points, orig_seconds, {features} FROM instances", db)
    except (pd.errors.DatabaseError, ValueError) as error:
        raise InputError(str(store.path), f"cannot read the trial rows: {error}", DAMAGED_FIX) from None
    rows = trials.merge(instances, on="instance_id", how="left", validate="many_to_one")
    _check_rows(rows, store.path)
    metrics = [_json_object(text, store.path, trial, "metrics") if isinstance(text, str) else {}
               for text, trial in zip(rows["metrics"], rows["trial_id"])]
    expanded = pd.DataFrame.from_records([{name: record.get(name) for name in FIELDS} for record in metrics],
                                         index=rows.index, columns=list(FIELDS))
    rows = pd.concat([rows.drop(columns=["metrics"]), expanded], axis=1)
    for column in ("orig_status", "proj_status"):  # a store of format < 4, read without migrating it
        rows[column] = rows[column].replace(FORMER_STATUSES)
    decoded = [_json_object(params, store.path, trial, "instance params") for params, trial in zip(rows["params"], rows["trial_id"])]
    rows["size"] = [_size_label(family, params) for family, params in zip(rows["family"], decoded)]
    rows["class_params"] = [_class_params(family, params) for family, params in zip(rows["family"], decoded)]
    return rows


def _check_rows(rows: pd.DataFrame, path) -> None:
    """Refuse rows whose instance is missing or whose k or replicate is not an integer."""
    orphans = rows["family"].isna()
    if orphans.any():
        trial = rows.loc[orphans, "trial_id"].iloc[0]
        raise InputError(str(path), f"trial {trial} names an instance that is not stored", DAMAGED_FIX)
    for column, minimum in (("k", 1), ("replicate", 0), ("projected_dim", 1), ("n_points", 1)):
        values = rows[column]
        if pd.api.types.is_integer_dtype(values.dtype):  # what SQLite gives for INTEGER cells: one vector test
            good = values >= minimum
        else:
            good = values.map(lambda v: is_integer(v) and v >= minimum)
        if not good.all():
            bad = rows.loc[~good.astype(bool)].iloc[0]
            raise InputError(str(path), f"trial {bad['trial_id']} has {column} = {bad[column]!r}, not an integer >= {minimum}", DAMAGED_FIX)


def _json_object(text, path, trial: str, what: str) -> dict:
    try:
        value = json.loads(text)
    except (TypeError, ValueError):
        value = None
    if not isinstance(value, dict):
        raise InputError(str(path), f"trial {trial}: its {what} are not a JSON object", DAMAGED_FIX)
    return value
