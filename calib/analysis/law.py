"""Scaling law across sizes: k(n) ~= a + C ln n, fitted by ordinary least squares.

``n`` is the number of points the JL theory counts (:mod:`calib.theory`: for an LP with rows
projected, its columns plus b). The JL bounds all have the shape k = c(eps) ln n, so C is the
empirical counterpart of c(eps) and a absorbs what the logarithm does not explain (for instance a
rank floor). With three or more distinct sizes the standard error of C comes from the residual
variance; with two the line is exact and has none.

Evaluating the law outside [n_min, n_max] of the measured sizes is an extrapolation and is
flagged as one. Numbers smaller than 1e-9 times the largest |k| are rounding noise of the
least-squares solve and are reported as 0 (so equal inputs give equal tables on any machine).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

import numpy as np
from numpy.typing import ArrayLike


@dataclass(frozen=True)
class Law:
    """A fitted line k = a + C ln n, or the reason there is none (``a`` is None then).

    ``a`` and ``C`` are in units of k (projected dimensions; C per unit of ln n), ``C_se`` is the
    standard error of C (None with two sizes), ``residuals`` one per fitted size, ``n_min`` and
    ``n_max`` the range of the point counts fitted.
    """

    a: Optional[float] = None
    C: Optional[float] = None
    C_se: Optional[float] = None
    residuals: tuple = ()
    n_min: Optional[int] = None
    n_max: Optional[int] = None
    reason: str = ""

    @property
    def ok(self) -> bool:
        """Whether a line was fitted (else ``reason`` says why)."""
        return self.a is not None

    def at(self, n: float) -> float:
        """a + C ln n: the law's k (projected dimensions) at ``n`` points."""
        return float(self.a + self.C * np.log(float(n)))

    def extrapolates(self, n: float) -> bool:
        """Whether ``n`` (points) lies outside the measured sizes [n_min, n_max]."""
        return not (self.n_min <= float(n) <= self.n_max)


def fit_law(n: ArrayLike, k: ArrayLike) -> Law:
    """Least-squares fit of k = a + C ln n over the measured sizes (``None`` values of k skipped).

    ``n`` (point counts, >= 2) and ``k`` (a safe k per size, or None) have one value per size. The
    standard error of C is sqrt(s^2 [(X'X)^-1]_CC) with s^2 the residual sum of squares over
    (sizes - 2), the ordinary least-squares formula (e.g. Seber & Lee, "Linear Regression Analysis",
    2nd ed., 2003, chapter 3).

    >>> law = fit_law([100, 1000, 10000], [20, 30, 40])
    >>> round(float(law.C * np.log(10)), 6), round(law.at(100), 6)
    (10.0, 20.0)

    Checked against statsmodels (``OLS(k, add_constant(log(n)))``: a = 0.6, C = 4.29952, its
    standard error 0.22567):

    >>> law = fit_law([100, 1000, 10000, 100000], [21, 29, 41, 50])
    >>> round(law.a, 2), round(law.C, 5), round(law.C_se, 5)
    (0.6, 4.29952, 0.22567)
    >>> fit_law([100, 1000], [None, 12]).reason
    'fewer than two sizes with a value: no law'
    """
    pairs = [(float(size), float(value)) for size, value in zip(n, k) if value is not None and np.isfinite(value)]
    if len(pairs) < 2:
        return Law(reason="fewer than two sizes with a value: no law")
    sizes, values = map(np.asarray, zip(*pairs))
    x = np.log(sizes)
    if np.unique(x).size < 2:
        return Law(reason="all sizes have the same n: no law in n")
    design = np.column_stack([np.ones_like(x), x])
    (a, C), *_ = np.linalg.lstsq(design, values, rcond=None)
    noise = 1e-9 * max(1.0, float(np.abs(values).max()))

    def denoise(value: float) -> float:
        return 0.0 if abs(value) < noise else float(value)

    residuals = values - design @ np.array([a, C])
    dof = len(values) - 2
    C_se = None
    if dof > 0:
        sigma2 = float(residuals @ residuals) / dof
        C_se = denoise(float(np.sqrt(sigma2 * np.linalg.inv(design.T @ design)[1, 1])))
    return Law(denoise(a), denoise(C), C_se, tuple(denoise(r) for r in residuals), int(sizes.min()), int(sizes.max()))


def law_formula(a: float, C: float, C_se: Optional[float]) -> str:
    """``k = a + C ln n``, or the constant when every fitted size has the same k (C = 0 exactly).

    >>> law_formula(60.0, 0.0, 0.0), law_formula(5.47, 7.22, 4.17)
    ('k = 60 at every fitted n (no growth with ln n)', 'k = 5.47 + 7.22 ± 4.17 ln n')
    """
    if C == 0 and not C_se:
        return f"k = {a:.3g} at every fitted n (no growth with ln n)"
    se = f" ± {C_se:.3g}" if C_se is not None else ""
    sign = "-" if C < 0 else "+"
    return f"k = {a:.3g} {sign} {abs(C):.3g}{se} ln n"


def censored_law(n: list[int], values: list, censored: list[str]) -> Law:
    """The law k = a + C ln n over the uncensored sizes only (at least two needed)."""
    law = fit_law(n, [None if why else value for value, why in zip(values, censored)])
    if not law.ok and any(censored):
        return Law(reason=f"{law.reason} ({sum(map(bool, censored))} censored size(s) are not fitted as values)")
    return law
