"""SDP families in standard form (min <C, X>, <A_i, X> = b_i, X PSD); constraints are projected.

Constraint matrices are stored as svec rows (:mod:`calib.problems.svec`), so a projection T of the m
constraints is T @ A and T @ b. The JL count is n(n+1)/2 + 1 points (:attr:`calib.problems.sdp.StandardSDP.jl_points`).

``sdp-planted``: feasible and bounded. The svec rows of A have N(0, 1) entries (symmetric A_i with
N(0, 1) diagonal and N(0, 1/2) off-diagonal entries); X0 = V V^T / r with V of shape (n, r) is
planted and b = A svec(X0); C = sum_i y0_i A_i + S0 with S0 = G G^T / n + 0.1 I positive definite,
so y0 is strictly dual feasible. Weak duality brackets the optimum: b^T y0 <= opt <= <C, X0>.

``sdp-infeasible``: a vector y0 (unit norm) with sum_i y0_i A_i = S1 = G G^T / n + margin I
(positive definite) and b^T y0 = -margin ||b'|| < 0 (b' the right-hand side before the shift) is
built in: a feasible X would give 0 <= <S1, X> = b^T y0 < 0. C = I.

``sdp-maxcut``: the Goemans–Williamson relaxation of max-cut of a unit-weight graph,
max 1/4 <L, X> s.t. X_ii = 1, stored as min <-L/4, X> (the cut bound is -objective). X = I is feasible.

``sdp-theta``: the Lovász theta SDP, max <J, X> s.t. trace X = 1, X_ij = 0 on edges, stored as
min <-J, X> (theta = -objective). Each edge row has a single svec entry 1, i.e. <A, X> = sqrt(2) X_ij.
X = I / n is feasible. Reference: L. Lovász, "On the Shannon capacity of a graph", IEEE Trans.
Inform. Theory 25(1):1–7, 1979.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from calib.families import graphs
from calib.families.base import Family, fraction, positive_int, register, require
from calib.families.lp_random import _matrix
from calib.problems.sdp import StandardSDP
from calib.problems.svec import smat, svec, svec_index, svec_size

#: Smallest eigenvalue added to the planted dual slack S0 of sdp-planted.
PLANTED_SLACK_FLOOR = 0.1


def _wishart(order: int, floor: float, rng: np.random.Generator) -> np.ndarray:
    """G G^T / n + floor * I with G standard normal (n x n): positive definite, eigenvalues >= floor."""
    G = rng.standard_normal((order, order))
    return G @ G.T / order + floor * np.eye(order)


def _build_planted(params: dict, rng: np.random.Generator):
    order, rows = params["order"], params["constraints"]
    A = _matrix(rows, svec_size(order), params["density"], rng)
    rank = max(1, int(round(params["rank"] * order)))
    V = rng.standard_normal((order, rank))
    X0 = V @ V.T / rank
    b = np.asarray(A @ svec(X0)).ravel()
    y0 = rng.standard_normal(rows) / np.sqrt(rows)
    S0 = _wishart(order, PLANTED_SLACK_FLOOR, rng)
    C = smat(np.asarray(A.T @ y0).ravel()) + S0
    sdp = StandardSDP(C=C, A=A, b=b, name=f"sdp-planted-{order}x{rows}")
    bounds = (float(b @ y0), float(np.sum(C * X0)))
    return sdp, {"feasible": True, "planted_X": X0, "dual_certificate": y0, "dual_slack": S0, "objective_bounds": bounds}


def _build_infeasible(params: dict, rng: np.random.Generator):
    order, rows, margin = params["order"], params["constraints"], params["margin"]
    A = rng.standard_normal((rows, svec_size(order)))
    y0 = rng.standard_normal(rows)
    y0 /= np.linalg.norm(y0)
    pivot = int(np.argmax(np.abs(y0)))
    S1 = _wishart(order, margin, rng)
    others = A.T @ y0 - y0[pivot] * A[pivot]
    A[pivot] = (svec(S1) - others) / y0[pivot]
    b = rng.standard_normal(rows)
    b -= (b @ y0 + margin * np.linalg.norm(b)) * y0
    sdp = StandardSDP(C=np.eye(order), A=A, b=b, name=f"sdp-infeasible-{order}x{rows}")
    return sdp, {"feasible": False, "infeasibility_certificate": y0, "certificate_matrix": S1}


def _diagonal_rows(order: int) -> sp.csr_array:
    """svec rows of e_i e_i^T, i < order: shape (order, n(n+1)/2)."""
    diag = np.arange(order)
    return sp.csr_array((np.ones(order), (diag, svec_index(diag, diag, order))), shape=(order, svec_size(order)))


def _build_maxcut(params: dict, rng: np.random.Generator):
    nodes = params["nodes"]
    pairs = graphs.edges(params, rng)
    laplacian = graphs.laplacian(nodes, pairs)
    sdp = StandardSDP(C=-laplacian / 4.0, A=_diagonal_rows(nodes), b=np.ones(nodes),
                      name=f"sdp-maxcut-{params['graph']}-{nodes}", cut_graph=np.diag(np.diag(laplacian)) - laplacian)
    return sdp, {"feasible": True, "edges": pairs, "planted_X": np.eye(nodes)}


def _build_theta(params: dict, rng: np.random.Generator):
    nodes = params["nodes"]
    pairs = graphs.edges(params, rng)
    size = svec_size(nodes)
    trace_row = sp.csr_array(_diagonal_rows(nodes).sum(axis=0).reshape(1, size))
    n_edges = pairs.shape[0]
    edge_rows = sp.csr_array((np.ones(n_edges), (np.arange(n_edges), svec_index(pairs[:, 0], pairs[:, 1], nodes))), shape=(n_edges, size))
    A = sp.vstack([trace_row, edge_rows], format="csr")
    b = np.r_[1.0, np.zeros(n_edges)]
    sdp = StandardSDP(C=-np.ones((nodes, nodes)), A=A, b=b, name=f"sdp-theta-{params['graph']}-{nodes}")
    return sdp, {"feasible": True, "edges": pairs, "planted_X": np.eye(nodes) / nodes}


def _check_sized(params: dict) -> None:
    positive_int(params, "order")
    positive_int(params, "constraints")
    limit = svec_size(params["order"])
    require(params["constraints"] <= limit, "constraints", f"at most n(n+1)/2 = {limit} independent constraints fit an order-{params['order']} SDP",
            f"set constraints <= {limit} or raise order")


def _check_planted(params: dict) -> None:
    _check_sized(params)
    fraction(params, "density")
    fraction(params, "rank")


def _check_infeasible(params: dict) -> None:
    _check_sized(params)
    fraction(params, "margin", 0.0, 10.0)


_SIZED_DOC = {
    "order": "matrix order n (X is n x n), integer >= 1",
    "constraints": "number of equality constraints m (the projected dimension), 1 <= m <= n(n+1)/2",
}


def _register_random(name: str, description: str, extra_defaults: dict, extra_doc: dict, build, check) -> None:
    """A random SDP sized by (order, constraints): the constraints are the projected rows."""
    register(Family(
        name=name, kind="sdp", description=description, size_keys=("order", "constraints"),
        defaults={"order": None, "constraints": None, **extra_defaults}, param_doc={**_SIZED_DOC, **extra_doc},
        build=build, projected_dim=lambda p: p["constraints"], n_points=lambda p: StandardSDP.jl_points_for(p["order"]), check=check,
    ))


def _register_graph(name: str, description: str, build, projected_dim) -> None:
    """An SDP of a graph (parameters of :mod:`calib.families.graphs`); X has one row per node."""
    register(Family(
        name=name, kind="sdp", description=description, size_keys=("nodes",),
        defaults=dict(graphs.DEFAULTS), param_doc=dict(graphs.PARAM_DOC),
        build=build, projected_dim=projected_dim, n_points=lambda p: StandardSDP.jl_points_for(p["nodes"]), check=graphs.check,
    ))


_register_random(
    "sdp-planted",
    "Random feasible, bounded standard-form SDP: Gaussian constraint matrices, a planted PSD point X0 "
    "(b = A(X0)) and a cost backed by a strictly dual-feasible planted vector.",
    {"density": 1.0, "rank": 1.0},
    {"density": "fraction of nonzero svec entries per constraint, in (0, 1]; 1 builds dense rows",
     "rank": "rank of the planted X0 as a fraction of n, in (0, 1] (1: X0 positive definite)"},
    _build_planted, _check_planted)
_register_random(
    "sdp-infeasible",
    "Random infeasible standard-form SDP certified by a planted y0 with sum y0_i A_i positive definite "
    "and b^T y0 < 0.",
    {"margin": 0.1},
    {"margin": "certificate margin (unitless, in (0, 10]): the floor on the eigenvalues of sum y0_i A_i, "
               "and -b^T y0 over the norm of the drawn b; larger is 'more infeasible'"},
    _build_infeasible, _check_infeasible)
_register_graph(
    "sdp-maxcut",
    "Max-cut SDP relaxation (Goemans–Williamson) of a unit-weight graph: max 1/4 <L, X>, diag(X) = 1, "
    "X PSD; one constraint per node.",
    _build_maxcut, lambda p: p["nodes"])
_register_graph(
    "sdp-theta",
    "Lovász theta SDP of a graph: max <J, X>, trace X = 1, X_ij = 0 on edges, X PSD; one constraint for "
    "the trace and one per edge.",
    _build_theta, lambda p: 1 + graphs.edge_count(p))
