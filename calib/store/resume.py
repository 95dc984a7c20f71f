"""Which store a spec runs into: resume it, grow it, or refuse (and when to start a new one).

Re-opening with the same spec resumes. A different spec under the same campaign name *grows* the
campaign in the same store when it leaves every stored trial's numbers unchanged
(:func:`growth_problem`: same root seed, same ``[solver]`` settings in force): more replicates,
instances, sizes, k values, projectors, families or retrievals, another k search or ``[target]``.
Trial identities and streams do not depend on the rest of the spec (:mod:`calib.trial`), so every
stored trial is reused and only new ones run; the campaign table then holds the new spec and
``grown_from`` lists the fingerprints before. A change that would alter stored trials is refused
with the reason, unless a new campaign is asked for, which then lives beside it as
``<name>-2.sqlite``, ``-3``... (:func:`locate`). Costs: one read of each candidate store's
campaign table.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path
from typing import Optional

from calib.errors import InputError
from calib.keys import canonical_json
from calib.solvers.settings import solver_settings
from calib.store.reading import campaign_settings, stored_spec_of
from calib.store.sqlite import connect_readonly, open_checked


def store_path(out_dir: str | Path, name: str, number: int) -> Path:
    """``<out>/<name>.sqlite`` for the first campaign of that name, ``<out>/<name>-<number>.sqlite`` after."""
    return Path(out_dir) / (f"{name}.sqlite" if number == 1 else f"{name}-{number}.sqlite")


def stored_fingerprint(path: Path) -> Optional[str]:
    """The spec fingerprint of an existing store (None for an empty file)."""
    try:
        connection, tables = connect_readonly(path)
        try:
            if "campaign" not in tables:
                return None
            row = connection.execute("SELECT value FROM campaign WHERE key = 'fingerprint'").fetchone()
        finally:
            connection.close()
    except sqlite3.DatabaseError:
        raise InputError(str(path), "not a calib store (unreadable SQLite)", "move the file away or choose another --out folder") from None
    return row[0] if row else None


#: spec keys whose change alters the numbers of stored trials, with why
_TRIAL_ALTERING = (("campaign", "root_seed", "every instance and random stream derives from it"),
                   ("solver", None, "every stored solve used the old settings"))


#: the fix shown when a changed spec would alter stored trials
REFUSAL_FIX = ("restore that setting to grow the campaign in place (more replicates, instances, k values, projectors, "
               "families or retrievals reuse every stored trial), pass --new-campaign, or rename the campaign")


def growth_problem(stored: dict, new: dict) -> str:
    """Why running the parsed spec ``new`` into a store of ``stored`` would alter stored trials ("" if it would not).

    >>> growth_problem({"campaign": {"root_seed": 1, "replicates": 6}}, {"campaign": {"root_seed": 1, "replicates": 15}})
    ''
    >>> growth_problem({"campaign": {"root_seed": 1}}, {"campaign": {"root_seed": 2}})
    'campaign.root_seed changes from 1 to 2 (every instance and random stream derives from it)'
    """
    for table, key, why in _TRIAL_ALTERING:
        before, after = stored.get(table, {}), new.get(table, {})
        if key is not None:
            before, after = before.get(key), after.get(key)
        else:  # compare the settings in force, defaults filled in
            before, after = solver_settings(before), solver_settings(after)
        if canonical_json(before) != canonical_json(after):
            name = f"{table}.{key}" if key else f"[{table}]"
            return f"{name} changes from {canonical_json(before)} to {canonical_json(after)} ({why})"
    return ""


def refusal(name: str, problem: str) -> str:
    """The refusal of campaign ``name``: its store holds a spec whose trials ``problem`` would change."""
    return f"campaign {name!r} already exists with a different spec that would change its stored trials: {problem}"


def locate(spec, out_dir: str | Path, new_campaign: bool = False) -> tuple[Path, bool]:
    """Where the store of ``spec`` lives and whether it exists already.

    The store holding the same spec (``<name>.sqlite``, ``<name>-2.sqlite``, ...) is resumed. When
    none does, the newest store whose trials the spec leaves unchanged grows (:func:`growth_problem`);
    when there is none either, this refuses with the reason unless ``new_campaign`` asks for the
    next free ``<name>-N.sqlite`` (which it also does instead of growing).
    """
    number, found = 1, []
    while True:
        path = store_path(out_dir, spec.name, number)
        if not path.exists():
            break
        if stored_fingerprint(path) in (spec.fingerprint, None):
            return path, True
        found.append(path)
        number += 1
    if found and not new_campaign:
        problem = ""
        for candidate in reversed(found):
            problem = growth_problem(_stored_spec_at(candidate), spec.raw)
            if not problem:
                return candidate, True
        raise InputError(str(found[-1]), refusal(spec.name, problem), REFUSAL_FIX)
    return path, False


def _stored_spec_at(path: Path) -> dict:
    connection = open_checked(path)
    try:
        return stored_spec_of(campaign_settings(connection), path)
    finally:
        connection.close()
