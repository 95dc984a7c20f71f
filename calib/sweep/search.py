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

Many k, in two phases that share the error 1 - confidence (a fifth, :data:`BISECTION_SHARE`, on
the bisection, the rest on the walk: the walk makes the claim, so its level stays close to the
level a grid's table uses, 0.96 against 0.95 at confidence 0.95):

1. Bracket and bisection. On the lattice low, low + step, low + 2 step, ... (and high), it tests
   at most K = 2 + ceil(log2(ceil((high - low) / step))) values of k (high, low, then halving the
   gap between the smallest passing and the largest failing k), each at alpha = (1 - confidence)
   / (5 K) (Bonferroni: a bisection can look at several k below the true threshold, and each is a
   chance of a false pass). Its answer k_b is the smallest tested k that passed, above a failing
   one. When high does not pass there is no claim; when low passes, low is the answer.
2. Walk down. From k_b the lattice points below it are tested in decreasing order, each at the
   level 4 (1 - confidence) / 5 by the Clopper–Pearson look on its N trials (a k clearly below
   the target stops early, on the confidence sequence at the same level); the walk stops at the
   first k that does not pass, and the answer is the last k that did. This is fixed-sequence
   testing along a monotone family (Maurer, Hothorn & Lehmacher 1995; Westfall & Krishen 2001):
   for the true threshold k*, the walk can claim a k below k* only if it passes the first lattice
   point below k*, a single fixed k whose fixed-N test has level 4 (1 - confidence) / 5, whichever
   trials the bisection had already read there. The walk is the step-down a full grid applies
   (:func:`calib.analysis.saferule.safe_k_rule`), run only below k_b; it costs no new trial at a
   k the bisection already decided, and a whole cap at each new k it passes.

So P(the claimed k has p(k) < t) <= (1 - confidence) / 5 + 4 (1 - confidence) / 5. Both phases
assume p(k) does not fall as k grows (monotone success), as the grid's rule does; k values
between tested ones are not checked, and this assumption is stated with every verdict.

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

from calib.analysis.stats import clopper_pearson_lower

#: strength a + b of the Beta prior of the mixture (centred on the target rate)
PRIOR_STRENGTH = 5.0
#: the share of the error 1 - confidence spent on the bisection; the walk down spends the rest
BISECTION_SHARE = 0.2
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


@dataclass(frozen=True)
class CapNeed:
    """What a search's cap of trials per k must reach for a k to pass at all (every trial a success)."""

    bisection: int      # trials for a bisection look to pass (level 1 - alpha / 2)
    walk: int           # trials for a look of the walk down to pass (level 1 - walk alpha)
    bisection_level: float
    walk_level: float

    @property
    def trials(self) -> int:
        """The cap a search needs: the bisection must pass its high end before the walk can start."""
        return max(self.bisection, self.walk)


def cap_need(low: int, high: int, rate: float, confidence: float, step: int = 1) -> CapNeed:
    """The trials per k a search on [low, high] needs before any k can pass (:class:`CapNeed`).

    >>> need = cap_need(4, 300, 0.9, 0.95)   # 11 bisection looks: level 1 - 0.01 / 11 / 2
    >>> need.bisection, need.walk, round(need.bisection_level, 5)
    (74, 31, 0.99955)
    """
    search = KSearch(low, high, rate, confidence, cap=1, step=step)
    alpha = search.alpha / 2
    return CapNeed(all_pass_trials(rate, alpha), all_pass_trials(rate, search.walk_alpha), 1 - alpha, 1 - search.walk_alpha)


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
    verdict: str  # "pass" | "fail" | "fail at the cap" (the last look did not reach the target)
    phase: str = "bisection"  # "bisection" | "walk"


@dataclass
class KSearch:
    """The search on one cell; feed it outcomes at :meth:`demand`'s k until it is done.

    ``cap`` is the most trials read at one k (instances x replicates of the spec); ``step`` the
    lattice of k values below ``high`` (low, low + step, ...): the resolution of the answer.
    """

    low: int
    high: int
    rate: float
    confidence: float
    cap: int
    step: int = 1
    steps: list = field(default_factory=list)
    safe_k: Optional[int] = None
    reason: str = ""
    done: bool = False

    def __post_init__(self) -> None:
        error = 1.0 - self.confidence
        self.alpha = error * BISECTION_SHARE / max_looks(self.low, self.high, self.step)  # one bisection look
        self.walk_alpha = error * (1.0 - BISECTION_SHARE)  # every k of the walk down (fixed sequence)
        self.phase = "bisection"
        self._passing, self._failing = None, None  # smallest passing, largest failing k so far
        self.k: Optional[int] = self.high
        self._outcomes: list = []

    def demand(self) -> Optional[tuple[int, int]]:
        """(k, n): the search needs the outcomes of the first n trials at k; None once done."""
        if self.done:
            return None
        successes, read = sum(self._outcomes), len(self._outcomes)
        if self.phase == "walk":  # passes only at the cap: ask up to the first possible early fail
            more = trials_before_decision(successes, read, self.rate, self.walk_alpha, self.cap, ("fail",))
        else:
            more = trials_before_decision(successes, read, self.rate, self.alpha / 2, self.cap)
        return self.k, read + max(1, more)

    def offer(self, outcomes: Sequence[bool]) -> None:
        """Outcomes of the first trials at the current k, in trial order (a longer list is fine)."""
        outcomes = [bool(value) for value in outcomes[:self.cap]]
        walking = self.phase == "walk"
        alpha = self.walk_alpha if walking else self.alpha / 2
        verdict, used = first_decision(outcomes, self.rate, alpha, ("fail",) if walking else ("pass", "fail"))
        if verdict is not None:
            self._record(verdict, outcomes[:used])
        elif len(outcomes) < self.cap:
            self._outcomes = outcomes
        else:  # the last look: a fixed-n Clopper–Pearson bound on all cap trials
            lower = float(clopper_pearson_lower(sum(outcomes), len(outcomes), 1.0 - alpha))
            self._record("pass" if lower >= self.rate else "fail at the cap", outcomes, lower)

    def _record(self, verdict: str, outcomes: list, last_lower: float = 0.0) -> None:
        successes = sum(outcomes)
        alpha = self.walk_alpha if self.phase == "walk" else self.alpha / 2
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

    def _next_k(self) -> Optional[int]:
        if self._passing is None:
            need = cap_need(self.low, self.high, self.rate, self.confidence, self.step)
            if self.cap < need.bisection:
                self.reason = cap_text(need, self.cap)
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
        first = self.low + self.step * max(0, -(-(failing + 1 - self.low) // self.step))
        return list(range(first, passing, self.step))

    def _walk(self, passed: int) -> Optional[int]:
        """The walk down's next k: the lattice point below ``passed`` (the smallest k passed so far)."""
        self.phase, self._passing = "walk", passed
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
    looks = max_looks(search.low, search.high, search.step)
    if search.safe_k is None:
        verdict = f"no safe k in [{search.low}, {search.high}]: {search.reason}" if search.done else "search not finished"
    else:
        verdict = f"safe k = {search.safe_k}: {target_text} at confidence {search.confidence:g}"
        verdict += f" ({search.reason})" if search.reason else ""
    lines.append(f"  {verdict}")
    lines.append(f"  bounds: bisection k at {1 - search.alpha / 2:.4g} (a beta-binomial confidence sequence, then a "
                 f"Clopper–Pearson look at the cap; Bonferroni over at most {looks} k values), then a walk down the "
                 f"k lattice (step {search.step}) with a Clopper–Pearson look at the cap at {1 - search.walk_alpha:.4g} "
                 f"per k (fixed sequence); {MONOTONE}")
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
