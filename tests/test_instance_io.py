"""Saving and loading instances: MPS for LPs, the arrays layout, manifests and checksums."""

from __future__ import annotations

import hashlib
import json
import zipfile

import numpy as np
import pytest
import scipy.sparse as sp

from calib.errors import InputError
from calib.families import get
from calib.instance_io import load_arrays, load_instance, problem_bytes, save_arrays, save_instance, saved_manifests
from calib.problems.lp import StandardLP
from calib.problems.mps import mps_text, read_mps, read_mps_standard
from calib.solvers.highs import solve_lp

CASES = [
    ("lp-covering", {"rows": 30, "cols": 12}),
    ("lp-transport", {"sources": 3, "sinks": 4}),
    ("lp-quantile", {"rows": 25, "features": 2}),
    ("lp-basis-pursuit", {"measurements": 15, "length": 40}),
    ("lp-planted", {"rows": 10, "cols": 20}),
    ("netlib", {"name": "scagr25"}),
]


def _make(name, params, seed=3, index=0):
    family = get(name)
    return family.make(family.resolve(params, name), index, np.random.default_rng(seed))


def _dense(A):
    return A.toarray() if sp.issparse(A) else A


@pytest.mark.parametrize("name,params", CASES)
def test_lp_round_trip_is_bit_exact(tmp_path, name, params):
    # common practice: a saved instance must reload to the same doubles (MPS numbers written in
    # Python's shortest round-trip repr, which strtod reads back exactly: IEEE 754 / David Gay)
    instance = _make(name, params)
    manifest_path = save_instance(instance, seed=3, folder=tmp_path)
    loaded, manifest = load_instance(manifest_path)
    before, after = instance.problem, loaded.problem
    assert type(before.A) is type(after.A)
    assert _dense(before.A).tobytes() == _dense(after.A).tobytes()
    assert before.b.tobytes() == after.b.tobytes() and before.c.tobytes() == after.c.tobytes()
    assert before.offset == after.offset and before.name == after.name
    assert (loaded.family, loaded.params, loaded.index, loaded.kind) == (instance.family, instance.params, 0, "lp")
    assert manifest["seed"] == 3
    assert manifest["sha256"] == hashlib.sha256((tmp_path / manifest["data"]).read_bytes()).hexdigest()
    for key, value in instance.info.items():
        np.testing.assert_array_equal(loaded.info[key], value)
    assert problem_bytes("lp", after) == problem_bytes("lp", before)


def test_round_trip_keeps_an_objective_offset_and_empty_columns(tmp_path):
    # the MPS convention: the objective constant is minus the RHS of the objective row
    rng = np.random.default_rng(0)
    A = rng.standard_normal((4, 6)) * 10.0 ** rng.integers(-6, 8, (4, 6))
    A[:, 2] = 0.0
    lp = StandardLP(c=[1 / 3, -2.5, 0.0, 1e-300, 7.0, 1e19], A=A, b=[0.1, -1e19, 0.0, np.pi], offset=-12.75, name="with offset")
    path = tmp_path / "x.mps"
    path.write_text(mps_text(lp))
    back = read_mps_standard(path)
    assert back.A.toarray().tobytes() == A.tobytes()
    assert back.c.tobytes() == lp.c.tobytes() and back.b.tobytes() == lp.b.tobytes()
    assert back.offset == -12.75


def test_written_mps_solves_like_the_original(tmp_path):
    # HiGHS reading our file gives the same optimum as the in-memory model (same solver, two paths)
    lp = _make("lp-covering", {"rows": 40, "cols": 15}).problem
    path = tmp_path / "cover.mps"
    path.write_text(mps_text(lp))
    assert solve_lp(read_mps(path).to_standard().lp).objective == pytest.approx(solve_lp(lp).objective, rel=1e-12)


def test_values_highs_reads_as_infinite_are_refused():
    with pytest.raises(InputError, match="infinite"):
        mps_text(StandardLP(c=[1.0], A=[[1.0]], b=[1e20]))


def test_arrays_layout_round_trip_and_plain_numpy_load(tmp_path):
    # numpy.load with allow_pickle=False (reference library) must read every member
    dense = np.arange(12.0).reshape(3, 4)
    sparse = sp.random_array((5, 7), density=0.4, format="csr", rng=np.random.default_rng(1))
    path = tmp_path / "a.npz"
    save_arrays(path, {"C": dense, "A_1": sparse, "sizes": np.array([3, 4], dtype=np.int32)}, {"cones": {"s": [3]}})
    arrays, meta = load_arrays(path)
    assert meta == {"cones": {"s": [3]}}
    assert arrays["C"].tobytes() == dense.tobytes() and arrays["sizes"].dtype == np.int32
    assert (arrays["A_1"] != sparse).nnz == 0 and arrays["A_1"].shape == (5, 7)
    with np.load(path, allow_pickle=False) as raw:
        assert set(raw.files) == {"__meta__", "C", "sizes", "A_1.data", "A_1.indices", "A_1.indptr", "A_1.shape"}
        assert json.loads(str(raw["__meta__"]))["layout"] == "calib-arrays/1"


def test_arrays_layout_bytes_are_deterministic(tmp_path):
    # common practice: fixed member order and timestamps make equal content give equal bytes
    arrays = {"x": np.linspace(0, 1, 9), "M": sp.eye_array(4, format="csr")}
    first = save_arrays(tmp_path / "1.npz", arrays, {"k": 1})
    second = save_arrays(tmp_path / "2.npz", arrays, {"k": 1})
    assert first == second
    assert (tmp_path / "1.npz").read_bytes() == (tmp_path / "2.npz").read_bytes()


def test_arrays_layout_refuses_nan_and_junk_naming_the_file(tmp_path):
    save_arrays(tmp_path / "nan.npz", {"x": np.array([1.0, np.nan])})
    with pytest.raises(InputError, match="nan.npz"):
        load_arrays(tmp_path / "nan.npz")
    (tmp_path / "junk.npz").write_bytes(b"not a zip")
    with pytest.raises(InputError, match="junk.npz"):
        load_arrays(tmp_path / "junk.npz")
    np.savez(tmp_path / "plain.npz", x=np.ones(2))  # a valid npz without the layout header
    with pytest.raises(InputError, match="plain.npz"):
        load_arrays(tmp_path / "plain.npz")


def test_edited_file_fails_its_checksum(tmp_path):
    manifest_path = save_instance(_make("lp-transport", {"sources": 2, "sinks": 3}), seed=[1, 2], folder=tmp_path)
    data = tmp_path / json.loads(manifest_path.read_text())["data"]
    data.write_text(data.read_text().replace("r0", "r0 ", 1))
    with pytest.raises(InputError, match="checksum"):
        load_instance(manifest_path)


def test_malformed_mps_behind_a_manifest_names_the_file(tmp_path):
    manifest_path = save_instance(_make("lp-transport", {"sources": 2, "sinks": 3}), seed=1, folder=tmp_path, stem="t")
    manifest = json.loads(manifest_path.read_text())
    broken = b"NAME x\nROWS\n N cost\nCOLUMNS\n x0 r5 1\nENDATA\n"
    (tmp_path / "t.mps").write_bytes(broken)
    manifest["sha256"] = hashlib.sha256(broken).hexdigest()
    manifest_path.write_text(json.dumps(manifest))
    with pytest.raises(InputError, match="t.mps"):
        load_instance(manifest_path)


def test_manifest_errors_name_the_manifest(tmp_path):
    (tmp_path / "m.json").write_text("{not json")
    with pytest.raises(InputError, match="m.json"):
        load_instance(tmp_path / "m.json")
    (tmp_path / "n.json").write_text(json.dumps({"format": "calib-instance/1"}))
    with pytest.raises(InputError, match="n.json"):
        load_instance(tmp_path / "n.json")


def test_saved_manifests_lists_a_folder(tmp_path):
    for index in range(3):
        save_instance(_make("lp-planted", {"rows": 4, "cols": 8}, index=index), seed=5, folder=tmp_path)
    paths = saved_manifests(tmp_path)
    assert len(paths) == 3
    assert sorted(load_instance(path)[0].index for path in paths) == [0, 1, 2]
    assert all(zipfile.is_zipfile(p.with_suffix(".info.npz")) for p in paths)
