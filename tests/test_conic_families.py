"""SDP, QP and point-set families: determinism, documented sizes, parameter checks, ground truth."""

import dataclasses

import numpy as np
import pytest
import scipy.sparse as sp

from calib.errors import InputError
from calib.families import REGISTRY, get
from calib.families.graphs import edges
from calib.problems.svec import svec_size
from calib.solvers.qp import solve_qp
from calib.solvers.scs_sdp import solve_sdp

SMALL = {
    "sdp-planted": {"order": 6, "constraints": 12},
    "sdp-infeasible": {"order": 6, "constraints": 12},
    "sdp-maxcut": {"nodes": 9, "edge_prob": 0.4},
    "sdp-theta": {"nodes": 9, "edge_prob": 0.4},
    "qp-random": {"vars": 12, "rows": 20, "radius": 1.0},
    "qp-portfolio": {"assets": 16},
    "points-gaussian": {"points": 30, "dim": 40, "clusters": 3, "separation": 2.0},
    "points-subspace": {"points": 30, "dim": 40},
    "points-binary": {"points": 30, "dim": 40, "density": 0.1},
}
RANDOM_ONLY = {"sdp-planted": {"density": 0.4, "rank": 0.5}, "qp-random": {"density": 0.5, "radius": 0.0}}


def _make(name, seed, params):
    family = get(name)
    return family, family.make(family.resolve(params, name), 0, np.random.default_rng(seed))


def _value_bytes(value) -> bytes:
    if sp.issparse(value):
        value = sp.csr_array(value)
        return b"|".join(np.ascontiguousarray(a).tobytes() for a in (value.data, value.indices, value.indptr))
    if isinstance(value, np.ndarray):
        return value.tobytes()
    if isinstance(value, dict):
        return b"|".join(key.encode() + _value_bytes(item) for key, item in sorted(value.items()))
    if isinstance(value, (tuple, list)):
        return b"|".join(_value_bytes(item) for item in value)
    return repr(value).encode()


def _instance_bytes(instance) -> bytes:
    problem = instance.problem
    fields = b"|".join(_value_bytes(getattr(problem, f.name)) for f in dataclasses.fields(problem))
    return fields + b"#" + _value_bytes(instance.info)


def test_every_conic_family_is_registered_with_its_documentation():
    for name in SMALL:
        family = REGISTRY[name]
        assert family.kind in ("sdp", "qp", "points") and family.description
        assert set(family.param_doc) == set(family.defaults)  # every parameter is documented


@pytest.mark.parametrize("name", sorted(SMALL))
def test_same_seed_gives_identical_bytes(name):
    # docs/robustness.md (Reproducibility): a trial is a pure function of its identity, so one seed gives one
    # instance (common practice: compare the raw bytes).
    params = {**SMALL[name], **RANDOM_ONLY.get(name, {})}
    first, second = _make(name, 11, params)[1], _make(name, 11, params)[1]
    assert _instance_bytes(first) == _instance_bytes(second)
    assert _instance_bytes(_make(name, 12, params)[1]) != _instance_bytes(first)


def test_named_graphs_do_not_depend_on_the_seed():
    params = {"graph": "petersen", "nodes": 10}
    assert _instance_bytes(_make("sdp-theta", 1, params)[1]) == _instance_bytes(_make("sdp-theta", 2, params)[1])


def test_petersen_graph_shape():
    # The Petersen graph: 10 vertices, 15 edges, strongly regular with parameters (10, 3, 0, 1)
    # (Holton & Sheehan, "The Petersen Graph", Cambridge University Press, 1993).
    pairs = edges({"graph": "petersen", "nodes": 10, "edge_prob": 0.5}, np.random.default_rng(0))
    assert pairs.shape == (15, 2) and len({tuple(p) for p in pairs.tolist()}) == 15
    np.testing.assert_array_equal(np.bincount(pairs.ravel(), minlength=10), np.full(10, 3))
    W = np.zeros((10, 10), dtype=int)
    W[pairs[:, 0], pairs[:, 1]] = W[pairs[:, 1], pairs[:, 0]] = 1
    W2 = W @ W
    assert np.all(W2[W == 1] == 0)                  # adjacent vertices: 0 common neighbours
    assert np.all(W2[np.triu(W == 0, 1)] == 1)      # non-adjacent vertices: exactly 1


@pytest.mark.parametrize("name", sorted(SMALL))
def test_projected_dimension_and_point_count_match_the_instance(name):
    family, instance = _make(name, 3, SMALL[name])
    problem, params = instance.problem.validate(), instance.params
    if instance.kind == "sdp":
        assert family.projected_dim(params) == problem.n_rows
        assert family.n_points(params) == svec_size(problem.order) + 1
    elif instance.kind == "qp":
        assert family.projected_dim(params) == problem.n_vars
        finite_bounds = int(np.isfinite(problem.lower).sum() + np.isfinite(problem.upper).sum())
        assert family.n_points(params) == problem.n_rows + finite_bounds + 2
    else:
        assert family.projected_dim(params) == problem.dim
        assert family.n_points(params) == problem.n_points


def test_random_graph_has_exactly_the_requested_edges():
    # Erdős–Rényi G(n, M) (1959): M distinct pairs, here M = round(0.3 * 45) = 14.
    pairs = edges({"graph": "random", "nodes": 10, "edge_prob": 0.3}, np.random.default_rng(4))
    assert pairs.shape == (14, 2) and len({tuple(p) for p in pairs.tolist()}) == 14
    assert np.all(pairs[:, 0] < pairs[:, 1])


@pytest.mark.parametrize("name", ["sdp-planted", "sdp-maxcut", "sdp-theta"])
def test_planted_feasible_sdp_families_solve_to_optimal(name):
    _, instance = _make(name, 5, SMALL[name])
    sdp = instance.problem
    X = instance.info["planted_X"]
    assert np.abs(sdp.residual(X)).max() <= 1e-9 * max(1.0, np.abs(sdp.b).max())  # planted point is feasible
    assert np.linalg.eigvalsh(X)[0] >= -1e-12
    result = solve_sdp(sdp, settings={"eps_abs": 1e-6, "eps_rel": 1e-6})
    assert result.status == "optimal", result.solver_message
    assert result.objective <= sdp.objective(X) + 1e-4 * max(1.0, abs(result.objective))


@pytest.mark.parametrize("name", ["qp-random", "qp-portfolio"])
def test_planted_feasible_qp_families_solve_to_optimal(name):
    _, instance = _make(name, 5, SMALL[name])
    qp = instance.problem
    assert qp.violation(instance.info["planted_x"]) <= 1e-12
    result = solve_qp(qp, options={"eps_abs": 1e-7, "eps_rel": 1e-7} if qp.has_ball else None)
    assert result.status == "optimal", result.solver_message
    assert result.objective <= qp.objective(instance.info["planted_x"]) + 1e-6


def test_point_families_build_valid_distinct_points():
    for name in ("points-gaussian", "points-subspace", "points-binary"):
        _, instance = _make(name, 6, SMALL[name])
        instance.problem.validate()
    # a tight binary case forces redraws of duplicates: C(6, 1) = 6 vectors for 3 points
    _, tight = _make("points-binary", 0, {"points": 3, "dim": 6, "density": 0.1})
    tight.problem.validate()
    np.testing.assert_array_equal(tight.problem.points.sum(axis=1), np.ones(3))


def test_subspace_points_lie_near_the_subspace():
    # x = U z + noise g with E||noise g||^2 = noise^2: residual off span(U) is at most the noise norm.
    _, instance = _make("points-subspace", 8, {"points": 200, "dim": 50, "subspace_dim": 3, "noise": 0.01})
    U, X = instance.info["basis"], instance.problem.points
    residual = X - (X @ U) @ U.T
    assert np.sqrt(np.mean(np.sum(residual**2, axis=1))) <= 0.01


@pytest.mark.parametrize("name, params, field", [
    ("sdp-planted", {"order": 3, "constraints": 7}, "constraints"),
    ("sdp-infeasible", {"order": 3, "constraints": 2, "margin": 0.0}, "margin"),
    ("sdp-theta", {"graph": "petersen", "nodes": 9}, "nodes"),
    ("sdp-maxcut", {"graph": "cycle", "nodes": 2}, "nodes"),
    ("sdp-maxcut", {"graph": "star", "nodes": 5}, "graph"),
    ("qp-random", {"vars": 3, "rows": 2, "ridge": 0.0}, "ridge"),
    ("qp-portfolio", {"assets": 10, "max_weight": 0.05}, "max_weight"),
    ("qp-portfolio", {"assets": 10, "sectors": 2, "sector_cap": 0.3}, "sector_cap"),
    ("points-binary", {"points": 10, "dim": 4, "density": 0.25}, "points"),
    ("points-subspace", {"points": 10, "dim": 4, "subspace_dim": 5}, "subspace_dim"),
])
def test_bad_parameters_name_the_field(name, params, field):
    with pytest.raises(InputError) as error:
        get(name).resolve(params, f"families.{name}")
    assert error.value.where == f"families.{name}.{field}"
