"""Containers of calib.problems (svec, sdp, qp, points): the svec vectorisation, StandardSDP, QP and PointSet validation."""

import numpy as np
import pytest
import scipy.sparse as sp

from calib.problems.points import PointSet

from calib.problems.qp import QP

from calib.problems.sdp import StandardSDP

from calib.errors import InputError
from calib.problems.svec import smat, svec, svec_index, svec_positions, svec_stack


def _symmetric(rng, n):
    G = rng.standard_normal((n, n))
    return G + G.T


def test_svec_keeps_the_trace_inner_product():
    # <A, X> = trace(A X) computed by numpy is the reference; svec must preserve it (SCS
    # documentation, "Semidefinite cone": the sqrt(2) scaling makes svec an isometry).
    rng = np.random.default_rng(0)
    for n in (1, 2, 5, 9):
        A, X = _symmetric(rng, n), _symmetric(rng, n)
        assert svec(A) @ svec(X) == pytest.approx(np.trace(A @ X), rel=1e-12, abs=1e-12)
        np.testing.assert_allclose(smat(svec(X)), X, rtol=0, atol=1e-14)


def test_svec_order_is_lower_triangle_column_major():
    # SCS documentation, "Semidefinite cone": entries (0,0), (1,0), ..., (n-1,0), (1,1), (2,1), ...
    rows, cols = svec_positions(4)
    assert list(zip(rows.tolist(), cols.tolist()))[:6] == [(0, 0), (1, 0), (2, 0), (3, 0), (1, 1), (2, 1)]
    # the closed-form index agrees with the enumeration, for both triangles
    np.testing.assert_array_equal(svec_index(rows, cols, 4), np.arange(10))
    np.testing.assert_array_equal(svec_index(cols, rows, 4), np.arange(10))


def test_svec_stack_matches_dense_svec_and_projects_like_a_sum():
    rng = np.random.default_rng(1)
    mats = [_symmetric(rng, 4) for _ in range(3)]
    mats[1] = sp.csr_array(mats[1] * (np.abs(mats[1]) > 1.0))
    stacked = svec_stack(mats, 4)
    dense = [m.toarray() if sp.issparse(m) else m for m in mats]
    np.testing.assert_allclose(stacked.toarray(), np.array([svec(m) for m in dense]), atol=1e-15)
    # a row projection T of the stacked rows is svec of sum_j T_ij A_j (linearity; common practice)
    T = rng.standard_normal((2, 3))
    expected = [svec(sum(T[i, j] * dense[j] for j in range(3))) for i in range(2)]
    np.testing.assert_allclose(T @ stacked.toarray(), expected, atol=1e-12)


def test_standard_sdp_evaluates_objective_residual_and_dual_slack():
    rng = np.random.default_rng(2)
    n = 4
    C, A1, A2, X = (_symmetric(rng, n) for _ in range(4))
    sdp = StandardSDP.from_matrices(C, [A1, A2], [1.0, 2.0]).validate()
    # references: numpy traces
    assert sdp.objective(X) == pytest.approx(np.trace(C @ X))
    np.testing.assert_allclose(sdp.residual(X), [np.trace(A1 @ X) - 1.0, np.trace(A2 @ X) - 2.0], atol=1e-12)
    np.testing.assert_allclose(sdp.residual(svec(X)), sdp.residual(X))
    np.testing.assert_allclose(sdp.dual_slack([0.5, -1.0]), C - 0.5 * A1 + A2, atol=1e-12)
    np.testing.assert_allclose(sdp.constraint(1), A2, atol=1e-14)


@pytest.mark.parametrize("mutate, message", [
    (lambda kw: kw.update(C=np.array([[1.0, 2.0], [0.0, 1.0]])), "C is not symmetric"),
    (lambda kw: kw.update(b=np.ones(3)), "b has shape"),
    (lambda kw: kw.update(A=np.ones((1, 4))), "A has shape"),
    (lambda kw: kw.update(b=np.array([np.nan])), "NaN or infinite"),
])
def test_standard_sdp_validation_names_the_problem(mutate, message):
    kwargs = {"C": np.eye(2), "A": np.ones((1, 3)), "b": np.ones(1)}
    mutate(kwargs)
    with pytest.raises(InputError, match=message):
        StandardSDP(**kwargs).validate()


def test_svec_stack_rejects_asymmetric_matrix():
    with pytest.raises(InputError, match=r"A\[1\]: is not symmetric"):
        svec_stack([np.eye(2), np.array([[0.0, 1.0], [0.0, 0.0]])], 2)


def test_qp_objective_and_violation():
    qp = QP(Q=[[2.0, 0.0], [0.0, 4.0]], c=[1.0, -1.0], A=[[1.0, 1.0]], b=[1.0], radius=2.0,
            lower=[0.0, -1e20], upper=[1e20, 3.0], offset=0.5).validate()
    x = np.array([1.0, 1.0])
    assert qp.objective(x) == pytest.approx(0.5 * (2 + 4) + 0.0 + 0.5)   # hand computation
    assert qp.violation(x) == pytest.approx(1.0)                          # 1 + 1 - 1 on the row
    assert qp.violation(np.array([-3.0, 0.0])) == pytest.approx(3.0)       # lower bound 0 broken by 3
    assert qp.violation(np.array([0.0, -1.0])) == pytest.approx(0.0)
    assert np.isinf(qp.upper[0]) and np.isinf(qp.lower[1])                 # 1e20 counts as infinite


@pytest.mark.parametrize("kwargs, message", [
    ({"Q": [[1.0, 0.0], [0.0, -1.0]]}, "not positive semidefinite"),
    ({"Q": [[1.0, 1.0], [0.0, 1.0]]}, "Q is not symmetric"),
    ({"radius": -1.0}, "radius must be positive"),
    ({"ball_map": np.eye(2)}, "ball_map given without a radius"),
    ({"lower": [1.0, 0.0], "upper": [0.0, 1.0]}, "lower bound above"),
    ({"A": np.ones((2, 3)), "b": np.ones(2)}, "A has shape"),
])
def test_qp_validation_names_the_problem(kwargs, message):
    base = {"Q": np.eye(2), "c": np.zeros(2)}
    with pytest.raises(InputError, match=message):
        QP(**{**base, **kwargs}).validate()


def test_point_set_validation():
    points = PointSet(np.arange(6.0).reshape(3, 2)).validate()
    assert (points.n_points, points.dim, points.columns.shape) == (3, 2, (2, 3))
    with pytest.raises(InputError, match="two points coincide"):
        PointSet(np.array([[1.0, 2.0], [1.0, 2.0]])).validate()
    with pytest.raises(InputError, match="n >= 2 points"):
        PointSet(np.ones((1, 3))).validate()
