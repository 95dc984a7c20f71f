"""Diet-like covering LPs: meet every requirement at least cost, with serving caps.

Scenario (ours): a canteen plans one day of meals from ``cols`` foods. Food j costs c_j (money per
serving), delivers A[i, j] >= 0 units of nutrient i per serving, and at most ``cap`` servings of it
fit the menu. Every nutrient i must reach its requirement r_i::

    minimise c^T x   subject to   A x >= r,   0 <= x <= cap.

Many requirements are redundant: a fraction ``redundant`` of the ``rows`` rows are nonnegative
mixtures of two or three core rows whose requirement is at most the same mixture of the core
requirements, so they hold whenever the core rows do (think of a "total vitamins" row implied by
the single vitamins). The rows come in a random order.

Standard form through :meth:`GeneralLP.to_standard`: ``A x - s = r`` (``rows`` rows, one surplus
each) then ``x + t = cap`` (``cols`` rows, one slack each). Projections act on all
``rows + cols`` rows. Feasible by construction (a planted diet x0 in [0, cap] meets the core
requirements, which are drawn below A x0) and bounded (c > 0, x >= 0).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from calib.families.base import Family, fraction, positive, positive_int, register
from calib.problems.lp import GeneralLP, StandardLP

#: Core rows mixed into one redundant row (at most).
MIX = 3


def _nutrients(rows: int, cols: int, density: float, rng: np.random.Generator) -> sp.csr_array:
    """Nonnegative nutrient contents, log-normal amounts (units per serving), CSR (rows, cols)."""
    return sp.random_array((rows, cols), density=density, format="csr", rng=rng,
                           data_sampler=lambda size: rng.lognormal(0.0, 0.5, size))


def _redundant_rows(core: sp.csr_array, core_req: np.ndarray, count: int, rng: np.random.Generator):
    """``count`` rows implied by the core rows: mixtures w >= 0 with requirement <= w^T r_core."""
    n_core = core.shape[0]
    rows_of, cols_of, values = [], [], []  # the count x n_core mixing matrix, built sparse (MIX per row)
    for row in range(count):
        picked = rng.choice(n_core, size=min(MIX, n_core), replace=False)
        rows_of.append(np.full(picked.size, row))
        cols_of.append(picked)
        values.append(rng.uniform(0.2, 1.0, size=picked.size))
    mixing = sp.csr_array((np.concatenate(values or [np.zeros(0)]),
                           (np.concatenate(rows_of or [np.zeros(0, int)]), np.concatenate(cols_of or [np.zeros(0, int)]))),
                          shape=(count, n_core))
    rows = (mixing @ core).tocsr()
    requirements = rng.uniform(0.8, 1.0, size=count) * (mixing @ core_req)
    return rows, requirements


def _build(params: dict, rng: np.random.Generator):
    rows, cols, cap = params["rows"], params["cols"], float(params["cap"])
    n_redundant = min(rows - 1, int(round(params["redundant"] * rows)))
    n_core = rows - n_redundant
    core = _nutrients(n_core, cols, params["density"], rng)
    planted = rng.uniform(0.0, cap, size=cols)
    core_req = rng.uniform(0.5, 0.95, size=n_core) * (core @ planted)
    extra, extra_req = _redundant_rows(core, core_req, n_redundant, rng)
    order = rng.permutation(rows)
    A = sp.vstack([core, extra]).tocsr()[order]
    requirements = np.concatenate([core_req, extra_req])[order]
    prices = rng.uniform(0.5, 2.0, size=cols)
    general = GeneralLP(c=prices, A=A, row_lo=requirements, row_hi=np.full(rows, np.inf),
                        col_lo=np.zeros(cols), col_hi=np.full(cols, cap), name=f"lp-covering-{rows}x{cols}")
    form = general.to_standard()
    info = {"feasible": True, "planted_x": form.standard_point(planted),
            "redundant_rows": np.sort(np.flatnonzero(order >= n_core))}
    return form.lp, info


def _check(params: dict) -> None:
    positive_int(params, "rows")
    positive_int(params, "cols")
    fraction(params, "density")
    fraction(params, "redundant", closed_low=True, closed_high=False)
    positive(params, "cap")


register(Family(
    name="lp-covering",
    kind="lp",
    description="Diet-like covering LP: min cost of servings x with nutrient requirements A x >= r "
                "(A >= 0, a share of the rows implied by mixtures of others) and serving caps "
                "0 <= x <= cap; planted feasible diet, positive prices. Standard-form rows "
                "(projected): `rows` rows A x - s = r, then `cols` rows x + t = cap.",
    size_keys=("rows", "cols"),
    defaults={"rows": None, "cols": None, "density": 0.3, "redundant": 0.5, "cap": 4.0},
    param_doc={
        "rows": "nutrient requirement rows m, integer >= 1",
        "cols": "foods n, integer >= 1",
        "density": "share of nonzero nutrient contents in the core rows, in (0, 1]",
        "redundant": "share of requirement rows implied by mixtures of other rows, in [0, 1)",
        "cap": "most servings of any one food (servings), > 0",
    },
    build=_build,
    projected_dim=lambda p: p["rows"] + p["cols"],
    n_points=lambda p: StandardLP.jl_points_for(2 * p["cols"] + p["rows"]),
    check=_check,
))
