"""Published target-dimension bounds for Johnson–Lindenstrauss projections.

``n`` is the number of points whose pairwise geometry the projection must keep. For an LP whose
rows are projected, the points are the n columns of A and the right-hand side b, so n_points =
n_cols + 1 (the choice made throughout calib; see :func:`lp_points`). ``eps`` is the relative
distortion of squared norms, 0 < eps < 1.

Every rule maps (n, eps) -> k (the smallest integer k the bound allows, rounded up) and is listed in
:data:`RULES` by name.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from calib.errors import InputError


def dasgupta_gupta(n, eps):
    """Dasgupta–Gupta: k >= 4 ln n / (eps^2/2 - eps^3/3), rounded up.

    Reference: S. Dasgupta and A. Gupta, "An elementary proof of a theorem of Johnson and
    Lindenstrauss", Random Structures & Algorithms 22(1):60–65, 2003 (Theorem 2.1).
    scikit-learn's johnson_lindenstrauss_min_dim truncates the same quotient (5920 and 221 here).

    >>> int(dasgupta_gupta(1000, 0.1))
    5921
    >>> int(dasgupta_gupta(100, 0.5))
    222
    """
    n, eps = np.asarray(n, dtype=float), np.asarray(eps, dtype=float)
    return np.ceil(4.0 * np.log(n) / (eps**2 / 2.0 - eps**3 / 3.0)).astype(np.int64)


def ln_over_eps2(n, eps):
    """Common-practice rule of thumb k = ln(n) / eps^2, rounded up (no published constant).

    >>> int(ln_over_eps2(1000, 0.1))
    691
    """
    n, eps = np.asarray(n, dtype=float), np.asarray(eps, dtype=float)
    return np.ceil(np.log(n) / eps**2).astype(np.int64)


#: rule name -> function (n, eps) -> k
RULES: dict[str, Callable] = {
    "dasgupta-gupta": dasgupta_gupta,
    "ln-over-eps2": ln_over_eps2,
}


def k_from_eps(rule: str, n: int, eps: float) -> int:
    """k for ``n`` points at distortion ``eps`` by the named rule (validated here)."""
    if rule not in RULES:
        raise InputError("k rule", f"unknown rule {rule!r}", f"choose one of {', '.join(sorted(RULES))}")
    if not 0.0 < float(eps) < 1.0:
        raise InputError("eps", f"must lie in (0, 1), got {eps!r}", "pick a distortion such as 0.2")
    if int(n) < 2:
        raise InputError("n", f"needs at least 2 points, got {n!r}", "count the points the projection must keep")
    return int(RULES[rule](int(n), float(eps)))


def lp_points(n_cols: int) -> int:
    """Points an LP row projection must keep: the n columns of A and b (n + 1)."""
    return int(n_cols) + 1
