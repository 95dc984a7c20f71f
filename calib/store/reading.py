"""Reading a store: the campaign settings and stored spec, and the counts commands print.

The campaign table is (key, value) text; :func:`campaign_settings` reads it whole and
:func:`stored_spec_of` decodes the stored spec (the parsed TOML the campaign ran with, canonical
JSON). :func:`count_solver_errors` and :func:`environment_versions` answer two questions of the
trial and environment tables, so no command writes SQL of its own. The trial rows as a frame are
:func:`calib.analysis.rows.load_rows`. Costs: one query each, O(rows read).
"""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path

from calib.errors import InputError
from calib.store.sqlite import DAMAGED_FIX, open_checked


def campaign_settings(db: sqlite3.Connection) -> dict:
    """The campaign table as a dict of text values (empty for a store not yet claimed)."""
    return dict(db.execute("SELECT key, value FROM campaign").fetchall())


def stored_spec_of(settings: dict, path: Path) -> dict:
    """The spec of the campaign settings ``settings`` (the parsed TOML, as stored) of the store at ``path``."""
    try:
        spec = json.loads(settings.get("spec", "{}"))
    except ValueError:
        spec = None
    if not isinstance(spec, dict):
        raise InputError(str(path), "the stored spec is not a JSON object", DAMAGED_FIX)
    return spec


def count_solver_errors(path: Path) -> int:
    """Trials of the store at ``path`` that ran (status ``ok``) but whose projected solve ended in a solver error."""
    connection = open_checked(Path(path))
    try:
        (count,) = connection.execute(
            "SELECT COUNT(DISTINCT trial_id) FROM trials WHERE status = 'ok' "
            "AND json_extract(metrics, '$.proj_status') = 'solver_failed'").fetchone()
    finally:
        connection.close()
    return int(count)


def environment_versions(db: sqlite3.Connection) -> dict[str, str]:
    """env_id -> the versions of that environment (canonical JSON text), for every stored environment."""
    return dict(db.execute("SELECT env_id, versions FROM environments").fetchall())
