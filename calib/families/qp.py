"""Convex QP families; the variables are projected (x = T^T u, feasible by construction).

The JL count is rows + 2 points (:func:`calib.conic.qp_points`), finite bounds counted as rows.

``qp-random``: min 1/2 x^T Q x + c^T x s.t. A x <= b and, when radius > 0, ||x|| <= radius.
Q = F F^T / r + ridge I with F standard normal of shape (n, r); c and A standard normal. A point x0
(N(0, 1/n) entries, shrunk to norm <= radius / 2 when a ball is present) is planted strictly inside:
b = A x0 + slack with slack uniform on [0.1, 1]. Bounded because ridge > 0 or a ball is present.

``qp-portfolio``: an invented scenario. A fund splits one unit of capital over ``assets`` stocks
spread round-robin over ``sectors`` industries, with a ``factors``-factor risk model of annual
returns: loadings on a market factor ~ N(1, 0.25^2) and on style factors ~ N(0, 0.25^2); factor
variances 0.04 (market) and 0.01 (styles); idiosyncratic variances uniform on [0.02, 0.08];
expected returns mu = 0.02 + loadings @ premia + N(0, 0.01^2) with a market premium of 0.05 and
style premia ~ N(0, 0.02^2). The fund maximises mu^T w - risk_aversion * w^T Sigma w, stored as
min 1/2 w^T (2 risk_aversion Sigma) w - mu^T w, subject to the budget 1^T w = 1 (two rows),
sector budgets sum of w over a sector <= sector_cap, and bounds -short_limit <= w_i <= max_weight
(bounded short sales). Equal weights 1/assets are feasible (checked on the parameters).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from calib.checks import is_real
from calib.conic import QP, qp_points
from calib.families.base import Family, fraction, positive_int, register, require
from calib.families.lp_random import _matrix

#: Factor variances (per year) of the market factor and of each style factor.
MARKET_VARIANCE, STYLE_VARIANCE = 0.04, 0.01


def _build_random(params: dict, rng: np.random.Generator):
    n, rows, radius = params["vars"], params["rows"], params["radius"]
    rank = max(1, int(round(params["rank"] * n)))
    F = rng.standard_normal((n, rank))
    Q = F @ F.T / rank + params["ridge"] * np.eye(n)
    c = rng.standard_normal(n)
    A = _matrix(rows, n, params["density"], rng)
    x0 = rng.standard_normal(n) / np.sqrt(n)
    if radius > 0:
        x0 *= min(1.0, 0.5 * radius / np.linalg.norm(x0))
    b = np.asarray(A @ x0).ravel() + rng.uniform(0.1, 1.0, size=rows)
    qp = QP(Q=Q, c=c, A=A, b=b, radius=radius if radius > 0 else None, name=f"qp-random-{n}x{rows}")
    return qp, {"feasible": True, "planted_x": x0}


def _risk_model(assets: int, factors: int, rng: np.random.Generator):
    """(expected returns mu, covariance Sigma) of the invented factor model, annual units."""
    loadings = 0.25 * rng.standard_normal((assets, factors))
    loadings[:, 0] += 1.0
    factor_var = np.r_[MARKET_VARIANCE, np.full(factors - 1, STYLE_VARIANCE)]
    idiosyncratic = rng.uniform(0.02, 0.08, size=assets)
    covariance = loadings @ (factor_var[:, None] * loadings.T) + np.diag(idiosyncratic)
    premia = np.r_[0.05, 0.02 * rng.standard_normal(factors - 1)]
    mu = 0.02 + loadings @ premia + 0.01 * rng.standard_normal(assets)
    return mu, covariance


def _build_portfolio(params: dict, rng: np.random.Generator):
    assets, sectors = params["assets"], params["sectors"]
    mu, covariance = _risk_model(assets, params["factors"], rng)
    sector = np.arange(assets) % sectors
    membership = sp.csr_array((np.ones(assets), (sector, np.arange(assets))), shape=(sectors, assets))
    A = sp.vstack([sp.csr_array(np.ones((1, assets))), sp.csr_array(-np.ones((1, assets))), membership], format="csr")
    b = np.r_[1.0, -1.0, np.full(sectors, params["sector_cap"])]
    qp = QP(Q=2.0 * params["risk_aversion"] * covariance, c=-mu, A=A, b=b,
            lower=np.full(assets, -params["short_limit"]), upper=np.full(assets, params["max_weight"]),
            name=f"qp-portfolio-{assets}")
    info = {"feasible": True, "planted_x": np.full(assets, 1.0 / assets), "expected_returns": mu,
            "covariance": covariance, "sector": sector}
    return qp, info


def _check_random(params: dict) -> None:
    positive_int(params, "vars")
    positive_int(params, "rows")
    fraction(params, "density")
    fraction(params, "rank")
    for key in ("ridge", "radius"):
        value = params[key]
        require(is_real(value) and np.isfinite(value) and value >= 0,
                key, f"must be a finite number >= 0, got {value!r}", f"set {key} >= 0")
    require(params["ridge"] > 0 or params["radius"] > 0, "ridge", "with ridge = 0 and no ball the QP may be unbounded",
            "set ridge > 0 or radius > 0")


def _check_portfolio(params: dict) -> None:
    positive_int(params, "assets", 2)
    positive_int(params, "sectors")
    positive_int(params, "factors")
    fraction(params, "risk_aversion", 0.0, 1e3)
    fraction(params, "short_limit", 0.0, 1.0, closed_low=True)
    fraction(params, "max_weight")
    fraction(params, "sector_cap")
    assets, sectors = params["assets"], params["sectors"]
    require(sectors <= assets, "sectors", f"{sectors} sectors for {assets} assets leaves empty sectors", "set sectors <= assets")
    require(params["max_weight"] * assets >= 1.0, "max_weight", "equal weights exceed max_weight, so the budget cannot be met",
            f"set max_weight >= 1/assets = {1.0 / assets:.4g}")
    largest = -(-assets // sectors)
    require(params["sector_cap"] * assets >= largest, "sector_cap", "equal weights break the sector cap of the largest sector",
            f"set sector_cap >= {largest}/{assets} = {largest / assets:.4g}")


register(Family(
    name="qp-random",
    kind="qp",
    description="Random strictly convex QP with Gaussian linear inequalities around a planted interior point, "
                "optionally inside the ball ||x|| <= radius.",
    size_keys=("vars", "rows"),
    defaults={"vars": None, "rows": None, "density": 1.0, "rank": 1.0, "ridge": 0.1, "radius": 0.0},
    param_doc={
        "vars": "number of variables n (the projected dimension), integer >= 1",
        "rows": "number of inequality rows of A, integer >= 1",
        "density": "fraction of nonzero entries of A in (0, 1]; 1 builds a dense A",
        "rank": "rank of the Gram part F F^T / r of Q as a fraction of n, in (0, 1]",
        "ridge": "multiple of the identity added to Q (>= 0; > 0 unless a ball is present)",
        "radius": "ball radius r >= 0 of ||x|| <= r; 0 means no ball",
    },
    build=_build_random,
    projected_dim=lambda p: p["vars"],
    n_points=lambda p: qp_points(p["rows"]),
    check=_check_random,
))

register(Family(
    name="qp-portfolio",
    kind="qp",
    description="Invented long/short equity fund: expected return minus risk aversion times factor-model "
                "variance, full investment, sector budgets and bounded short sales.",
    size_keys=("assets",),
    defaults={"assets": None, "sectors": 4, "factors": 2, "risk_aversion": 3.0, "short_limit": 0.1,
              "max_weight": 0.25, "sector_cap": 0.5},
    param_doc={
        "assets": "number of stocks (the projected dimension), integer >= 2",
        "sectors": "number of industries, assets assigned round-robin, integer in [1, assets]",
        "factors": "risk factors (market + styles), integer >= 1",
        "risk_aversion": "weight on the annual variance, in (0, 1000] (return units per variance unit)",
        "short_limit": "largest short position per stock, fraction of capital in [0, 1]",
        "max_weight": "largest long position per stock, fraction of capital in (0, 1], at least 1/assets",
        "sector_cap": "largest total weight per sector, fraction of capital in (0, 1]",
    },
    build=_build_portfolio,
    projected_dim=lambda p: p["assets"],
    n_points=lambda p: qp_points(2 + p["sectors"] + 2 * p["assets"]),
    check=_check_portfolio,
))
