"""Instance features: cheap numbers that describe the structure a projection acts on.

A projector T (k x m) combines the m rows of one matrix M (m x N) of the instance, the *sketched
matrix*:

| kind       | M                                   | m (projected dimension) |
|------------|-------------------------------------|-------------------------|
| lp         | [A b], standard form                | constraint rows         |
| sdp        | [A b], rows = svec constraints      | constraints             |
| qp         | [Q  Aᵀ  c], rows = variables        | variables (x = Tᵀu)     |
| points     | the points as columns, d x n        | ambient dimension d     |
| clustering | the points as columns, d x n        | ambient dimension d     |
| milp       | [A b], standard form with slacks    | constraint rows         |

Features of M, stored per instance and carried into the table so classes can be compared and k
related to structure:

- ``rows``, ``cols``, ``nonzeros`` of M;
- ``stable_rank`` = ‖M‖_F² / ‖M‖₂² (≤ rank; robust to tiny singular values; Rudelson & Vershynin,
  "Sampling from large matrices", J. ACM 54(4), 2007), the spectral norm from ARPACK (``svds``) for
  large M;
- ``rank``: the numerical rank, singular values above σ_max · max(m, N) · machine eps (the rule of
  ``numpy.linalg.matrix_rank``);
- ``row_coherence`` = (m / r) max_i ‖U_(i)‖², U the m x r left singular vectors of the rank r:
  1 when every row carries the same share of the column space, m / r when one row carries a whole
  direction alone (Candès & Recht, "Exact matrix completion via convex optimization", Found. Comput.
  Math. 9, 2009, Definition 1.2). A coherent M needs more rows kept by a sampling sketch, and its
  subspace is what a subspace embedding must preserve.

The features are computed once per instance, when its original is solved, and stored as JSON in the
``features`` column of the store's instances table; a table entry carries the median of each
feature over the cell's instances (:func:`median_features`).

``rank`` and ``row_coherence`` need a thin SVD, O(m N min(m, N)) flops: computed when that is at most
:data:`SVD_FLOPS` (a few seconds on one core), else None with the reason in ``skipped``.
"""

from __future__ import annotations

from typing import Any, Callable, Optional

import numpy as np
import scipy.sparse as sp

#: the largest m * N * min(m, N) for which the thin SVD is taken
SVD_FLOPS = 2e10


def _hstack(blocks) -> sp.csr_matrix | np.ndarray:
    if any(sp.issparse(block) for block in blocks):
        return sp.hstack([sp.csr_matrix(block) for block in blocks], format="csr")
    return np.hstack(blocks)


def _column(vector) -> np.ndarray:
    return np.asarray(vector, dtype=float).reshape(-1, 1)


def _lp(problem):
    return _hstack([problem.A, _column(problem.b)])


def _qp(problem):
    blocks = [problem.Q]
    if problem.A is not None:
        blocks.append(problem.A.T)
    return _hstack(blocks + [_column(problem.c)])


def _points(problem):
    return problem.columns


#: kind -> the sketched matrix of an instance of that kind (module docstring)
SKETCHED: dict[str, Callable] = {"lp": _lp, "sdp": _lp, "qp": _qp, "points": _points, "clustering": _points, "milp": _lp}


def spectral_norm(matrix: np.ndarray | sp.spmatrix | sp.sparray) -> float:
    """‖M‖₂: ARPACK's largest singular value for sparse or dense M (a few products with M and Mᵀ,
    never a full SVD), exact for M with fewer than 3 rows or columns."""
    if min(matrix.shape) < 3:
        return float(np.linalg.norm(matrix.toarray() if sp.issparse(matrix) else matrix, 2))
    from scipy.sparse.linalg import svds

    return float(svds(matrix.astype(float), k=1, return_singular_vectors=False, random_state=0)[0])


def matrix_features(matrix: np.ndarray | sp.spmatrix | sp.sparray, svd_flops: Optional[float] = None) -> dict:
    """The features of one m x N matrix (module docstring); JSON-ready. ``svd_flops`` is the largest
    m N min(m, N) for which rank and row coherence are computed (default :data:`SVD_FLOPS`, read at the call).

    >>> f = matrix_features(np.array([[1.0, 0.0], [0.0, 1.0], [0.0, 0.0], [0.0, 0.0]]))
    >>> f["rank"], f["stable_rank"], f["row_coherence"], f["nonzeros"]
    (2, 2.0, 2.0, 2)
    """
    m, n = matrix.shape
    nonzeros = int(matrix.nnz if sp.issparse(matrix) else np.count_nonzero(matrix))
    frobenius = float(sp.linalg.norm(matrix) if sp.issparse(matrix) else np.linalg.norm(matrix))
    features = {"rows": int(m), "cols": int(n), "nonzeros": nonzeros, "stable_rank": None, "rank": None,
                "row_coherence": None, "skipped": ""}
    if frobenius == 0.0:
        return features | {"rank": 0, "skipped": "the matrix is zero"}
    if m * n * min(m, n) > (SVD_FLOPS if svd_flops is None else svd_flops):
        norm = spectral_norm(matrix)
        return features | {"stable_rank": round(frobenius ** 2 / norm ** 2, 6),
                           "skipped": f"rank and row coherence: a thin SVD of {m} x {n} exceeds the cheap budget"}
    dense = matrix.toarray() if sp.issparse(matrix) else np.asarray(matrix, dtype=float)
    left, singular, _ = np.linalg.svd(dense, full_matrices=False)
    rank = int(np.sum(singular > singular[0] * max(m, n) * np.finfo(float).eps))
    leverage = np.sum(left[:, :rank] ** 2, axis=1)
    return features | {"stable_rank": round(float(np.sum(singular ** 2) / singular[0] ** 2), 6), "rank": rank,
                       "row_coherence": round(float(m / rank * leverage.max()), 6)}


def instance_features(kind: str, problem: Any, svd_flops: Optional[float] = None) -> dict:
    """The features of an instance's sketched matrix (module docstring): the matrix of :data:`SKETCHED`
    for ``kind`` (an LP's or SDP's A, a QP's, the point set's coordinates), ``problem`` of that kind."""
    return matrix_features(SKETCHED[kind](problem), svd_flops)


#: the numeric features a table entry summarises (median over the cell's instances)
NUMERIC = ("rows", "cols", "nonzeros", "rank", "stable_rank", "row_coherence")


def median_features(records: list[Optional[dict]]) -> Optional[dict]:
    """Per feature, the median over the instances that have it (None when none has); ``instances``
    counts the instances with stored features. None when no instance has any (stores written
    before features were recorded).

    >>> median_features([{"rows": 10, "rank": 3, "stable_rank": 1.5}, {"rows": 10, "rank": 4, "stable_rank": 2.5}, None])
    {'rows': 10.0, 'cols': None, 'nonzeros': None, 'rank': 3.5, 'stable_rank': 2.0, 'row_coherence': None, 'instances': 2}
    """
    present = [record for record in records if record]
    if not present:
        return None
    medians: dict = {}
    for name in NUMERIC:
        values = [record[name] for record in present if record.get(name) is not None]
        medians[name] = float(np.median(values)) if values else None
    return medians | {"instances": len(present)}


def stored_features(kind: str, problem: Any) -> str:
    """The JSON text stored for an instance: its features, or the reason they are missing."""
    import json

    try:
        record = instance_features(kind, problem)
    except Exception as error:  # features are descriptive: their failure must not lose the original
        record = {"skipped": f"{type(error).__name__}: {error}".replace("\n", " ")}
    return json.dumps(record, sort_keys=True)
