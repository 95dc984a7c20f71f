"""Basis pursuit: the sparsest-looking signal that explains a few random measurements.

A signal x0 of ``length`` N with ``sparsity`` s nonzeros is measured through ``measurements`` k
random linear functionals, b = A x0 with A (k, N) of i.i.d. N(0, 1/k) entries. Basis pursuit
(Chen, Donoho and Saunders, SIAM J. Sci. Comput. 20(1):33-61, 1998) solves::

    minimise ||x||_1   subject to   A x = b,

and recovers x0 exactly when s/k lies below the Donoho-Tanner phase transition at k/N (Donoho and
Tanner, "Counting faces of randomly projected polytopes when the projection radically lowers
dimension", J. AMS 22(1):1-53, 2009).

Standard forms (:func:`basis_pursuit_lp`):

- ``signs = "signed"``: x = u - v with u, v >= 0: min 1^T u + 1^T v s.t. [A, -A] [u; v] = b
  (2N columns); nonzeros of x0 have random signs.
- ``signs = "nonnegative"``: x0 >= 0 and the LP is min 1^T x s.t. A x = b, x >= 0 (N columns).

The LP's decision is the signal x itself (every column; nothing to complete). The k measurement
rows are the rows projections act on; a row projection of a basis pursuit LP is a
basis pursuit LP with fewer (combined) measurements. Nonzero magnitudes are uniform in [1, 2].
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from calib.errors import InputError
from calib.families.base import Family, one_of, positive_int, register, require
from calib.problems.lp import DecisionMap, StandardLP

SIGNS = ("signed", "nonnegative")


def basis_pursuit_lp(A, b, signs: str = "signed", name: str = "basis-pursuit") -> StandardLP:
    """The standard-form LP of min ||x||_1 s.t. A x = b (``signs="nonnegative"`` adds x >= 0).

    A has shape (k, N), b shape (k,). Map a solution back with :func:`signal_from_solution`.
    """
    if signs not in SIGNS:
        raise InputError("signs", f"must be one of {', '.join(SIGNS)}, got {signs!r}", "pick 'signed' or 'nonnegative'")
    A = np.asarray(A, dtype=float)
    matrix = np.hstack([A, -A]) if signs == "signed" else A
    length = A.shape[1]
    signal = sp.hstack([sp.eye_array(length), -sp.eye_array(length)]) if signs == "signed" else sp.eye_array(length)
    return StandardLP(c=np.ones(matrix.shape[1]), A=matrix, b=b, name=name, decision=DecisionMap(signal)).validate()


def signal_from_solution(z: np.ndarray, signs: str = "signed") -> np.ndarray:
    """x = u - v for the signed form (z = [u; v], shape (2N,)); x = z for the nonnegative form."""
    z = np.asarray(z, dtype=float)
    if signs == "signed":
        half = z.size // 2
        return z[:half] - z[half:]
    return z


def _build(params: dict, rng: np.random.Generator):
    k, N, s, signs = params["measurements"], params["length"], params["sparsity"], params["signs"]
    A = rng.standard_normal((k, N)) / np.sqrt(k)
    signal = np.zeros(N)
    support = rng.choice(N, size=s, replace=False)
    signal[support] = rng.uniform(1.0, 2.0, size=s)
    if signs == "signed":
        signal[support] *= rng.choice([-1.0, 1.0], size=s)
    lp = basis_pursuit_lp(A, A @ signal, signs, name=f"lp-basis-pursuit-{k}x{N}")
    planted = np.concatenate([np.maximum(signal, 0), np.maximum(-signal, 0)]) if signs == "signed" else signal
    return lp, {"feasible": True, "planted_signal": signal, "planted_x": planted}


def _check(params: dict) -> None:
    positive_int(params, "measurements")
    positive_int(params, "length")
    positive_int(params, "sparsity")
    require(params["sparsity"] <= params["length"], "sparsity", f"must be at most length = {params['length']}",
            "choose fewer nonzeros than the signal length")
    one_of(params, "signs", SIGNS)


register(Family(
    name="lp-basis-pursuit",
    kind="lp",
    description="Basis pursuit min ||x||_1 s.t. A x = b with Gaussian A (measurements x length) and "
                "a planted s-sparse signal x0, b = A x0; signed (x = u - v split) or nonnegative. "
                "The measurement rows are projected.",
    size_keys=("measurements", "length"),
    defaults={"measurements": None, "length": None, "sparsity": 5, "signs": "signed"},
    param_doc={
        "measurements": "measurement rows k (the projected rows), integer >= 1",
        "length": "signal length N, integer >= 1",
        "sparsity": "nonzeros s of the planted signal, integer in [1, length]",
        "signs": "'signed' (nonzeros of either sign; 2N LP columns) or 'nonnegative' (x >= 0; N columns)",
    },
    build=_build,
    projected_dim=lambda p: p["measurements"],
    n_points=lambda p: StandardLP.jl_points_for(p["length"] * (2 if p["signs"] == "signed" else 1)),
    check=_check,
))
