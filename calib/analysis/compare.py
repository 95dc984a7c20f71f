"""Paired projector comparisons: the same instances under two projectors, with intervals and a verdict.

Trials of different projectors in one campaign share their instances (the same instance id, the
same cached original solve), so two projectors are compared *paired*: instance by instance, and at
each k and replicate index, trial by trial. A paired comparison removes the instance-to-instance
spread that dominates an unpaired one.

A *comparison group* is (family, size, parameters, retrieval); within it every pair of projectors
(or each projector against a reference, Gaussian by default) is compared on the instances both
measured. For a pair (A, B):

- **k50 ratio** k50(A) / k50(B) from the logistic fits of :mod:`calib.analysis.logistic`, and the
  **safe-k difference** safe k(A) - safe k(B) under the instances-scope rule (one-sided
  Clopper–Pearson at every k, monotone, :func:`calib.analysis.tables.safe_k_rule`). Their
  intervals come from a bootstrap over whole instances, resampled jointly across k and jointly for
  both projectors (one resample of instance ids serves every k and both members of the pair), the
  percentile method: A. C. Davison and D. V. Hinkley, *Bootstrap Methods and their Application*,
  Cambridge University Press, 1997, section 3.8 (multistage sampling: resample the clusters).
- **The class-scope test**: a paired sign-flip permutation test over instances of
  d_i = mean over the common k of (success rate of A - success rate of B) on instance i. Under
  "A and B are equal in law" the two projectors' results on one instance are exchangeable, so each
  d_i is symmetric about 0 and the 2^n sign patterns are equally likely; the test is exact (all
  patterns for n <= 16 instances, else 20,000 seeded random patterns with p = (1 + hits) / (1 + draws)).
  Reference: R. A. Fisher, *The Design of Experiments*, 1935, section 21 (the randomisation test);
  E. J. G. Pitman, "Significance tests which may be applied to samples from any populations",
  JRSS Suppl. 4:119–130, 1937. With n instances the smallest two-sided p-value is 2 / 2^n, so fewer
  than 6 instances can never show a difference at 5%: the verdict says so.
- **The instances-scope test at each k**: McNemar's exact test on the matched trials (same instance,
  k and replicate index): only discordant pairs count, b = A succeeds and B fails, c = the reverse,
  p = min(1, 2 P(Bin(b + c, 1/2) <= min(b, c))). Q. McNemar, "Note on the sampling error of the
  difference between correlated proportions or percentages", Psychometrika 12(2):153–157, 1947.
  Valid conditionally on the instances measured (their replicates are independent draws).
- **Cost**: medians of the sketch time and of the end-to-end time (sketch + projected solve +
  retrieval) over the matched trials, their ratio A / B, and the quartiles of the per-pair ratios
  as the spread. The sketch's peak memory is not recorded by the runner and is reported as such.

The verdict line per pair reads "A needs x% more k than B for the same success (k50 ratio, interval)
and is y× faster to apply", or "no detectable difference at this design" with the design that would
detect one: the instances needed for a 10% k50 difference at 80% power, from the bootstrap standard
error of ln(k50 ratio), which shrinks like 1/sqrt(instances).

All randomness (bootstrap, sampled sign patterns) is drawn from streams keyed by the group's
identity and the campaign's root seed, so the same store always gives the same bytes.
Comparisons are empirical evidence about the instances and class measured, not proofs.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Optional

import numpy as np
import pandas as pd
from scipy import stats

from calib.analysis.logistic import fit_logistic
from calib.analysis.tables import num, solver_error_mask
from calib.verdicts.saferule import Confidence, safe_k_rule
from calib.verdicts.stats import clopper_pearson_lower

if TYPE_CHECKING:
    from calib.analysis.records import Comparison

#: the columns that make a comparison group (a cell without its projector)
GROUP_KEYS = ["family", "size", "params", "retrieval"]
#: trials matched across projectors on these
MATCH_KEYS = ["instance_id", "k", "replicate"]
#: sign-flip tests enumerate every pattern up to this many instances, then sample
EXACT_INSTANCES = 16
SAMPLED_PATTERNS = 20_000
#: the smallest share of bootstrap resamples that must give a value for its interval to be shown
MIN_RESAMPLE_SHARE = 0.9
#: the k50 difference and power quoted in the design advice
ADVICE_DIFFERENCE = 0.10
ADVICE_POWER = 0.80
SKETCH_MEMORY_NOTE = "not recorded by the runner"


@dataclass(frozen=True)
class Settings:
    """How a comparison is made: confidence (two-sided intervals, tests at 1 - level), resamples, seed."""

    confidence: Confidence
    resamples: int = 1000
    root_seed: int = 0


# ----- tests ---------------------------------------------------------------------------------

def mcnemar_exact(a_only: int, b_only: int) -> float:
    """Two-sided exact McNemar p-value from the discordant counts (A succeeds alone, B succeeds alone).

    p = min(1, 2 P(Bin(a_only + b_only, 1/2) <= min(a_only, b_only))); 1 when there is no discordant pair.

    >>> round(mcnemar_exact(9, 1), 6)   # 2 * (1 + 10) / 1024
    0.021484
    >>> mcnemar_exact(0, 0)
    1.0
    """
    discordant = a_only + b_only
    if discordant == 0:
        return 1.0
    return float(min(1.0, 2.0 * stats.binom.cdf(min(a_only, b_only), discordant, 0.5)))


def sign_flip_pvalue(differences, rng: np.random.Generator) -> float:
    """Two-sided paired sign-flip permutation p-value of sum(differences) = 0 (module docstring).

    Exact over all 2^n sign patterns for n <= :data:`EXACT_INSTANCES`; otherwise
    (1 + hits) / (1 + draws) over :data:`SAMPLED_PATTERNS` random patterns.

    >>> round(sign_flip_pvalue([0.3, 0.2, 0.1, 0.4, 0.2, 0.1], np.random.default_rng(0)), 6)  # 2 / 64
    0.03125
    >>> sign_flip_pvalue([0.3, -0.3], np.random.default_rng(0))
    1.0
    """
    d = np.asarray(differences, dtype=float)
    observed = abs(d.sum())
    tolerance = 1e-12 * max(1.0, np.abs(d).sum())
    if d.size <= EXACT_INSTANCES:
        signs = np.array(list(itertools.product((1.0, -1.0), repeat=d.size)))
        return float(np.mean(np.abs(signs @ d) >= observed - tolerance))
    signs = rng.choice((1.0, -1.0), size=(SAMPLED_PATTERNS, d.size))
    hits = int(np.sum(np.abs(signs @ d) >= observed - tolerance))
    return (1.0 + hits) / (1.0 + SAMPLED_PATTERNS)


def instances_for_any_detection(alpha: float) -> int:
    """Fewest instances whose sign-flip test can reach a two-sided p <= alpha (2 / 2^n <= alpha).

    >>> instances_for_any_detection(0.05)
    6
    """
    return int(math.ceil(math.log2(2.0 / alpha)))


# ----- per-instance counts and the bootstrap -------------------------------------------------

@dataclass(frozen=True)
class Counts:
    """Successes and trials per (instance, k) of one projector: arrays of shape (n_instances, n_k)."""

    ks: np.ndarray
    successes: np.ndarray
    trials: np.ndarray


def instance_counts(rows: pd.DataFrame, instances: list, ks: list) -> Counts:
    """:class:`Counts` of ``rows`` (one projector; columns instance_id, k, success) on the given grid."""
    table = rows.groupby(["instance_id", "k"])["success"].agg(["sum", "size"])
    index = pd.MultiIndex.from_product([instances, ks], names=["instance_id", "k"])
    table = table.reindex(index, fill_value=0)
    shape = (len(instances), len(ks))
    return Counts(np.asarray(ks), table["sum"].to_numpy(float).reshape(shape), table["size"].to_numpy(float).reshape(shape))


def k50(ks, successes, trials) -> Optional[float]:
    """k50 of the logistic fit of pooled counts per k, None when the fit does not exist."""
    measured = trials > 0
    fit = fit_logistic(ks[measured], successes[measured], trials[measured])
    return float(np.exp(fit.log_k_at(0.5))) if fit.ok else None


def safe_ks(ks, successes, trials, confidence: Confidence) -> list[Optional[int]]:
    """The instances-scope safe k (monotone Clopper–Pearson rule) of each row of pooled counts per k.

    ``successes`` and ``trials`` have shape (resamples, n_k); k values a row did not measure are skipped.
    """
    successes, trials = np.atleast_2d(successes), np.atleast_2d(trials)
    passes = clopper_pearson_lower(successes, np.maximum(trials, 1.0), confidence.level) >= confidence.target
    answers = []
    for row_passes, row_trials in zip(passes, trials):
        measured = row_trials > 0
        answers.append(safe_k_rule(ks[measured], row_passes[measured])[0] if measured.any() else None)
    return answers


def _summaries(counts: Counts, weights: np.ndarray, confidence: Confidence) -> tuple[list, list]:
    """(k50 per weight vector, safe k per weight vector) of instance-weighted pooled counts."""
    successes, trials = weights @ counts.successes, weights @ counts.trials
    k50s = [k50(counts.ks, s, t) for s, t in zip(successes, trials)]
    return k50s, safe_ks(counts.ks, successes, trials, confidence)


def bootstrap_weights(n_instances: int, resamples: int, rng: np.random.Generator) -> np.ndarray:
    """(resamples, n_instances) multiplicities of instances drawn with replacement (one row per resample)."""
    draws = rng.integers(0, n_instances, size=(resamples, n_instances))
    return np.stack([np.bincount(row, minlength=n_instances) for row in draws]).astype(float)


def percentile_interval(values: list, level: float) -> tuple[Optional[list], float]:
    """([low, high] percentile interval or None, share of resamples with a value)."""
    finite = np.array([value for value in values if value is not None and np.isfinite(value)], dtype=float)
    share = finite.size / max(1, len(values))
    if share < MIN_RESAMPLE_SHARE:
        return None, share
    alpha = 1.0 - level
    low, high = np.quantile(finite, [alpha / 2.0, 1.0 - alpha / 2.0])
    return [float(low), float(high)], share


# ----- one pair ------------------------------------------------------------------------------

def _stream(group: tuple, pair: tuple, root_seed: int) -> np.random.Generator:
    """The comparison's own stream, keyed by its identity (never by order of computation)."""
    digest = hashlib.sha256(json.dumps([list(map(str, group)), list(pair)]).encode()).digest()
    return np.random.default_rng([int.from_bytes(digest[:8], "little"), int(root_seed)])


def _ratio_quartiles(a: pd.Series, b: pd.Series) -> dict:
    """Median of A, of B, their ratio of medians A/B and quartiles of the per-pair ratios (None when missing)."""
    a, b = pd.to_numeric(a, errors="coerce"), pd.to_numeric(b, errors="coerce")
    both = a.notna() & b.notna() & (b > 0) & (a > 0)
    if not both.any():
        return {"median_a_s": None, "median_b_s": None, "ratio": None, "ratio_quartiles": None}
    ratios = (a[both] / b[both]).to_numpy()
    median_a, median_b = float(a[both].median()), float(b[both].median())
    return {"median_a_s": num(median_a, 4), "median_b_s": num(median_b, 4), "ratio": num(median_a / median_b, 4),
            "ratio_quartiles": [num(q, 4) for q in np.quantile(ratios, [0.25, 0.75])]}


def end_to_end_seconds(rows: pd.DataFrame) -> pd.Series:
    """Per row: the stored end-to-end time ``t_total`` (sketch + projected solve + retrieval, repairs and
    warm solves included; :mod:`calib.metrics`), NaN where it is missing."""
    return pd.to_numeric(rows["t_total"], errors="coerce")


def cost(matched: pd.DataFrame) -> dict:
    """Sketch and end-to-end time of A against B over the matched trials (suffixes _a, _b)."""
    return {"sketch": _ratio_quartiles(matched["t_sketch_a"], matched["t_sketch_b"]),
            "end_to_end": _ratio_quartiles(matched["e2e_a"], matched["e2e_b"]),
            "sketch_peak_memory": SKETCH_MEMORY_NOTE}


def per_k_tests(matched: pd.DataFrame) -> list[dict]:
    """McNemar's exact test at every k both projectors measured (instances scope)."""
    tests = []
    for k, at_k in matched.groupby("k", sort=True):
        a, b = at_k["success_a"].astype(bool), at_k["success_b"].astype(bool)
        a_only, b_only = int((a & ~b).sum()), int((~a & b).sum())
        tests.append({"k": int(k), "pairs": int(len(at_k)), "rate_a": num(a.mean()), "rate_b": num(b.mean()),
                      "a_only": a_only, "b_only": b_only, "mcnemar_p": num(mcnemar_exact(a_only, b_only))})
    return tests


def class_test(a: Counts, b: Counts, rng: np.random.Generator) -> dict:
    """The sign-flip test over instances on the k both measured (see the module docstring)."""
    common = (a.trials > 0) & (b.trials > 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        rate_a, rate_b = a.successes / a.trials, b.successes / b.trials
    usable = common.any(axis=1)
    differences = [float(np.mean((rate_a[i] - rate_b[i])[common[i]])) for i in np.flatnonzero(usable)]
    if not differences:
        return {"instances": 0, "mean_difference": None, "p": None}
    return {"instances": len(differences), "mean_difference": num(np.mean(differences)),
            "p": num(sign_flip_pvalue(differences, rng))}


def design_power(log_ratios: list, n_instances: int, confidence: Confidence) -> dict:
    """What the design can detect, from the bootstrap spread of ln(k50 ratio) (which shrinks like 1/sqrt(instances)).

    ``detectable``: the k50 difference (a fraction) found with :data:`ADVICE_POWER` at the test's level,
    exp((z_{1-alpha/2} + z_power) sd) - 1; ``instances_for_10pct``: the instances that would detect a
    10% difference, n (z sd / ln 1.1)^2, never fewer than the sign-flip test needs to detect anything.
    """
    finite = np.array([value for value in log_ratios if value is not None and np.isfinite(value)])
    if finite.size < 2:
        return {"detectable": None, "instances_for_10pct": None}
    spread = float(np.std(finite, ddof=1))
    z = stats.norm.ppf(1.0 - (1.0 - confidence.level) / 2.0) + stats.norm.ppf(ADVICE_POWER)
    needed = n_instances * (z * spread / math.log1p(ADVICE_DIFFERENCE)) ** 2
    floor = instances_for_any_detection(1.0 - confidence.level)
    return {"detectable": num(math.expm1(z * spread)), "instances_for_10pct": max(floor, int(math.ceil(needed)))}


def compare_pair(a_rows: pd.DataFrame, b_rows: pd.DataFrame, names: tuple[str, str], group: tuple,
                 settings: Settings) -> dict:
    """The comparison of projectors ``names = (A, B)`` on the rows of one group (each with ``success``)."""
    confidence = settings.confidence
    instances = sorted(set(a_rows["instance_id"]) & set(b_rows["instance_id"]))
    a_rows, b_rows = a_rows[a_rows["instance_id"].isin(instances)], b_rows[b_rows["instance_id"].isin(instances)]
    ks = sorted(set(a_rows["k"]) | set(b_rows["k"]))
    a, b = instance_counts(a_rows, instances, ks), instance_counts(b_rows, instances, ks)
    rng = _stream(group, names, settings.root_seed)
    weights = np.vstack([np.ones(len(instances)), bootstrap_weights(len(instances), settings.resamples, rng)])
    (k50_a, *boot_k50_a), (safe_a, *boot_safe_a) = _summaries(a, weights, confidence)
    (k50_b, *boot_k50_b), (safe_b, *boot_safe_b) = _summaries(b, weights, confidence)
    log_ratios = [math.log(x / y) if x and y else None for x, y in zip(boot_k50_a, boot_k50_b)]
    ratio_interval, ratio_share = percentile_interval(log_ratios, confidence.level)
    safe_diffs = [x - y if x is not None and y is not None else None for x, y in zip(boot_safe_a, boot_safe_b)]
    safe_interval, safe_share = percentile_interval(safe_diffs, confidence.level)
    matched = a_rows.assign(e2e=end_to_end_seconds(a_rows)).merge(
        b_rows.assign(e2e=end_to_end_seconds(b_rows)), on=MATCH_KEYS, suffixes=("_a", "_b"))
    result = {
        "a": names[0], "b": names[1], "instances": len(instances), "matched_trials": int(len(matched)),
        "k50": {"a": num(k50_a), "b": num(k50_b), "ratio": num(k50_a / k50_b) if k50_a and k50_b else None,
                "ratio_interval": None if ratio_interval is None else [num(math.exp(v)) for v in ratio_interval],
                "resamples_with_fit": num(ratio_share)},
        "safe_k": {"a": safe_a, "b": safe_b, "difference": None if safe_a is None or safe_b is None else safe_a - safe_b,
                   "difference_interval": None if safe_interval is None else [num(v) for v in safe_interval],
                   "resamples_with_value": num(safe_share)},
        "class_test": class_test(a, b, rng),
        "per_k": per_k_tests(matched),
        "cost": cost(matched),
        "design": design_power(log_ratios, len(instances), confidence),
    }
    result["verdict"] = verdict(result, confidence)
    return result


def _speed_text(result: dict) -> str:
    """", and is y× faster to apply (end to end z×)" from the cost ratios A / B ("" when not measured)."""
    sketch, end_to_end = result["cost"]["sketch"]["ratio"], result["cost"]["end_to_end"]["ratio"]
    if not sketch:
        return ""
    word = f"{1.0 / sketch:.3g}× faster" if sketch < 1 else f"{sketch:.3g}× slower"
    whole = f" (end to end {end_to_end:.3g}× the time)" if end_to_end else ""
    return f"; {result['a']} is {word} to apply{whole}"


def verdict(result: dict, confidence: Confidence) -> str:
    """One line: the detected difference with its interval and cost, or "no detectable difference" and the design."""
    a, b, alpha = result["a"], result["b"], 1.0 - confidence.level
    test, k50s, design = result["class_test"], result["k50"], result["design"]
    interval = k50s["ratio_interval"]
    ratio_text = "" if not k50s["ratio"] else f"k50 ratio {k50s['ratio']:.3g}" + (
        "" if interval is None else f", {confidence.level:.0%} interval {interval[0]:.3g}–{interval[1]:.3g}")
    p_text = "" if test["p"] is None else f"sign-flip p = {test['p']:.3g} over {test['instances']} instances"
    evidence = "; ".join(part for part in (ratio_text, p_text) if part)
    if test["p"] is not None and test["p"] <= alpha and k50s["ratio"]:
        share = (k50s["ratio"] - 1.0) * 100.0
        direction = f"{share:.0f}% more" if share >= 0 else f"{-share:.0f}% less"
        return f"{a} needs {direction} k than {b} for the same success ({evidence}){_speed_text(result)}"
    if test["p"] is not None and test["p"] <= alpha:  # a difference without a transition to size it in k
        word = "less" if test["mean_difference"] < 0 else "more"
        return (f"{a} succeeds {word} often than {b} at the same k (mean difference {test['mean_difference']:+.3g} "
                f"over the common k; {evidence}); no k50 to size it in k (the success curves have no fitted "
                f"transition){_speed_text(result)}")
    minimum = instances_for_any_detection(alpha)
    if result["instances"] < minimum:
        reach = f"{result['instances']} instances can never show a difference at {alpha:g}; at least {minimum} are needed"
    elif design["detectable"] is None:
        reach = "too few fits to size the design"
    else:
        reach = (f"this design detects a k50 difference of about {design['detectable']:.0%} with {ADVICE_POWER:.0%} "
                 f"power; 10% needs about {design['instances_for_10pct']} instances")
    return f"{a} vs {b}: no detectable difference at this design ({evidence}); {reach}{_speed_text(result)}"


# ----- a whole store -------------------------------------------------------------------------

def projector_pairs(present: list[str], reference: Optional[str], all_pairs: bool) -> list[tuple[str, str]]:
    """The (A, B) pairs to compare: every pair, or each projector against the reference (B).

    >>> projector_pairs(["srht", "gaussian", "countsketch"], "gaussian", False)
    [('countsketch', 'gaussian'), ('srht', 'gaussian')]
    >>> projector_pairs(["srht", "gaussian"], None, True)
    [('gaussian', 'srht')]
    """
    present = sorted(present)
    if all_pairs or reference is None:
        return list(itertools.combinations(present, 2))
    if reference not in present:
        return []
    return [(name, reference) for name in present if name != reference]


def compare_rows(rows: pd.DataFrame, success: pd.Series, settings: Settings, projectors: Optional[list] = None,
                 reference: Optional[str] = "gaussian", all_pairs: bool = False) -> list[dict]:
    """Every comparison of the tidy rows (``success`` aligned with them), sorted by group and pair."""
    rows = rows.assign(success=success.astype(bool))
    if projectors:
        rows = rows[rows["projector"].isin(projectors)]
    comparisons = []
    for group, frame in rows.groupby(GROUP_KEYS, sort=True):
        by_projector = {name: part for name, part in frame.groupby("projector", sort=True)}
        pairs = projector_pairs(list(by_projector), reference, all_pairs)
        if not pairs:
            continue
        first = frame.iloc[0]
        entry = {"family": first["family"], "size": first["size"], "params": json.loads(first["params"]),
                 "class_params": json.loads(first["class_params"]),
                 "retrieval": first["retrieval"], "kind": first["kind"], "projected_dim": int(first["projected_dim"]),
                 "pairs": [compare_pair(by_projector[x], by_projector[y], (x, y), group, settings) for x, y in pairs]}
        comparisons.append(entry)
    return comparisons



# ----- the comparison document ---------------------------------------------------------------

FORMAT = "calib.projector-comparison"
VERSION = 1
SCHEMA_FILE = "projector-comparison.v1.json"


def package_versions(store, env_ids) -> list[dict]:
    """The distinct package-version sets of the processes that produced the compared rows."""
    versions = {json.dumps(store.environment_versions(env_id), sort_keys=True) for env_id in set(env_ids)}
    return [json.loads(text) for text in sorted(versions)]


def build_comparison(store, rows: pd.DataFrame, predicate, settings: Settings, projectors: Optional[list] = None,
                     reference: Optional[str] = "gaussian", all_pairs: bool = False) -> dict:
    """The JSON-ready comparison document of a store (sealed with its checksum, schema-valid)."""
    from calib import __version__
    from calib.analysis.tablefile import schema_error, seal
    from calib.verdicts.success import evaluate

    # the rows the table's rates use: kinds the predicate checks, solver errors left out (their own outcome)
    covered = rows["kind"].map(predicate.covers).astype(bool)
    rows = rows[covered & ~solver_error_mask(rows)]
    meta = store.meta()
    document = {
        "format": FORMAT, "format_version": VERSION, "code_version": __version__,
        "campaign": {"name": meta.get("name"), "spec_fingerprint": meta.get("fingerprint"),
                     "root_seed": settings.root_seed, "package_versions": package_versions(store, rows["env_id"])},
        "predicate": predicate.as_dict(),
        "settings": {"confidence": settings.confidence.level, "delta": settings.confidence.delta,
                     "target": num(settings.confidence.target, 12), "resamples": settings.resamples,
                     "reference": None if all_pairs else reference, "projectors": sorted(projectors or [])},
        "methods": {"k50_interval": "percentile bootstrap over whole instances, jointly across k and projectors "
                                    "(Davison & Hinkley 1997, section 3.8)",
                    "class_test": "paired sign-flip permutation test over instances of the mean success difference "
                                  "on the common k (Fisher 1935; Pitman 1937)",
                    "per_k_test": "exact McNemar test on matched trials (McNemar 1947), conditional on the instances"},
        "notice": "Comparisons are empirical evidence about the instances and class measured, not proofs.",
        "groups": compare_rows(rows, evaluate(rows, predicate), settings, projectors, reference, all_pairs) if len(rows) else [],
    }
    document = seal(document)
    error = schema_error(document, SCHEMA_FILE)
    if error:  # a defect of this module, not of the user's input
        raise AssertionError(f"comparison does not match its schema {error}")
    return document


def verdict_lines(document: "Comparison") -> list[str]:
    """The human-readable summary of a comparison (:class:`calib.analysis.records.Comparison`): one header
    per group (named by the parameters that tell its family's classes apart), one verdict line per pair."""
    from calib.analysis.classnames import class_namer

    namers = {family: class_namer([group.class_params for group in document.groups if group.family == family])
              for family in {group.family for group in document.groups}}
    lines = []
    for group in document.groups:
        name = " ".join(filter(None, [group.family, group.size, namers[group.family](group.class_params)]))
        lines.append(f"{name} | {group.retrieval} | m={group.projected_dim}")
        for pair in group.pairs:
            lines.append(f"   {pair.verdict}")
    return lines
