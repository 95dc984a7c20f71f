"""Random LPs in standard form with ground truth known by construction.

``lp-planted``: a feasible, bounded LP (optionally with nearly redundant rows: ``rank``). A point x0 >= 0 with a chosen support is planted and
b = A x0; costs c = A^T y0 + z0 with z0 >= 0 make y0 dual feasible, so the LP is bounded (weak
duality). With ``cost = "nonnegative"`` the costs are instead c >= 0, which keeps every row
projection bounded too (0 is dual feasible for TA).

``lp-farkas``: an infeasible LP with a Farkas certificate y0: A^T y0 >= margin > 0 and
b^T y0 <= -margin, so no x >= 0 solves A x = b (Farkas' lemma). A row projection is a relaxation
and may turn it feasible: the one-sided error calib counts.

Both declare every column a decision column (an abstract LP has no slacks to complete).
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp

from calib.families.base import Family, fraction, positive_int, register, require
from calib.problems.lp import DecisionMap, StandardLP


def _matrix(rows: int, cols: int, density: float, rng: np.random.Generator, rank=None, noise: float = 0.0):
    """Standard normal entries; sparse (CSR) with the given density when density < 1.

    With ``rank`` r < rows the dense matrix is U V / sqrt(r) + noise * N (U: rows x r, V: r x cols,
    N: rows x cols, all standard normal): rows that are nearly redundant combinations of r rows.
    """
    if rank is not None and rank < rows:
        low = rng.standard_normal((rows, rank)) @ rng.standard_normal((rank, cols)) / np.sqrt(rank)
        return low + noise * rng.standard_normal((rows, cols))
    if density >= 1.0:
        return rng.standard_normal((rows, cols))
    A = sp.random_array((rows, cols), density=density, format="csr", rng=rng, data_sampler=rng.standard_normal)
    # every column needs an entry, else the LP has free directions unrelated to the rows
    empty = np.flatnonzero(np.diff(A.tocsc().indptr) == 0)
    if empty.size:
        fill = sp.csr_array((rng.standard_normal(empty.size), (rng.integers(0, rows, empty.size), empty)), shape=(rows, cols))
        A = (A + fill).tocsr()
    return A


def matrix_bytes(rows: int, cols: int, density: float, rank=None) -> int:
    """Bytes :func:`_matrix` needs at least for its result: 8 per float64 entry when dense (density 1
    or a low-rank A), else CSR's 8-byte value and 4-byte column index per nonzero plus the row
    pointers (scipy.sparse's layout with 32-bit indices).

    >>> matrix_bytes(10**6, 2 * 10**6, 1.0) / 2**40  # the 1e6 x 2e6 dense LP: 14.6 TiB
    14.551915228366852
    >>> matrix_bytes(1000, 2000, 0.01)
    244004
    """
    if density >= 1.0 or (rank is not None and rank < rows):
        return 8 * rows * cols
    return 12 * math.ceil(density * rows * cols) + 4 * (rows + 1)


def _check_common(params: dict) -> None:
    positive_int(params, "rows")
    positive_int(params, "cols")
    fraction(params, "density")


def _build_planted(params: dict, rng: np.random.Generator):
    rows, cols = params["rows"], params["cols"]
    A = _matrix(rows, cols, params["density"], rng, params["rank"], params["noise"])
    support = max(1, int(round(params["support"] * cols)))
    x0 = np.zeros(cols)
    x0[rng.choice(cols, size=support, replace=False)] = rng.uniform(0.5, 1.5, size=support)
    b = np.asarray(A @ x0).ravel()
    if params["cost"] == "nonnegative":
        c = rng.uniform(0.1, 1.0, size=cols)
        y0 = np.zeros(rows)
    else:
        y0 = rng.standard_normal(rows) / np.sqrt(rows)
        c = np.asarray(A.T @ y0).ravel() + rng.uniform(0.1, 1.0, size=cols)
    lp = StandardLP(c=c, A=A, b=b, name=f"lp-planted-{rows}x{cols}", decision=DecisionMap.select(cols, np.arange(cols)))
    return lp, {"feasible": True, "planted_x": x0, "dual_certificate": y0}


def _build_farkas(params: dict, rng: np.random.Generator):
    rows, cols, margin = params["rows"], params["cols"], params["margin"]
    A = _matrix(rows, cols, 1.0, rng)
    y0 = rng.standard_normal(rows)
    y0 /= np.linalg.norm(y0)
    # shift each column along y0 so that a_j^T y0 >= margin * ||a_j||-scale (here: >= margin)
    lift = np.maximum(0.0, margin - A.T @ y0)
    A = A + np.outer(y0, lift)
    b = rng.standard_normal(rows)
    b -= (b @ y0 + margin * np.linalg.norm(b)) * y0
    c = rng.uniform(0.1, 1.0, size=cols)
    lp = StandardLP(c=c, A=A, b=b, name=f"lp-farkas-{rows}x{cols}", decision=DecisionMap.select(cols, np.arange(cols)))
    return lp, {"feasible": False, "farkas_certificate": y0}


def _check_planted(params: dict) -> None:
    _check_common(params)
    if params["rank"] is not None:
        positive_int(params, "rank")
        require(params["density"] == 1.0, "rank", "a low-rank matrix is dense", "set density = 1.0 or drop rank")
    fraction(params, "noise", 0.0, 10.0, closed_low=True)
    fraction(params, "support")
    require(params["cost"] in ("dual", "nonnegative"), "cost", f"must be 'dual' or 'nonnegative', got {params['cost']!r}", "pick one of the two cost models")


def _check_farkas(params: dict) -> None:
    _check_common(params)
    require(params["density"] == 1.0, "density", "lp-farkas builds dense matrices only", "set density = 1.0")
    fraction(params, "margin", 0.0, 10.0)


_LP_DOC = {
    "rows": "constraint rows m (the projected dimension), integer >= 1",
    "cols": "variables n, integer >= 1",
    "density": "fraction of nonzero entries of A in (0, 1]; 1 builds a dense A",
}

register(Family(
    name="lp-planted",
    kind="lp",
    description="Random feasible, bounded LP min c^T x, Ax = b, x >= 0 with N(0,1) entries, a planted "
                "feasible point and costs backed by a planted dual-feasible vector.",
    size_keys=("rows", "cols"),
    defaults={"rows": None, "cols": None, "density": 1.0, "support": 0.5, "cost": "dual", "rank": None, "noise": 0.0},
    param_doc={**_LP_DOC,
               "rank": "if set (integer < rows): A = U V / sqrt(rank) + noise * N, rows nearly redundant",
               "noise": "full-rank perturbation added to a low-rank A, in [0, 10]; ignored without rank",
               "support": "fraction of positive entries of the planted point x0, in (0, 1]",
               "cost": "'dual' (c = A^T y0 + z0, mixed signs) or 'nonnegative' (c > 0)"},
    build=_build_planted,
    projected_dim=lambda p: p["rows"],
    n_points=lambda p: StandardLP.jl_points_for(p["cols"]),
    check=_check_planted,
    memory=lambda p: matrix_bytes(p["rows"], p["cols"], p["density"], p["rank"]),
))

register(Family(
    name="lp-farkas",
    kind="lp",
    description="Random infeasible LP Ax = b, x >= 0 certified by a planted Farkas vector y0 with "
                "A^T y0 >= margin and b^T y0 <= -margin ||b||.",
    size_keys=("rows", "cols"),
    defaults={"rows": None, "cols": None, "density": 1.0, "margin": 0.1},
    param_doc={**_LP_DOC, "margin": "certificate margin (unitless, in (0, 10]); larger is 'more infeasible'"},
    build=_build_farkas,
    projected_dim=lambda p: p["rows"],
    n_points=lambda p: StandardLP.jl_points_for(p["cols"]),
    check=_check_farkas,
    memory=lambda p: matrix_bytes(p["rows"], p["cols"], p["density"]),
))
