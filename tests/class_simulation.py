"""Simulated campaigns for calibrating the class scope: synthetic trials through the real cell code.

Model (a random-intercept logistic model, the usual one for clustered binary data): instance i of a
class has its own midpoint ln k50_i = ln K50 + sigma z_i, z_i ~ N(0, 1), and each trial at k
succeeds independently with probability expit(slope (ln k - ln k50_i)). The class-wide success at
k is the mean over instances, E_z[expit(slope (ln k - ln K50 - sigma z))] (Gauss–Hermite
quadrature), and the class k50 is K50 (the mean is 1/2 there by symmetry).

A campaign is one design (instances x replicates, every instance at every k of the grid). Each is
analysed by :func:`calib.analysis.cells.cell_stats`, the function the tables call, and scored:

- false claim (class scope): a class safe k whose true class-wide success is below the target;
- coverage: the k50 interval (cluster-robust, Student t) holds K50; a cell without a fit misses;
- before: the same campaign scored with the pooled rule (the instances scope, which was the only
  answer before) and the k50 interval of the binomial fit that ignores the instances.

Run ``python tests/class_simulation.py`` for the table of the report.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from calib.analysis.cells import cell_stats
from calib.analysis.logistic import fit_logistic

TARGET, LEVEL = 0.9, 0.95
K50 = 20.0
#: the k grid: K50 * 2^(j/2), 5 .. 320 (a step of sqrt(2))
GRID = np.unique(np.round(K50 * 2.0 ** (np.arange(-4, 13) / 2.0)).astype(int))
#: sigma = 0.5 in ln k50 (the spread measured on lp-planted 40x80); slope 2.2 gives a 0/1 intraclass
#: correlation of 0.198 at K50 (see :func:`binary_icc`), the 0.19 measured there
SIGMA, SLOPE = 0.5, 2.2
#: a sharp transition (each instance nearly decides alone at each k): 0/1 intraclass correlation 0.7
SHARP_SLOPE = 8.0
DESIGNS = ((3, 10), (10, 3), (30, 1))

_NODES, _WEIGHTS = np.polynomial.hermite_e.hermegauss(60)
_WEIGHTS = _WEIGHTS / _WEIGHTS.sum()


def class_rate(k, sigma: float = SIGMA, slope: float = SLOPE) -> np.ndarray:
    """True class-wide success at k (mean over instances)."""
    x = slope * (np.log(np.asarray(k, dtype=float))[..., None] - np.log(K50) - sigma * _NODES)
    return special.expit(x) @ _WEIGHTS


def binary_icc(k: float = K50, sigma: float = SIGMA, slope: float = SLOPE) -> float:
    """Intraclass correlation of the 0/1 outcomes at k: Var(p_i) / (p (1 - p))."""
    p_i = special.expit(slope * (np.log(k) - np.log(K50) - sigma * _NODES))
    mean = p_i @ _WEIGHTS
    return float(((p_i - mean) ** 2) @ _WEIGHTS / (mean * (1 - mean)))


def campaign(rng: np.random.Generator, instances: int, replicates: int, sigma: float = SIGMA, slope: float = SLOPE):
    """(k, instance, success): one value per trial of one simulated campaign."""
    log_k50 = np.log(K50) + sigma * rng.standard_normal(instances)
    k = np.repeat(GRID, instances * replicates)
    instance = np.tile(np.repeat(np.arange(instances), replicates), GRID.size)
    p = special.expit(slope * (np.log(k) - log_k50[instance]))
    return k, instance, (rng.random(p.size) < p).astype(int)


@dataclass
class Score:
    """Counts over the campaigns of one design."""

    campaigns: int = 0
    claims_class: int = 0
    false_class: int = 0
    claims_pooled: int = 0
    false_pooled: int = 0
    covered_after: int = 0
    covered_before: int = 0
    near_pooled: int = 0

    def rates(self) -> dict:
        n = max(self.campaigns, 1)
        return {"false_before": self.false_pooled / n, "false_after": self.false_class / n,
                "cover_before": self.covered_before / n, "cover_after": self.covered_after / n,
                "claims_before": self.claims_pooled / n, "claims_after": self.claims_class / n,
                "near_pooled": self.near_pooled / n}


def _covers(fit) -> bool:
    if not fit.ok:
        return False
    _, low, high = fit.k_at(0.5, LEVEL)
    return low <= K50 <= high


def score_design(instances: int, replicates: int, campaigns: int, seed: int, sigma: float = SIGMA,
                 slope: float = SLOPE) -> Score:
    """Run ``campaigns`` simulated campaigns of one design; streams keyed by (design, campaign, seed)."""
    score = Score()
    for index in range(campaigns):
        rng = np.random.default_rng([instances, replicates, index, seed])
        k, instance, success = campaign(rng, instances, replicates, sigma, slope)
        stats = cell_stats(k, instance, success, TARGET, LEVEL)
        score.campaigns += 1
        for safe_k, attr in ((stats.class_safe_k, "class"), (stats.safe_k, "pooled")):
            if safe_k is not None:
                setattr(score, f"claims_{attr}", getattr(score, f"claims_{attr}") + 1)
                if class_rate(safe_k, sigma, slope) < TARGET:
                    setattr(score, f"false_{attr}", getattr(score, f"false_{attr}") + 1)
        score.covered_after += _covers(stats.fit)
        score.covered_before += _covers(fit_logistic(stats.ks, stats.successes, stats.trials))
        score.near_pooled += _within_one_step(stats.class_safe_k, stats.safe_k)
    return score


def _within_one_step(class_k, pooled_k) -> bool:
    """Whether the class safe k lies within one grid step of the pooled one (both empty counts)."""
    if class_k is None or pooled_k is None:
        return class_k is None and pooled_k is None
    return abs(int(np.searchsorted(GRID, class_k)) - int(np.searchsorted(GRID, pooled_k))) <= 1


def main(campaigns: int = 500, seed: int = 11) -> None:
    for slope in (SLOPE, SHARP_SLOPE):
        heterogeneous(campaigns, seed, slope)
    print("no heterogeneity (sigma = 0): class safe k within one grid step of the pooled one")
    for instances, replicates in ((30, 1), (30, 10), (60, 5)):
        rates = score_design(instances, replicates, campaigns, seed, sigma=0.0).rates()
        print(f"{instances:>3} x {replicates:<3}| within one step {rates['near_pooled']:.3f}; claims pooled "
              f"{rates['claims_before']:.3f}, class {rates['claims_after']:.3f}; false class {rates['false_after']:.3f}")


def heterogeneous(campaigns: int, seed: int, slope: float) -> None:
    print(f"\nclass-wide target {TARGET} at {LEVEL:.0%}; sigma = {SIGMA} in ln k50, slope {slope}, "
          f"0/1 intraclass correlation at k50 = {binary_icc(slope=slope):.3f}; grid {GRID.tolist()}; "
          f"{campaigns} campaigns per design")
    print(f"{'design':>8} | {'false claim before':>18} {'after':>6} | {'k50 coverage before':>19} {'after':>6} | "
          f"{'claims before':>13} {'after':>6}")
    for instances, replicates in DESIGNS + ((10, 10), (30, 10), (60, 5)):
        rates = score_design(instances, replicates, campaigns, seed, slope=slope).rates()
        print(f"{instances:>3} x {replicates:<3}| {rates['false_before']:>18.3f} {rates['false_after']:>6.3f} | "
              f"{rates['cover_before']:>19.3f} {rates['cover_after']:>6.3f} | {rates['claims_before']:>13.3f} "
              f"{rates['claims_after']:>6.3f}")


if __name__ == "__main__":
    main()
