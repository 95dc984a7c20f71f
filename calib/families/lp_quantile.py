"""Quantile regression at level tau as an LP.

For a design X (shape (n, p)) and responses y (shape (n,)), the tau-quantile regression
coefficients minimise the check loss sum_i rho_tau(y_i - x_i^T beta), rho_tau(r) = r (tau - [r < 0]).
Splitting each residual into u_i, v_i >= 0 gives the LP (Koenker and Bassett, "Regression
Quantiles", Econometrica 46(1):33-50, 1978)::

    minimise tau 1^T u + (1 - tau) 1^T v   subject to   X beta + u - v = y,   beta free,  u, v >= 0.

Standard form through :meth:`GeneralLP.to_standard` (beta = beta+ - beta-): columns
[beta+ (p), u (n), v (n), beta- (p)], so A = [X, I, -I, -X]: a dense design block beside +-identity
residual blocks. The n observation rows are the rows projections act on.

Families: ``lp-quantile`` (synthetic data, below) and ``lp-quantile-csv`` (the user's CSV file).
"""

from __future__ import annotations

import functools
from pathlib import Path

import numpy as np
import scipy.sparse as sp

from calib.errors import InputError
from calib.families.base import Family, fraction, positive, positive_int, register, require
from calib.problems.lp import GeneralLP, StandardForm, StandardLP


def _check_data(X, y, tau):
    X, y = np.asarray(X, dtype=float), np.asarray(y, dtype=float)
    if X.ndim != 2 or X.shape[0] == 0 or X.shape[1] == 0:
        raise InputError("X", f"must be a nonempty 2-D design matrix, got shape {X.shape}", "pass an (n, p) array")
    if y.shape != (X.shape[0],):
        raise InputError("y", f"has shape {y.shape}, expected ({X.shape[0]},)", "give one response per row of X")
    if not (np.isfinite(X).all() and np.isfinite(y).all()):
        raise InputError("X, y", "contain NaN or infinite entries", "drop or fill the missing observations")
    if not 0.0 < float(tau) < 1.0:
        raise InputError("tau", f"must lie in (0, 1), got {tau!r}", "pick a quantile level such as 0.5")
    return X, y, float(tau)


def quantile_regression_lp(X, y, tau: float, name: str = "quantile") -> StandardForm:
    """The standard-form LP of tau-quantile regression of y on the columns of X (no intercept added).

    ``form.original_point(z)[:p]`` are the coefficients of a standard-form point z, and the LP's
    decision is those p coefficients: the residual parts u, v are its completion (``u - v = y - X beta``).
    """
    X, y, tau = _check_data(X, y, tau)
    n, p = X.shape
    identity = sp.eye_array(n, format="csr")
    general = GeneralLP(
        c=np.concatenate([np.zeros(p), np.full(n, tau), np.full(n, 1.0 - tau)]),
        A=sp.hstack([sp.csr_array(X), identity, -identity]),
        row_lo=y, row_hi=y,
        col_lo=np.concatenate([np.full(p, -np.inf), np.zeros(2 * n)]), col_hi=np.full(p + 2 * n, np.inf),
        name=name,
    )
    return general.to_standard(decision=np.arange(p))


def quantile_regression(X, y, tau: float, time_limit: float = 60.0) -> np.ndarray:
    """tau-quantile regression coefficients, shape (p,), from the LP solved by HiGHS.

    >>> X = np.column_stack([np.ones(5), np.arange(5.0)])
    >>> quantile_regression(X, 1.0 + 2.0 * np.arange(5.0), 0.5).round(12).tolist()
    [1.0, 2.0]
    """
    from calib.solvers.highs import solve_lp

    form = quantile_regression_lp(X, y, tau)
    result = solve_lp(form.lp, time_limit=time_limit)
    if not result.ok:
        raise RuntimeError(f"quantile regression LP ended with status {result.status} ({result.solver_message})")
    return form.original_point(result.x)[: np.shape(X)[1]]


def split_point(X, y, beta) -> np.ndarray:
    """The standard-form point [beta+, u, v, beta-] of coefficients ``beta`` (u, v: residual parts)."""
    residual = np.asarray(y, dtype=float) - np.asarray(X, dtype=float) @ beta
    return np.concatenate([np.maximum(beta, 0), np.maximum(residual, 0), np.maximum(-residual, 0), np.maximum(-beta, 0)])


def check_loss(X, y, beta, tau: float) -> float:
    """sum_i rho_tau(y_i - x_i^T beta), the objective quantile regression minimises."""
    residual = np.asarray(y, dtype=float) - np.asarray(X, dtype=float) @ beta
    return float(np.sum(residual * (tau - (residual < 0))))


# --- synthetic data ---------------------------------------------------------------------------

#: Noise scale grows by this much per unit of the first feature (heteroscedastic model).
SLOPE_OF_SCALE = 0.1
#: Degrees of freedom of the Student-t noise.
NOISE_DOF = 3


def _build_synthetic(params: dict, rng: np.random.Generator):
    n, n_feat, tau, noise = params["rows"], params["features"], params["tau"], params["noise"]
    features = rng.uniform(0.0, 10.0, size=(n, n_feat))
    X = np.column_stack([np.ones(n), features])
    beta = rng.standard_normal(n_feat + 1)
    scale = noise * (1.0 + SLOPE_OF_SCALE * features[:, 0])
    y = X @ beta + scale * rng.standard_t(NOISE_DOF, size=n)
    from scipy import stats  # here, not at import: `calib families` lists the family without it

    # the conditional tau-quantile is linear: x^T beta + noise (1 + 0.1 x_1) F^-1(tau)
    q = stats.t.ppf(tau, NOISE_DOF)
    truth = beta.copy()
    truth[0] += noise * q
    truth[1] += noise * SLOPE_OF_SCALE * q
    form = quantile_regression_lp(X, y, tau, name=f"lp-quantile-{n}x{n_feat + 1}")
    return form.lp, {"feasible": True, "quantile_coefficients": truth, "planted_x": split_point(X, y, truth)}


def _check_synthetic(params: dict) -> None:
    positive_int(params, "rows")
    positive_int(params, "features")
    fraction(params, "tau", closed_high=False)
    positive(params, "noise")


register(Family(
    name="lp-quantile",
    kind="lp",
    description="Quantile regression LP at level tau on synthetic data: an intercept and `features` "
                "U(0, 10) regressors, responses from a linear model with Student-t(3) noise whose scale "
                "grows with the first regressor. A = [X, I, -I, -X]; the rows (projected) are the "
                "observations.",
    size_keys=("rows", "features"),
    defaults={"rows": None, "features": None, "tau": 0.5, "noise": 1.0},
    param_doc={
        "rows": "observations n (the projected rows), integer >= 1",
        "features": "regressors besides the intercept, integer >= 1",
        "tau": "quantile level, in (0, 1)",
        "noise": "noise scale (units of y) at first regressor 0, > 0",
    },
    build=_build_synthetic,
    projected_dim=lambda p: p["rows"],
    n_points=lambda p: StandardLP.jl_points_for(2 * (p["features"] + 1) + 2 * p["rows"]),
    check=_check_synthetic,
))


# --- the user's data ------------------------------------------------------------------------

@functools.lru_cache(maxsize=32)
def _read_csv(path: str, stamp: tuple, response) -> tuple:
    import pandas as pd

    try:
        frame = pd.read_csv(path)
    except (OSError, ValueError) as error:
        raise InputError(path, f"could not read the CSV file: {error}", "give a comma-separated file with a header row") from None
    if frame.shape[1] < 2 or frame.shape[0] == 0:
        raise InputError(path, f"needs a header, at least one row and two columns, has shape {frame.shape}", "add a response and a regressor column")
    column = frame.columns[-1] if response is None else response
    if column not in frame.columns:
        raise InputError(path, f"has no column {column!r}", f"set response to one of {', '.join(map(str, frame.columns))}")
    try:
        values = frame.to_numpy(dtype=float)
    except (TypeError, ValueError):
        raise InputError(path, "has non-numeric cells", "keep only numeric columns") from None
    if not np.isfinite(values).all():
        raise InputError(path, "contains NaN, empty or infinite cells", "drop or fill the missing observations")
    at = list(frame.columns).index(column)
    return np.delete(values, at, axis=1), values[:, at]


def _csv_data(params: dict) -> tuple:
    """(X, y) of the CSV family, with an intercept column when asked."""
    path = Path(params["path"])
    if not path.is_file():
        raise InputError(str(path), "no such file", "check the path to the CSV file")
    status = path.stat()
    X, y = _read_csv(str(path), (status.st_mtime_ns, status.st_size), params["response"])
    if params["intercept"]:
        X = np.column_stack([np.ones(X.shape[0]), X])
    return X, y


def _build_csv(params: dict, rng: np.random.Generator):
    X, y = _csv_data(params)
    form = quantile_regression_lp(X, y, params["tau"], name=f"lp-quantile-{Path(params['path']).stem}")
    return form.lp, {"feasible": True, "planted_x": split_point(X, y, np.zeros(X.shape[1]))}


def _check_csv(params: dict) -> None:
    require(isinstance(params["path"], str), "path", "must be a file path", "give the CSV file's path")
    fraction(params, "tau", closed_high=False)
    require(params["response"] is None or isinstance(params["response"], str), "response",
            "must be a column name", "give the response column's header text")
    require(isinstance(params["intercept"], bool), "intercept", "must be true or false", "set intercept = true or false")
    _csv_data(params)


def _csv_size(params: dict) -> tuple:
    X, _ = _csv_data(params)
    return X.shape


register(Family(
    name="lp-quantile-csv",
    kind="lp",
    description="Quantile regression LP at level tau on the user's CSV file (header row, numeric "
                "columns; one response, the others regressors). A = [X, I, -I, -X]; the rows "
                "(projected) are the observations; size fixed by the file.",
    size_keys=("path",),
    defaults={"path": None, "tau": 0.5, "response": None, "intercept": True},
    param_doc={
        "path": "CSV file with a header row and numeric cells",
        "tau": "quantile level, in (0, 1)",
        "response": "name of the response column (default: the last column)",
        "intercept": "true adds a column of ones to the regressors",
    },
    build=_build_csv,
    projected_dim=lambda p: _csv_size(p)[0],
    n_points=lambda p: StandardLP.jl_points_for(2 * _csv_size(p)[1] + 2 * _csv_size(p)[0]),
    check=_check_csv,
))
