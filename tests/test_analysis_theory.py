"""The analysis against published theory: pure-JL point sets (Dasgupta-Gupta) and basis pursuit.

Both run real campaigns through the runner and the store (the point-set distortion is measured by
calib.reduce.points), except the orthonormal set, which no family generates: its trials go
through the same points handler and then the same analysis (calib.analysis.tables.build_analysis).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, stats

from analysis_campaign import run_spec
from calib import projectors, theory
from calib.analysis.tables import build_analysis, build_table
from calib.conic import PointSet
from calib.reduce.points import PointsHandler
from calib.store.database import Store
from calib.verdicts.saferule import Confidence
from calib.verdicts.success import make_predicate

EPS = 0.5
REPLICATES = 30  # 30 of 30 successes give a one-sided 95% Clopper-Pearson bound of 0.905 >= 0.9

POINTS = """
[campaign]
name = "jl-cloud"
root_seed = 2026
replicates = 30

[[families]]
name = "points-gaussian"
sizes = [{points = 16, dim = 300}, {points = 48, dim = 300}, {points = 128, dim = 300}]
instances = 1

[sweep]
projectors = ["gaussian"]
k = [40, 64, 96, 128, 160, 200, 240, 290]
"""


def _analyse(spec_text: str, folder, predicate) -> dict:
    store = Store.open_existing(run_spec(spec_text, folder))
    try:
        return build_table(store, predicate, Confidence())["analyses"][0]
    finally:
        store.close()


@pytest.fixture(scope="module")
def gaussian_cloud_analysis(tmp_path_factory):
    return _analyse(POINTS, tmp_path_factory.mktemp("points"), make_predicate("distortion", distortion=EPS))


def test_pure_jl_point_set_transition_lies_below_dasgupta_gupta(gaussian_cloud_analysis):
    # Dasgupta and Gupta (2003), proof of Theorem 2.1: each pair fails with probability
    # <= 2 exp(-k (eps^2/2 - eps^3/3) / 2); the union over n(n-1)/2 pairs is <= delta from
    # k = 2 ln(n(n-1)/delta) / (eps^2/2 - eps^3/3), the bound the table shows at its delta (0.1).
    # The measured transition (k50, with its interval) must sit below that k; the distortion
    # tolerance is the eps of the table (calib.analysis.bounds).
    assert len(gaussian_cloud_analysis["entries"]) == 3
    for entry in gaussian_cloud_analysis["entries"]:
        n, delta = entry["n_points"], entry["theory"]["failure"]
        bound = math.ceil(2 * math.log(n * (n - 1) / delta) / (EPS**2 / 2 - EPS**3 / 3))
        assert delta == Confidence().delta
        assert entry["theory"]["eps"] == EPS and entry["theory"]["bounds"]["dasgupta-gupta"]["k"] == bound
        assert entry["transition"]["k50"] < bound
        assert entry["transition"]["k50_interval"][1] < bound
    # Not asserted: the safe k (90% at 95% confidence) lies near the bound itself, as it should: the
    # theorem only promises success 1/n there, and for a Gaussian cloud the pairs are close to
    # independent, so the union bound behind it is nearly tight.


def _pair_failure(k: int, eps: float) -> float:
    """Probability that one pair leaves [1 - eps, 1 + eps] in squared distance under a Gaussian sketch.

    For T with iid N(0, 1/k) entries, k ‖Tx‖²/‖x‖² ~ χ²_k (a sum of k squared standard normals: a
    fact of the Gaussian distribution, the one Dasgupta and Gupta 2003 start from); reference for
    the χ² tails: scipy.stats.chi2.
    """
    return float(stats.chi2.cdf(k * (1 - eps), k) + stats.chi2.sf(k * (1 + eps), k))


def _union_k(n: int, eps: float, rate: float) -> int:
    """Smallest k at which the union bound over n(n-1)/2 pairs promises all pairs with probability >= rate."""
    k = 1
    while 1 - n * (n - 1) / 2 * _pair_failure(k, eps) < rate:
        k += 1
    return k


def test_pure_jl_point_set_law_follows_the_union_bound_of_the_chi_square_law(gaussian_cloud_analysis):
    # At the union bound's k for rate 1/2 every pair holds with probability >= 1/2, so the measured k50
    # of each size lies below it (its interval may not lie wholly above). For a Gaussian cloud the pairs
    # are close to independent, so the union bound is nearly tight and its k50 grows at the same rate in
    # ln n: the fitted constant C of the k50 law must match the union bound's constant over the same
    # sizes within 3 standard errors of the fit (a z-test at level 0.3%).
    (law,) = gaussian_cloud_analysis["laws"]
    entries = gaussian_cloud_analysis["entries"]
    union = [_union_k(entry["n_points"], EPS, 0.5) for entry in entries]
    for entry, k in zip(entries, union):
        assert entry["transition"]["k50_interval"][0] <= k, (entry["n_points"], entry["transition"], k)
    union_C = stats.linregress(np.log([entry["n_points"] for entry in entries]), union).slope
    fit = law["k50_law"]
    assert fit["C_se"] is not None and abs(fit["C"] - union_C) <= 3 * fit["C_se"], (fit["C"], fit["C_se"], union_C)
    # the safe k grows no faster than the Dasgupta-Gupta rule's constant 4 / (eps²/2 - eps³/3) = 48
    assert law["theory"]["rules"]["dasgupta-gupta"]["C"] == pytest.approx(4 / (EPS**2 / 2 - EPS**3 / 3), abs=1 / 30)
    assert 0 < law["safe_k_law"]["C"] <= law["theory"]["rules"]["dasgupta-gupta"]["C"]


def test_orthonormal_point_set_succeeds_at_the_bound_at_least_as_the_union_bound_promises():
    # At the Dasgupta-Gupta k each of the n(n-1)/2 pairs e_i - e_j of the orthonormal set fails with
    # the χ² probability of _pair_failure, so all pairs hold with probability at least
    # 1 - n(n-1)/2 * p (union bound; 0.9987 here, much more than the 1/n the theorem states). The
    # measured rate must not lie significantly below that: the one-sided 95% Clopper-Pearson upper
    # bound of the successes must reach it (a binomial test at level 5%; one failure in 30 already
    # fails it). (eps = 0.7 keeps that k below the dimension n of the orthonormal set.)
    n, eps = 192, 0.7
    bound = int(theory.dasgupta_gupta(n, eps))
    assert bound < n
    promised = 1 - n * (n - 1) / 2 * _pair_failure(bound, eps)
    assert promised > 1 / n
    points = PointSet(np.eye(n))
    original = PointsHandler.solve_original(points, {})
    records = [PointsHandler.trial_records(points, original, projectors.make("gaussian", bound, n, [n, replicate]), ["none"], {})[0]
               for replicate in range(REPLICATES)]
    rows = pd.DataFrame(records).assign(
        family="points-orthonormal", size=f"points={n},dim={n}", params="{}", class_params="{}", projector="gaussian",
        retrieval="none", k=bound, k_label="", kind="points", status="ok", projected_dim=n, n_points=n,
        instance_id="orthonormal")
    analysis = build_analysis(rows, make_predicate("distortion", distortion=eps), Confidence())
    (point,) = analysis["entries"][0]["grid"]
    assert point["k"] == bound and point["trials"] == REPLICATES
    upper = stats.binomtest(point["successes"], REPLICATES, alternative="less").proportion_ci(0.95).high
    assert upper >= promised, (point["successes"], upper, promised)


BASIS_PURSUIT = """
[campaign]
name = "bp-transition"
root_seed = 11
replicates = 1

[[families]]
name = "lp-basis-pursuit"
sizes = [{{measurements = 80, length = {length}}}]
instances = 30
params = {{sparsity = {sparsity}, signs = "signed"}}

[sweep]
projectors = ["gaussian"]
k = [32, 36, 40, 44, 48, 56]
retrievals = ["basis-lstsq"]

[solver]
time_limit_s = 20
"""


def _l1_transition(length: int, sparsity: int) -> float:
    """length * psi(s/length), psi(rho) = inf_tau rho(1 + tau^2) + (1 - rho) 2 int_tau^inf (u - tau)^2 phi(u) du.

    Statistical dimension of the l1 descent cone at an s-sparse point: Amelunxen, Lotz, McCoy and
    Tropp, "Living on the edge", Information and Inference 3(3):224-294, 2014, Proposition 4.5 (it
    reproduces the Donoho-Tanner weak transition for Gaussian measurements) (formula from memory).
    """
    rho = sparsity / length

    def excess(tau):
        tail = 2.0 * ((1 + tau**2) * stats.norm.sf(tau) - tau * stats.norm.pdf(tau))
        return rho * (1 + tau**2) + (1 - rho) * tail

    return length * optimize.minimize_scalar(excess, bounds=(0.0, 10.0), method="bounded", options={"xatol": 1e-10}).fun


def test_basis_pursuit_k50_matches_the_published_phase_transition(tmp_path):
    # A row projection of basis pursuit with Gaussian A is basis pursuit with a k x N measurement
    # matrix whose null space is uniformly distributed (rotation invariance of A), i.e. Gaussian
    # measurements; one projection per instance keeps the 30 trials per k independent (projections of
    # one instance share its null space and would be correlated). Success: the projected optimum equals the original one (relative gap <= 1e-5),
    # i.e. l1 minimisation with k measurements still recovers the planted signal's norm.
    # Location: N psi(s/N) (ALMT 2014, Prop. 4.5); its stated error is 2 sqrt(N/s) (the statistical
    # dimension lies in [N psi - 2 sqrt(N/s), N psi]); that is the tolerance on the measured k50.
    length, sparsity = 200, 10
    analysis = _analyse(BASIS_PURSUIT.format(length=length, sparsity=sparsity), tmp_path, make_predicate("bound", gap=1e-5))
    (entry,) = analysis["entries"]
    location, tolerance = _l1_transition(length, sparsity), 2 * math.sqrt(length / sparsity)
    assert location == pytest.approx(40.78, abs=0.01)
    assert abs(entry["transition"]["k50"] - location) <= tolerance
    low, high = entry["transition"]["k50_interval"]
    assert high - low < tolerance  # the measurement is sharp enough for the comparison to mean something
