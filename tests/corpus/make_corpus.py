"""Regenerate the binary and derived files of the malformed-input corpus (run from the repository root).

    PYTHONPATH=. python tests/corpus/make_corpus.py

The spec, MPS and misc files are written by hand; this script writes the saved-instance folders
under ``instances/`` (a manifest, its MPS file and an ``.info.npz`` each, checksums matching so that
each case fails on the one flaw it is named after) and the tables under ``tables/`` (a valid
table from a tiny campaign, and variants of it). The output is deterministic; the test suite only
reads these files (tests/test_corpus.py).
"""

from __future__ import annotations

import io
import json
import shutil
import sys
import tempfile
import zipfile
from pathlib import Path

import numpy as np

CORPUS = Path(__file__).resolve().parent


def _npy(array: np.ndarray, allow_pickle: bool = False) -> bytes:
    buffer = io.BytesIO()
    np.lib.format.write_array(buffer, array, allow_pickle=allow_pickle)
    return buffer.getvalue()


def _npz(members: dict, header: dict, pickled: tuple = ()) -> bytes:
    """An arrays-layout archive written member by member (so that it can be wrong on purpose)."""
    from calib.instance_io import _FIXED_TIME

    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        for name, value in sorted(members.items()):
            archive.writestr(zipfile.ZipInfo(f"{name}.npy", date_time=_FIXED_TIME), _npy(value, name in pickled))
        archive.writestr(zipfile.ZipInfo("__meta__.npy", date_time=_FIXED_TIME), _npy(np.array(json.dumps(header))))
    return buffer.getvalue()


def make_instances() -> int:
    from calib.families import get
    from calib.instance_io import save_instance, sha256_hex
    from calib.trial import InstanceRef

    root = CORPUS / "instances"
    shutil.rmtree(root, ignore_errors=True)
    family = get("lp-planted")
    ref = InstanceRef("lp-planted", family.resolve({"rows": 6, "cols": 12}, "corpus"), 0, 5)
    good = save_instance(ref.build(), [ref.key, 5], root / "valid", stem="inst")
    manifest = json.loads(good.read_text())
    layout = {"layout": "calib-arrays/1", "sparse": [], "meta": {}}
    sparse = {"layout": "calib-arrays/1", "sparse": ["M"], "meta": {}}
    variants = {
        "npz_nan": {"info": _npz({"planted_x": np.array([1.0, np.nan])}, layout)},
        "npz_inf": {"info": _npz({"planted_x": np.array([1.0, -np.inf])}, layout)},
        "npz_inconsistent_sparse": {"info": _npz({"M.data": np.ones(3), "M.indices": np.array([0, 5, 9]),
                                                  "M.indptr": np.array([0, 1, 3]), "M.shape": np.array([2, 2])}, sparse)},
        "npz_missing_member": {"info": _npz({"M.data": np.ones(3)}, sparse)},
        "npz_header_without_sparse": {"info": _npz({"a": np.ones(2)}, {"layout": "calib-arrays/1"})},
        "npz_pickled_object": {"info": _npz({"evil": np.array([{"payload": 1}], dtype=object)}, layout, pickled=("evil",))},
        "manifest_path_escape": {"manifest": {"data": "../valid/inst.mps"}},
        "manifest_bad_params": {"manifest": {"params": {**manifest["params"], "rows": "six"}}},
        "manifest_wrong_index_type": {"manifest": {"index": "zero"}},
        "manifest_tampered_mps": {"mps": (root / "valid" / "inst.mps").read_text().replace("ENDATA", "* edited\nENDATA")},
    }
    for name, change in variants.items():
        folder = root / name
        shutil.copytree(root / "valid", folder)
        edited = {**manifest, **change.get("manifest", {})}
        if "info" in change:
            (folder / "inst.info.npz").write_bytes(change["info"])
            edited["info_sha256"] = sha256_hex(change["info"])
        if "mps" in change:
            (folder / "inst.mps").write_text(change["mps"])
        (folder / "inst.json").write_text(json.dumps(edited, indent=2, sort_keys=True) + "\n")
    (root / "manifest_not_json").mkdir()
    (root / "manifest_not_json" / "inst.json").write_text('{"format": "calib-instance/1", "family": ')
    return len(variants) + 1


TABLE_SPEC = """
[campaign]
name = "corpus-table"
root_seed = 11
replicates = 3

[[families]]
name = "lp-planted"
sizes = [{rows = 12, cols = 24}, {rows = 24, cols = 48}]
params = {rank = 4, cost = "nonnegative"}

[sweep]
projectors = ["gaussian"]
k = {fractions = [0.25, 0.5, 1.0]}
"""


def make_tables() -> int:
    from calib.analysis.tablefile import dumps, seal
    from calib.analysis.tables import build_table
    from calib.store.database import Store
    from calib.sweep.runner import run_campaign
    from calib.sweep.spec import parse_spec
    from calib.verdicts.saferule import Confidence
    from calib.verdicts.success import make_predicate

    import tomllib

    root = CORPUS / "tables"
    root.mkdir(exist_ok=True)
    with tempfile.TemporaryDirectory() as folder:
        summary = run_campaign(parse_spec(tomllib.loads(TABLE_SPEC)), folder, inline=True)
        store = Store.open_existing(summary.store_path)
        try:
            table = build_table(store, make_predicate("bound"), Confidence())
        finally:
            store.close()
    (root / "valid.json").write_text(dumps(table))
    tampered = json.loads(dumps(table))
    tampered["analyses"][0]["entries"][0]["grid"][0]["successes"] += 1  # checksum kept: an edit by hand
    (root / "tampered_value.json").write_text(dumps(tampered))
    (root / "wrong_version.json").write_text(dumps(seal({**table, "format_version": 1})))
    (root / "wrong_format.json").write_text(dumps(seal({**table, "format": "someone-else.table"})))
    broken = {key: value for key, value in table.items() if key not in ("notice", "checksum")}
    (root / "schema_violation.json").write_text(dumps(seal(broken)))
    (root / "not_json.json").write_text("safe k = 12 for everything\n")
    (root / "truncated.json").write_text(dumps(table)[:400])
    return 7


if __name__ == "__main__":
    sys.path.insert(0, str(CORPUS.parents[1]))
    print(f"{make_instances()} instance folders, {make_tables()} tables")
