"""Transportation LPs: ship from plants to markets at least freight cost.

With supplies a (shape (P,)), demands d (shape (M,)) and unit costs C (shape (P, M))::

    minimise sum_ij C_ij x_ij   subject to   sum_j x_ij <= a_i,   sum_i x_ij >= d_j,   x >= 0.

:func:`transportation_lp` builds it for given data. The ``lp-transport`` family invents the data
(our scenario): ``sources`` depots and ``sinks`` stores placed uniformly in a square region of side
``region_km``; store demands uniform in [100, 1000] cases; total supply is (1 + ``surplus``) times
total demand, split among depots by a flat Dirichlet draw; the cost of a case is ``rate`` times the
straight-line distance. Feasible by construction (the proportional plan x_ij = a_i d_j / sum(a)
meets every row) and bounded (C >= 0).

Standard form through :meth:`GeneralLP.to_standard`: the M demand rows (with surpluses) then the P
supply rows (with slacks); projections act on these M + P rows. Columns: the P*M flows in
row-major (plant, market) order, then the P + M slacks.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from calib.families.base import Family, fraction, positive, positive_int, register
from calib.problems.lp import GeneralLP, StandardForm, StandardLP


def transportation_lp(supply, demand, cost, name: str = "transport") -> StandardForm:
    """Standard form of the transportation LP above.

    Parameters
    ----------
    supply : array_like, shape (P,)
        Plant capacities (units).
    demand : array_like, shape (M,)
        Market requirements (units).
    cost : array_like, shape (P, M)
        Cost per unit shipped from plant i to market j.

    Returns
    -------
    StandardForm
        ``form.original_point(z)[:P*M].reshape(P, M)`` are the flows of a standard-form point z.

    Dantzig's two plants and three markets (cost in k$ per case, optimum 153.675 k$):

    >>> from calib.solvers.highs import solve_lp
    >>> miles = np.array([[2.5, 1.7, 1.8], [2.5, 1.8, 1.4]])
    >>> form = transportation_lp([350, 600], [325, 300, 275], 90 * miles / 1000)
    >>> round(solve_lp(form.lp).objective, 6)
    153.675
    """
    supply, demand = np.asarray(supply, dtype=float), np.asarray(demand, dtype=float)
    cost = np.asarray(cost, dtype=float)
    n_src, n_dst = supply.size, demand.size
    ship_out = sp.kron(sp.eye_array(n_src), np.ones((1, n_dst)))  # row i sums x_i.
    ship_in = sp.kron(np.ones((1, n_src)), sp.eye_array(n_dst))   # row j sums x_.j
    general = GeneralLP(
        c=cost.reshape(n_src * n_dst), A=sp.vstack([ship_out, ship_in]),
        row_lo=np.concatenate([np.full(n_src, -np.inf), demand]),
        row_hi=np.concatenate([supply, np.full(n_dst, np.inf)]),
        col_lo=np.zeros(n_src * n_dst), col_hi=np.full(n_src * n_dst, np.inf), name=name,
    )
    return general.to_standard()


def _build(params: dict, rng: np.random.Generator):
    n_src, n_dst = params["sources"], params["sinks"]
    side = float(params["region_km"])
    depots = rng.uniform(0.0, side, size=(n_src, 2))
    stores = rng.uniform(0.0, side, size=(n_dst, 2))
    demand = rng.uniform(100.0, 1000.0, size=n_dst)
    supply = (1.0 + params["surplus"]) * demand.sum() * rng.dirichlet(np.ones(n_src))
    distance = np.linalg.norm(depots[:, None, :] - stores[None, :, :], axis=2)
    form = transportation_lp(supply, demand, params["rate"] * distance, name=f"lp-transport-{n_src}x{n_dst}")
    plan = np.outer(supply, demand).ravel() / supply.sum()
    # tight rows (all demand rows; supply rows too when surplus = 0) leave slacks of rounding size
    planted = np.maximum(form.standard_point(plan), 0.0)
    return form.lp, {"feasible": True, "planted_x": planted}


def _check(params: dict) -> None:
    positive_int(params, "sources")
    positive_int(params, "sinks")
    fraction(params, "surplus", 0.0, 10.0, closed_low=True)
    positive(params, "region_km")
    positive(params, "rate")


register(Family(
    name="lp-transport",
    kind="lp",
    description="Transportation LP: depots with capacities ship cases to stores with demands at a "
                "cost proportional to distance (random sites in a square). Standard-form rows "
                "(projected): `sinks` demand rows then `sources` supply rows, each with a slack.",
    size_keys=("sources", "sinks"),
    defaults={"sources": None, "sinks": None, "surplus": 0.2, "region_km": 500.0, "rate": 0.05},
    param_doc={
        "sources": "depots P, integer >= 1",
        "sinks": "stores M, integer >= 1",
        "surplus": "total supply / total demand - 1, in [0, 10] (0 makes a balanced problem)",
        "region_km": "side of the square region holding the sites (km), > 0",
        "rate": "freight cost per case per km (money), > 0",
    },
    build=_build,
    projected_dim=lambda p: p["sources"] + p["sinks"],
    n_points=lambda p: StandardLP.jl_points_for(p["sources"] * p["sinks"] + p["sources"] + p["sinks"]),
    check=_check,
))
