"""Integer-programming families: the rows of an MILP in standard form with slacks are projected.

Both families are inequality models brought to :class:`calib.problems.milp.StandardMILP` by
:func:`calib.problems.milp.from_inequalities` (one continuous slack per row); the decision is integer, the
slacks are continuous. The projected dimension m is the number of rows; the JL count n is the
standard form's columns plus b (decisions + slacks + 1), as for an LP.

``milp-knapsack``: the multi-dimensional 0/1 knapsack, maximise p^T x s.t. W x <= c, x in {0,1}^items
(as the minimisation of -p^T x), drawn as Chu and Beasley (1998) drew their test set: weights
w_ij uniform on the integers 0..1000, capacities c_i = tightness * sum_j w_ij, profits
p_j = sum_i w_ij / constraints + 500 q_j with q_j uniform on (0, 1) (profits correlated with the
weights; from memory of P. C. Chu and J. E. Beasley, "A genetic algorithm for the multidimensional
knapsack problem", J. Heuristics 4:63–86, 1998).

``milp-cover``: integer multi-cover, minimise c^T x s.t. A x >= d, x in {0, .., upper}^sets: element i
(a row) is covered by set j (a column) with probability ``density``, and by at least one set
(a missing row gets one set drawn uniformly); demands d_i uniform on 1..``demand``, costs c_j
uniform on the integers 1..100. ``upper`` >= ``demand`` makes every instance feasible (the set that
covers an element can be taken ``demand`` times).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from calib.families.base import Family, fraction, positive_int, register, require
from calib.problems.milp import StandardMILP, from_inequalities


def _build_knapsack(params: dict, rng: np.random.Generator):
    m, n = params["constraints"], params["items"]
    weights = rng.integers(0, 1001, size=(m, n)).astype(float)
    capacity = params["tightness"] * weights.sum(axis=1)
    profit = weights.sum(axis=0) / m + 500.0 * rng.random(n)
    problem = from_inequalities(-profit, weights, capacity, "<=", np.ones(n), np.ones(n, dtype=bool),
                                name=f"milp-knapsack-{m}x{n}")
    return problem, {"profit": profit}


def _build_cover(params: dict, rng: np.random.Generator):
    m, n = params["elements"], params["sets"]
    covers = rng.random((m, n)) < params["density"]
    empty = np.flatnonzero(~covers.any(axis=1))
    covers[empty, rng.integers(0, n, size=empty.size)] = True
    demand = rng.integers(1, params["demand"] + 1, size=m).astype(float)
    cost = rng.integers(1, 101, size=n).astype(float)
    problem = from_inequalities(cost, sp.csr_array(covers.astype(float)), demand, ">=", np.full(n, float(params["upper"])),
                                np.ones(n, dtype=bool), name=f"milp-cover-{m}x{n}")
    return problem, {"demand": demand}


def _check_knapsack(params: dict) -> None:
    positive_int(params, "constraints")
    positive_int(params, "items")
    fraction(params, "tightness", closed_high=False)


def _check_cover(params: dict) -> None:
    positive_int(params, "elements")
    positive_int(params, "sets")
    fraction(params, "density")
    positive_int(params, "demand")
    positive_int(params, "upper")
    require(params["upper"] >= params["demand"], "upper", f"is below the largest demand {params['demand']}",
            "set upper >= demand so that every instance is feasible")


register(Family(
    name="milp-knapsack", kind="milp",
    description="Multi-dimensional 0/1 knapsack (Chu-Beasley-style weights and correlated profits): pick items "
                "of greatest profit within every capacity row; rows projected, slacks continuous.",
    size_keys=("constraints", "items"),
    defaults={"constraints": None, "items": None, "tightness": 0.5},
    param_doc={"constraints": "capacity rows m (the projected dimension), integer >= 1",
               "items": "0/1 items, integer >= 1",
               "tightness": "capacity of each row as a share of the row's total weight, in (0, 1)"},
    build=_build_knapsack, projected_dim=lambda p: p["constraints"],
    n_points=lambda p: StandardMILP.jl_points_for(p["items"] + p["constraints"]), check=_check_knapsack,
    memory=lambda p: 8 * p["constraints"] * (p["items"] + 2),
))
register(Family(
    name="milp-cover", kind="milp",
    description="Integer multi-cover: buy each set up to `upper` times so that every element is covered as often "
                "as it demands, at least cost; rows projected, surplus columns continuous.",
    size_keys=("elements", "sets"),
    defaults={"elements": None, "sets": None, "density": 0.05, "demand": 2, "upper": 2},
    param_doc={"elements": "elements to cover, the rows m (the projected dimension), integer >= 1",
               "sets": "integer columns, integer >= 1",
               "density": "probability that a set covers an element, in (0, 1]",
               "demand": "demands are drawn uniformly from 1..demand, integer >= 1",
               "upper": "a set may be bought at most this many times, integer >= demand"},
    build=_build_cover, projected_dim=lambda p: p["elements"],
    n_points=lambda p: StandardMILP.jl_points_for(p["sets"] + p["elements"]), check=_check_cover,
    memory=lambda p: 8 * p["elements"] * p["sets"],
))
