"""Sequential search for the smallest safe k of one cell: bracket, then bisection on integer k.

Model. In one cell (the instances of one family size, one projector, one retrieval) a trial at k
succeeds with probability p(k) under the ``[target]`` success rule; trials at one k are taken in a
fixed order (replicate 0 of every instance, then replicate 1, ...), each an independent projector
draw, and their outcomes pooled as the table pools them. A k is *safe* when p(k) >= t = 1 - delta.

One k: an anytime-valid test. After n trials with s successes, the beta-binomial mixture

    M_n(p) = B(a + s, b + n - s) / (B(a, b) p^s (1 - p)^(n - s))

is, for the true p, a nonnegative martingale with mean 1 (the Bayes factor of a Beta(a, b) mixture
against the point p), so Ville's inequality gives P(M_n(p) >= 1/alpha for some n) <= alpha:
{p : M_n(p) < 1/alpha} is a confidence sequence valid at every n at once (Robbins 1970; Howard,
Ramdas, McAuliffe & Sekhon 2021, "Time-uniform, nonparametric, nonasymptotic confidence
sequences", Ann. Statist. 49(2)). ln M_n(p) is convex in p with its minimum at s/n, so trials stop
as soon as M_n(t) >= 1/alpha: with s/n > t every p <= t is excluded (k passes: its lower bound is
above t), with s/n < t every p >= t is (k fails: its upper bound is below t). Looking after every
trial costs nothing in validity. With several instances (rates p_i, mean p) visited in turn, each
complete round multiplies M by factors whose expectations multiply to prod_i (1 + (p_i - p) c) <= 1
(AM-GM, with c fixed by the mixture point), so M stays a supermartingale over complete rounds; looks
inside a round are treated alike (common practice, as the table pools instances). The prior is Beta(5 t, 5 (1 - t)), centred on the target (any
prior keeps the guarantee; this one makes the typical passing k, with p near 1, stop after about
60 trials at t = 0.9).

The last look. A k still undecided after its cap N of trials gets one fixed-n test: it passes when
the one-sided Clopper–Pearson lower bound (Clopper & Pearson 1934) of its N trials reaches t, and
fails otherwise. Each k spends half its alpha on the sequence and half on this look, so a false
pass at that k has probability <= alpha/2 + alpha/2 (a union bound; the look at the fixed N is one
event whatever the sequence did before). The last look is what lets a k with, say, 79 successes in
80 trials pass, where the anytime bound alone would need more trials than the cap.

Many k, in two phases that share the error e = 1 - confidence: the bisection spends
:data:`BISECTION_SHARE` e (0.2 e), the walk's last look :data:`WALK_SHARE` e (0.75 e: at confidence
0.95 its level 0.9625 needs 77 of 80 successes, the same count as a grid's table at 0.95), and the
walk's early passes the rest (0.05 e):

1. Bracket and bisection. On the lattice low, low + step, ... (and high), high is tested first.
   If it passes, low, then the gap between the smallest passing and the largest failing k is halved.
   If it fails and the cell has a reduction above high (``top`` = m - 1, the largest k below the
   projected dimension m), the search goes on: top, then the gap between high and top on the
   lattice high + j step is halved; when top fails too, the verdict is "no k below m meets the
   target". One run bisects one of the two brackets, so it tests at most
   K = max(K(low, high), K(high, top)) values, K(a, b) = 2 + ceil(log2(ceil((b - a) / step))), and
   each look gets alpha = 0.2 e / K (Bonferroni over the looks of a run: the j-th look, whichever k
   the earlier looks chose, is a fresh set of trials at a k tested once, so P(some look at a k
   below the threshold passes) <= sum_j alpha = 0.2 e; a run that extends has no low look, a run
   that does not has no top look, so the longer bracket bounds both). Half of a look's alpha is
   on the sequence, half on the last look. The answer k_b is the smallest tested k that passed,
   above a failing one (or low, when low passes).
2. Walk down. From k_b the lattice points below it are tested in decreasing order; at each the
   test T_k passes when the confidence sequence at 0.05 e lies above t (an early pass) or, at the
   cap, the Clopper–Pearson look at 0.75 e does, so P(T_k passes | p(k) < t) <= 0.8 e (a union
   bound). The walk stops at the first k that does not pass; the answer is the last k that did.
   This is fixed-sequence testing along a monotone family (Maurer, Hothorn & Lehmacher 1995;
   Westfall & Krishen 2001): for the true threshold k* (the smallest lattice k with p(k) >= t), if
   k_b >= k* the walk claims a k below k* only if T at the first lattice point below k* passes, a
   single fixed event on fixed trials, whichever trials the bisection had already read there.

Curtailment (all looks). A look fails as soon as no continuation can pass it: neither the last
look (too many failures already for the pass threshold at the cap, :func:`fewest_passing`) nor an
early pass within the cap (all further trials successes). This is the verdict the look would give
at the cap, known sooner (a curtailed fixed-n test; common practice in group-sequential designs),
so it changes no verdict and spends no error; only the trials read drop (a bisection look at the
strict level fails at its first failure).

So P(the claimed k has p(k) < t) <= P(k_b < k*) + P(T at k* - step passes) <= 0.2 e + 0.8 e = e.
Both phases assume p(k) does not fall as k grows (monotone success), as the grid's rule does; k
values between tested ones are not checked, and this assumption is stated with every verdict.

What a flat curve costs. Where p(k) rises slowly the walk passes many k, each by the fixed-n look
(an early pass needs 71 or more successes in a row at 0.05 e with the Beta prior): the walk reproduces the grid's
step-down decision at every k it passes (same trials, same pass count at a cap of 80), which is
what keeps its answer on the grid's; a search that skipped lattice points would save trials there
but could step over the grid's largest failing k, whose place on a flat curve is itself noise.

Costs: each look is O(1) (log-beta functions); a search holds the outcomes at its current k only.

Driving a search. A search is a pure function of its trials' outcomes in trial order, so every
caller feeds it the same way, through :func:`drive` with a source ``(k, n) -> the outcomes of the
first n trials at k``: `calib run` reads the store and submits what is missing (the source answers
None until the trials come back), `calib probe --find-k` runs the trials in place, and
:func:`replay` answers from stored outcomes alone, giving the verdict the live search gave.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Mapping, Optional, Sequence

import numpy as np
from scipy.optimize import brentq
from scipy.special import betaln

from calib.verdicts.stats import clopper_pearson_lower

#: strength a + b of the Beta prior of the mixture (centred on the target rate)
PRIOR_STRENGTH = 5.0
#: the share of the error 1 - confidence spent on the bisection (Bonferroni over its looks)
BISECTION_SHARE = 0.2
#: the share of the error 1 - confidence spent by the walk's Clopper–Pearson look at the cap; the rest
#: (1 - BISECTION_SHARE - WALK_SHARE) by the walk's early passes on the confidence sequence
WALK_SHARE = 0.75
#: stated with every verdict
MONOTONE = "bisection assumes the success rate does not fall as k grows; k values between tested ones were not run"


def log_mixture(successes: int, trials: int, p: float, rate: float) -> float:
    """ln M_n(p) of the beta-binomial mixture with prior Beta(5 rate, 5 (1 - rate)).

    >>> round(log_mixture(0, 0, 0.5, 0.9), 12)
    0.0
    >>> round(math.exp(log_mixture(1, 1, 0.5, 0.9)), 12)  # one success: M_1(p) = E[q] / p = rate / p
    1.8
    """
    a, b = PRIOR_STRENGTH * rate, PRIOR_STRENGTH * (1.0 - rate)
    failures = trials - successes
    value = betaln(a + successes, b + failures) - betaln(a, b)
    if successes:
        value -= successes * math.log(p)
    if failures:
        value -= failures * math.log1p(-p)
    return float(value)


def decide(successes: int, trials: int, rate: float, alpha: float) -> Optional[str]:
    """"pass" when the confidence sequence lies above ``rate``, "fail" when below, else None.

    >>> decide(64, 64, 0.9, 0.05 / 9), decide(0, 5, 0.9, 0.05 / 9), decide(10, 10, 0.9, 0.05 / 9)
    ('pass', 'fail', None)
    """
    if trials == 0 or successes == rate * trials:
        return None
    if log_mixture(successes, trials, rate, rate) < math.log(1.0 / alpha):
        return None
    return "pass" if successes > rate * trials else "fail"


def confidence_sequence(successes: int, trials: int, rate: float, alpha: float) -> tuple[float, float]:
    """(lower, upper) end of {p : M_n(p) < 1/alpha} after ``trials`` with ``successes``.

    >>> low, high = confidence_sequence(64, 64, 0.9, 0.05 / 9)
    >>> 0.9 < low < 0.91, high
    (True, 1.0)
    """
    level = math.log(1.0 / alpha)
    if trials == 0:
        return 0.0, 1.0
    centre = min(max(successes / trials, 1e-12), 1.0 - 1e-12)

    def excess(p: float) -> float:
        return log_mixture(successes, trials, p, rate) - level

    ends = []
    for edge in (1e-15, 1.0 - 1e-15):
        if excess(edge) <= 0.0 or excess(centre) >= 0.0:
            ends.append(0.0 if edge < 0.5 else 1.0)
        else:
            ends.append(brentq(excess, min(edge, centre), max(edge, centre), xtol=1e-9))
    return ends[0], ends[1]


def first_decision(outcomes: Sequence[bool], rate: float, alpha: float,
                   verdicts: tuple = ("pass", "fail")) -> tuple[Optional[str], int]:
    """(verdict, trials used): the first prefix of ``outcomes`` that decides one of ``verdicts``,
    or (None, len).

    >>> first_decision([False] * 8, 0.9, 0.05 / 9)
    ('fail', 5)
    >>> first_decision([True] * 80, 0.9, 0.05 / 9, verdicts=("fail",))
    (None, 80)
    """
    if len(outcomes) == 0:
        return None, 0
    successes = np.cumsum(np.asarray(outcomes, dtype=bool))
    trials = np.arange(1, successes.size + 1)
    a, b = PRIOR_STRENGTH * rate, PRIOR_STRENGTH * (1.0 - rate)
    log_m = (betaln(a + successes, b + trials - successes) - betaln(a, b)
             - successes * math.log(rate) - (trials - successes) * math.log1p(-rate))
    above = successes > rate * trials
    wanted = np.zeros(successes.size, dtype=bool)
    if "pass" in verdicts:
        wanted |= above
    if "fail" in verdicts:
        wanted |= successes < rate * trials
    decided = np.flatnonzero((log_m >= math.log(1.0 / alpha)) & wanted)
    if not decided.size:
        return None, len(outcomes)
    first = decided[0]
    return ("pass" if above[first] else "fail"), int(first) + 1


def trials_before_decision(successes: int, trials: int, rate: float, alpha: float, cap: int,
                           verdicts: tuple = ("pass", "fail")) -> int:
    """The fewest further trials after which one of ``verdicts`` is possible (all succeed or all
    fail), at most ``cap - trials``: asking for exactly these never runs a trial the search will not read.

    >>> trials_before_decision(0, 0, 0.9, 0.05 / 9, 1000)
    5
    >>> trials_before_decision(60, 60, 0.9, 0.025, 80, verdicts=("fail",))  # 60 of 79 would fail
    19
    >>> trials_before_decision(70, 70, 0.9, 0.025, 80, verdicts=("fail",))  # no early fail: to the cap
    10
    """
    extra = np.arange(1, cap - trials + 1)
    if extra.size == 0:
        return 0
    level = math.log(1.0 / alpha)
    a, b = PRIOR_STRENGTH * rate, PRIOR_STRENGTH * (1.0 - rate)
    failures = trials - successes
    base = -betaln(a, b) - successes * math.log(rate) - failures * math.log1p(-rate)
    possible = np.zeros(extra.size, dtype=bool)
    if "pass" in verdicts:
        all_pass = betaln(a + successes + extra, b + failures) + base - extra * math.log(rate)
        possible |= (all_pass >= level) & (successes + extra > rate * (trials + extra))
    if "fail" in verdicts:
        all_fail = betaln(a + successes, b + failures + extra) + base - extra * math.log1p(-rate)
        possible |= (all_fail >= level) & (successes < rate * (trials + extra))
    found = np.flatnonzero(possible)
    return int(extra[found[0]]) if found.size else int(extra[-1])


def lattice_count(low: int, high: int, step: int = 1) -> int:
    """Lattice points low, low + step, ... strictly below high: the most k a walk down can test.

    >>> lattice_count(10, 150, 2), lattice_count(8, 64), lattice_count(5, 5)
    (70, 56, 0)
    """
    return max(0, -(-(high - low) // step))


def max_looks(low: int, high: int, step: int = 1) -> int:
    """Most k values bracket-and-bisection tests on the lattice of [low, high]: high, low, then
    ceil(log2(ceil((high - low) / step))).

    >>> max_looks(10, 10), max_looks(10, 11), max_looks(8, 64), max_looks(10, 150, 2)
    (1, 2, 8, 9)
    """
    if high <= low:
        return 1
    return 2 + math.ceil(math.log2(lattice_count(low, high, step)))


def bisection_looks(low: int, high: int, step: int = 1, top: Optional[int] = None) -> int:
    """Most bisection looks in one run of a search on [low, high], extended up to ``top``: a run
    either bisects [low, high] (high passes) or [high, top] (high fails, then top), so its looks
    are at most the larger of the two counts (:func:`max_looks`).

    >>> bisection_looks(10, 150, 2), bisection_looks(10, 150, 2, top=299), bisection_looks(10, 150, 2, top=1199)
    (9, 9, 12)
    """
    if top is None or top <= high:
        return max_looks(low, high, step)
    return max(max_looks(low, high, step), max_looks(high, top, step))


def all_pass_trials(rate: float, alpha: float) -> int:
    """The fewest trials, all successes, after which a k passes a look at error ``alpha``: the
    smaller of the confidence sequence's first possible pass and the Clopper–Pearson look at a cap
    of that many trials (n of n passes when alpha^(1/n) >= rate, i.e. n >= ln alpha / ln rate).

    >>> all_pass_trials(0.9, 0.05)   # the grid's 29 of 29 at 95% confidence
    29
    >>> all_pass_trials(0.9, 0.04)   # the walk down at 0.96
    31
    """
    fixed = math.ceil(math.log(alpha) / math.log(rate) - 1e-12)
    sequence = trials_before_decision(0, 0, rate, alpha, fixed, ("pass",))
    passes, _ = first_decision([True] * sequence, rate, alpha, ("pass",))
    return sequence if passes == "pass" else fixed


def fixed_pass_trials(rate: float, alpha: float) -> int:
    """The fewest trials, all successes, whose one-sided Clopper–Pearson bound at 1 - ``alpha``
    reaches ``rate``: n of n passes when alpha^(1/n) >= rate, i.e. n >= ln alpha / ln rate.

    >>> fixed_pass_trials(0.9, 0.05), fixed_pass_trials(0.9, 0.01 / 8 / 2)
    (29, 71)
    """
    return math.ceil(math.log(alpha) / math.log(rate) - 1e-12)


def fewest_passing(cap: int, rate: float, alpha: float) -> int:
    """The fewest successes in ``cap`` trials whose one-sided Clopper–Pearson lower bound at
    1 - ``alpha`` reaches ``rate`` (cap + 1 when none does): the last look's pass threshold.

    >>> fewest_passing(80, 0.9, 0.05), fewest_passing(80, 0.9, 0.0375), fewest_passing(80, 0.9, 0.01 / 11 / 2)
    (77, 77, 80)
    """
    lower = np.asarray(clopper_pearson_lower(np.arange(cap + 1), cap, 1.0 - alpha))
    passing = np.flatnonzero(lower >= rate)
    return int(passing[0]) if passing.size else cap + 1


@dataclass(frozen=True)
class CapNeed:
    """What a search's cap of trials per k must reach for a k to pass at all (every trial a success)."""

    bisection: int      # trials for a bisection look to pass (its last look, level 1 - alpha / 2)
    walk: int           # trials for a look of the walk down to pass (level 1 - walk alpha)
    bisection_level: float
    walk_level: float

    @property
    def trials(self) -> int:
        """The cap a search needs: the bisection must pass its high end before the walk can start."""
        return max(self.bisection, self.walk)


def cap_need(low: int, high: int, rate: float, confidence: float, step: int = 1, top: Optional[int] = None) -> CapNeed:
    """The trials per k a search on [low, high] needs before any k can pass (:class:`CapNeed`).

    >>> need = cap_need(4, 300, 0.9, 0.95)   # 11 bisection looks: level 1 - 0.01 / 11 / 2
    >>> need.bisection, need.walk, round(need.bisection_level, 5)
    (74, 32, 0.99955)
    """
    search = KSearch(low, high, rate, confidence, cap=1, step=step, top=top)
    alpha = search.alpha / 2
    return CapNeed(all_pass_trials(rate, alpha), fixed_pass_trials(rate, search.walk_alpha), 1 - alpha, 1 - search.walk_alpha)


def cap_text(need: CapNeed, cap: int) -> str:
    """Why a cap of ``cap`` trials per k cannot pass a k, and the change that would (for verdicts and the dry run)."""
    return (f"the cap of {cap} trials per k is too small: a k passes the bisection's look (level "
            f"{need.bisection_level:.4g}) only after {need.bisection} successes in a row; give at least "
            f"{need.trials} trials per k (instances x replicates)")


@dataclass
class Step:
    """One tested k: trials read, successes, the bounds and the verdict, and the phase that tested it."""

    k: int
    trials: int
    successes: int
    lower: float
    upper: float
    verdict: str  # "pass" | "fail" | "fail at the cap" (the last look did not reach the target) | "fail: cannot pass at the cap"
    phase: str = "bisection"  # "bisection" | "walk"


@dataclass
class KSearch:
    """The search on one cell; feed it outcomes at :meth:`demand`'s k until it is done.

    ``cap`` is the most trials read at one k (instances x replicates of the spec); ``step`` the
    lattice of k values below ``high`` (low, low + step, ...): the resolution of the answer. ``top``
    (the largest k that is still a reduction, m - 1) lets the search go on above ``high`` when
    ``high`` fails; None stops at ``high`` (the old behaviour, ``extend = false`` in the spec).
    """

    low: int
    high: int
    rate: float
    confidence: float
    cap: int
    step: int = 1
    top: Optional[int] = None
    steps: list = field(default_factory=list)
    safe_k: Optional[int] = None
    reason: str = ""
    done: bool = False

    def __post_init__(self) -> None:
        error = 1.0 - self.confidence
        if self.top is not None and self.top <= self.high:
            self.top = None  # nothing above high is a reduction: no extension
        self.looks = bisection_looks(self.low, self.high, self.step, self.top)
        self.alpha = error * BISECTION_SHARE / self.looks  # one bisection look (its last look spends half)
        self.walk_alpha = error * WALK_SHARE  # the walk's last look at every k (fixed sequence)
        self.early_alpha = error * (1.0 - BISECTION_SHARE - WALK_SHARE)  # the walk's early passes
        self.phase = "bisection"
        self._passing, self._failing = None, None  # smallest passing, largest failing k so far
        self._extending = False
        self.k: Optional[int] = self.high
        self._outcomes: list = []
        self._thresholds: dict[float, int] = {}

    # ----- what one look needs and decides ------------------------------------------------------
    def _levels(self) -> tuple[Optional[float], float, float]:
        """(early-pass alpha or None, early-fail alpha, last-look alpha) of the current phase."""
        if self.phase == "walk":
            return self.early_alpha, self.walk_alpha, self.walk_alpha
        return self.alpha / 2, self.alpha / 2, self.alpha / 2  # half on the sequence, half on the last look

    def _threshold(self, alpha: float) -> int:
        if alpha not in self._thresholds:
            self._thresholds[alpha] = fewest_passing(self.cap, self.rate, alpha)
        return self._thresholds[alpha]

    def _can_pass(self, successes: int, read: int) -> bool:
        """Whether a pass is still possible after ``successes`` in ``read`` trials (all further succeed)."""
        early, _, last = self._levels()
        if successes + self.cap - read >= self._threshold(last):
            return True
        if early is None or read >= self.cap:
            return False
        more = trials_before_decision(successes, read, self.rate, early, self.cap, ("pass",))
        return first_decision([True] * more, self.rate, early, ("pass",))[0] == "pass" if more else False

    def _to_curtail(self, successes: int, read: int) -> int:
        """Further trials, all failures, after which no pass is possible (exact curtailment)."""
        for extra in range(1, self.cap - read + 1):
            if not self._can_pass(successes, read + extra):
                return extra
        return self.cap - read

    def demand(self) -> Optional[tuple[int, int]]:
        """(k, n): the search needs the outcomes of the first n trials at k; None once done."""
        if self.done:
            return None
        successes, read = sum(self._outcomes), len(self._outcomes)
        early, fail, _ = self._levels()
        more = min(trials_before_decision(successes, read, self.rate, fail, self.cap, ("fail",)),
                   self._to_curtail(successes, read))
        if early is not None:
            more = min(more, trials_before_decision(successes, read, self.rate, early, self.cap, ("pass",)))
        return self.k, read + max(1, more)

    def offer(self, outcomes: Sequence[bool]) -> None:
        """Outcomes of the first trials at the current k, in trial order (a longer list is fine)."""
        outcomes = [bool(value) for value in outcomes[:self.cap]]
        verdict, used = self._first_verdict(outcomes)
        if verdict is not None:
            self._record(verdict, outcomes[:used])
        elif len(outcomes) < self.cap:
            self._outcomes = outcomes
        else:  # the last look: a fixed-n Clopper–Pearson bound on all cap trials
            last = self._levels()[2]
            lower = float(clopper_pearson_lower(sum(outcomes), len(outcomes), 1.0 - last))
            self._record("pass" if lower >= self.rate else "fail at the cap", outcomes, lower)

    def _first_verdict(self, outcomes: list) -> tuple[Optional[str], int]:
        """The first prefix that decides: an early pass (walk), an early fail on the sequence, or a
        curtailed fail (the last look can no longer pass); (None, len) when none does."""
        early, fail, _ = self._levels()
        verdict, used = first_decision(outcomes, self.rate, fail, ("fail",))
        if early is not None:
            passed, at = first_decision(outcomes, self.rate, early, ("pass",))
            if passed is not None and at <= used:
                verdict, used = passed, at
        successes = 0
        for read, outcome in enumerate(outcomes[:used], start=1):
            successes += outcome
            if not outcome and read < self.cap and not self._can_pass(successes, read):
                return "fail: cannot pass at the cap", read  # curtailed: the last look's verdict, known sooner
        return verdict, used

    def _record(self, verdict: str, outcomes: list, last_lower: float = 0.0) -> None:
        successes = sum(outcomes)
        alpha = self._levels()[1]
        lower, upper = confidence_sequence(successes, len(outcomes), self.rate, alpha)
        lower = max(lower, last_lower)
        self.steps.append(Step(self.k, len(outcomes), successes, lower, upper, verdict, self.phase))
        self._outcomes = []
        if self.phase == "walk":
            self.k = self._walk(self.k) if verdict == "pass" else self._finish_walk()
        else:
            if verdict == "pass":
                self._passing = self.k
            else:
                self._failing = self.k
            self.k = self._next_k()
        if self.k is None:
            self.done = True

    # ----- where to look next -------------------------------------------------------------------
    def _next_k(self) -> Optional[int]:
        if self._passing is None:
            if self.top is not None and not self._extending:
                self._extending = True  # high failed: the range above it, up to top, is searched too
                return self.top
            need = cap_need(self.low, self.high, self.rate, self.confidence, self.step, self.top)
            if self.cap < need.bisection:
                self.reason = cap_text(need, self.cap)
            elif self._extending:
                self.reason = (f"k = {self.top} = m - 1 is not shown to reach the target either (a failure came "
                               f"before its look could pass): no k below m = {self.top + 1} is shown to meet the target")
            else:
                self.reason = f"the high end k = {self.high} does not reach the target: widen the range"
            return None
        if self._failing is None:
            if self.low == self.high or self._passing == self.low:
                return self._finish(self._passing, f"the low end k = {self.low} passes: a smaller k may be safe too")
            return self.low
        inside = self._lattice_between(self._failing, self._passing)
        if not inside:
            return self._walk(self._passing)
        return inside[(len(inside) - 1) // 2]

    def _lattice_between(self, failing: int, passing: int) -> list[int]:
        if failing >= self.high:  # above high: the lattice high, high + step, ... (and top)
            return list(range(failing + self.step, passing, self.step))
        first = self.low + self.step * max(0, -(-(failing + 1 - self.low) // self.step))
        return list(range(first, passing, self.step))

    def _walk(self, passed: int) -> Optional[int]:
        """The walk down's next k: the lattice point below ``passed`` (the smallest k passed so far)."""
        self.phase, self._passing = "walk", passed
        if passed > self.high:  # above high the lattice is high + j step
            below = self.high + self.step * ((passed - 1 - self.high) // self.step)
        else:
            below = self.low + self.step * ((passed - 1 - self.low) // self.step)
        if below < self.low:
            return self._finish(passed, f"the low end k = {self.low} passes: a smaller k may be safe too")
        return below

    def _finish_walk(self) -> None:
        return self._finish(self._passing, "")

    def _finish(self, k: int, reason: str) -> None:
        self.safe_k, self.reason = k, reason
        return None

    @property
    def trials_read(self) -> int:
        """Distinct trials read: a k tested in both phases counts its largest prefix once."""
        read: dict[int, int] = {}
        for step in self.steps:
            read[step.k] = max(read.get(step.k, 0), step.trials)
        return sum(read.values())


def trace_lines(search: KSearch, target_text: str) -> list[str]:
    """Human-readable trace: one line per tested k and phase, then the verdict with its assumption."""
    lines = [f"  {'k':>6} {'trials':>7} {'successes':>9}  {'lower':>6} {'upper':>6}  {'phase':9}  verdict"]
    for step in sorted(search.steps, key=lambda step: (step.k, step.phase)):
        lines.append(f"  {step.k:>6} {step.trials:>7} {step.successes:>9}  {step.lower:>6.3f} {step.upper:>6.3f}  "
                     f"{step.phase:9}  {step.verdict}")
    looks = search.looks
    if search.safe_k is None:
        upper = search.top if search.top is not None else search.high
        verdict = f"no safe k in [{search.low}, {upper}]: {search.reason}" if search.done else "search not finished"
    else:
        verdict = f"safe k = {search.safe_k}: {target_text} at confidence {search.confidence:g}"
        verdict += f" ({search.reason})" if search.reason else ""
    lines.append(f"  {verdict}")
    lines.append(f"  bounds: bisection k at {1 - search.alpha / 2:.4g} (a beta-binomial confidence sequence, then a "
                 f"Clopper–Pearson look at the cap; Bonferroni over at most {looks} k values), then a walk down the "
                 f"k lattice (step {search.step}) with a Clopper–Pearson look at the cap at {1 - search.walk_alpha:.4g} "
                 f"per k and early passes on the sequence at {1 - search.early_alpha:.4g} (fixed sequence); {MONOTONE}")
    return lines


#: a search's source of outcomes: ``(k, n)`` -> the outcomes (True = success) of the first n trials at
#: k in trial order, or None while they are not known (the search then waits where it is)
OutcomeSource = Callable[[int, int], Optional[Sequence[bool]]]


def drive(search: KSearch, source: OutcomeSource) -> bool:
    """Feed ``search`` from ``source`` until it is done or the source has no answer yet.

    Each round asks :meth:`KSearch.demand` for (k, n) and offers the source's first n outcomes at k;
    a source returning None leaves the search where it stands, so calling again later resumes.
    Returns whether the search is done. Costs: one source call per look.
    """
    while (demand := search.demand()) is not None:
        outcomes = source(*demand)
        if outcomes is None:
            return False
        search.offer(outcomes)
    return True


def replay(search: KSearch, outcomes: Mapping[int, Sequence[bool]]) -> KSearch:
    """``search`` (fresh, or part-way) decided from stored outcomes: k -> outcomes in trial order.

    A k with fewer stored outcomes than the search asks for stops the replay there (``done`` stays
    False): the store lacked trials the live search read. Outcomes beyond what it asks are not read,
    so the live search's own record (every trial it ran at each k) replays into its own verdict.
    """
    def stored(k: int, count: int) -> Optional[Sequence[bool]]:
        known = outcomes.get(k, ())
        return known[:count] if len(known) >= count else None

    drive(search, stored)
    return search
