"""Shared helpers of the engine tests: tiny specs and the bytes of their safe-k tables."""

from __future__ import annotations

import sqlite3
import textwrap
from pathlib import Path

#: 3 sizes x 2 instances x 5 k x 4 replicates = 120 trials of a few milliseconds each
TINY_SPEC = """
[campaign]
name = "{name}"
root_seed = 424242
replicates = {replicates}

[[families]]
name = "lp-planted"
sizes = [{{rows = 20, cols = 40}}, {{rows = 40, cols = 80}}]
instances = 2
params = {{rank = 6, cost = "nonnegative"}}

[[families]]
name = "lp-farkas"
sizes = [{{rows = 20, cols = 40}}]
instances = 2

[sweep]
projectors = ["gaussian"]
k = [2, 4, 6, 10, 16]
retrievals = ["basis-lstsq"]

[solver]
time_limit_s = 20
"""


def write_spec(folder: Path, name: str = "tiny", replicates: int = 4, text: str = TINY_SPEC) -> Path:
    path = Path(folder) / f"{name}.toml"
    path.write_text(textwrap.dedent(text.format(name=name, replicates=replicates)), encoding="utf-8")
    return path


def table_bytes(store_path: Path) -> bytes:
    """JSON and CSV safe-k tables of a store (default predicate), concatenated."""
    from calib.analysis.tables import build_table, write_table
    from calib.store.database import Store
    from calib.verdicts.saferule import Confidence
    from calib.verdicts.success import make_predicate

    store = Store.open_existing(store_path)
    try:
        table = build_table(store, make_predicate("bound"), Confidence())
    finally:
        store.close()
    out = Path(store_path).with_suffix("")
    json_path, csv_path = out.parent / f"{out.name}.table.json", out.parent / f"{out.name}.table.csv"
    write_table(table, json_path, csv_path)
    return json_path.read_bytes() + b"\n--\n" + csv_path.read_bytes()


def row_counts(store_path: Path) -> tuple[int, int]:
    """(rows, distinct trial ids) in the trials table, read without locking the writer."""
    connection = sqlite3.connect(f"file:{store_path}?mode=ro", uri=True, timeout=5.0)
    try:
        return connection.execute("SELECT COUNT(*), COUNT(DISTINCT trial_id) FROM trials").fetchone()
    finally:
        connection.close()


SEARCH_SPEC = """
[campaign]
name = "{name}"
root_seed = 77
replicates = {replicates}

[[families]]
name = "lp-planted"
sizes = [{{rows = 12, cols = 24}}]
instances = 2
params = {{rank = 3, cost = "nonnegative"}}

[sweep]
projectors = ["gaussian"]
k = {k}
{target}
"""

#: a rank-3 planted LP: k >= 3 keeps it exactly, smaller k cannot; 2 instances, search 1..12
TARGET = '[target]\npreset = "bound"\ntolerance = 1e-6\ndelta = 0.3\nconfidence = 0.9'


def write_search_spec(folder, name="srch", replicates=20, k="{search = {low = 1, high = 12}}", target=TARGET):
    path = folder / f"{name}.toml"
    path.write_text(textwrap.dedent(SEARCH_SPEC.format(name=name, replicates=replicates, k=k, target=target)))
    return path


def trial_ids(store) -> set:
    with sqlite3.connect(store) as db:
        return {row[0] for row in db.execute("SELECT trial_id FROM trials")}


def search_verdicts(summary) -> list:
    """Per searched cell: the safe k and every step (k, trials read, successes, verdict)."""
    return [(cell.search.safe_k, [(s.k, s.trials, s.successes, s.verdict) for s in cell.search.steps])
            for cell in summary.searches]
