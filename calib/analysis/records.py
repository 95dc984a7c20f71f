"""The safe-k table and the projector comparison as typed records, mirroring their JSON Schemas.

A table (``calib/schemas/safe-k-table.v3.json``) and a comparison document
(``calib/schemas/projector-comparison.v1.json``) are nests of JSON objects. Each object kind of a
schema is one frozen dataclass here, its fields the schema's ``properties`` (a property named by a
Python keyword gets a trailing underscore: ``class`` -> ``class_``); a property the schema does not
require is :data:`ABSENT` when the document leaves it out. So a reader writes
``entry.class_.safe_k`` where it wrote ``entry["class"]["safe_k"]``, and a misspelt field is an
attribute error a type checker (or the first import-time use) reports, not a KeyError deep in a report.

This module is the one place the typed view is built: :meth:`Record.from_dict` reads a document
(as :func:`calib.analysis.tablefile.read_table` returns it, already schema-checked) into records,
recursively, by the field types; :meth:`Record.to_dict` gives back exactly the dict it came from,
keys in the order the builders (:func:`calib.analysis.tables.build_table`,
:func:`calib.analysis.compare.build_comparison`) write them, absent fields left out, so the JSON
written from a record is byte-identical (``tests/test_tables_golden.py``). ``tests/test_records.py``
checks every record against its schema (the schema is the outside reference).

Field types follow the schema: ``integer`` -> int, ``number`` -> float (an integral JSON number may
arrive as int), ``["x", "null"]`` -> Optional; free-form objects (``params``) stay dicts. Costs: one
pass over the document.
"""

from __future__ import annotations

import types
from dataclasses import dataclass, fields
from functools import lru_cache
from typing import Any, ClassVar, Mapping, Optional, TypeVar, Union, get_args, get_origin, get_type_hints


class Absent:
    """The value of a property the document leaves out (the schema does not require it)."""

    _instance: ClassVar[Optional["Absent"]] = None

    def __new__(cls) -> "Absent":
        if cls._instance is None:
            cls._instance = super().__new__(cls)
        return cls._instance

    def __bool__(self) -> bool:
        return False

    def __repr__(self) -> str:
        return "ABSENT"


#: a property the document leaves out (falsy, so ``if entry.policy:`` reads as "has a policy answer")
ABSENT = Absent()

R = TypeVar("R", bound="Record")


def json_name(attribute: str) -> str:
    """The JSON property of a field: ``class_`` -> ``class``, others unchanged."""
    return attribute[:-1] if attribute.endswith("_") else attribute


@lru_cache(maxsize=None)
def _hints(cls: type) -> dict:
    return get_type_hints(cls, globals())


def _read(hint: Any, value: Any) -> Any:
    """``value`` (plain JSON) as the type ``hint`` says: records built, lists and maps walked."""
    if value is None or isinstance(value, Absent):
        return value
    origin = get_origin(hint)
    if origin in (Union, types.UnionType):
        for option in get_args(hint):
            if isinstance(option, type) and issubclass(option, Record):
                return option.from_dict(value) if isinstance(value, Mapping) else value
            if get_origin(option) in (list, dict):
                return _read(option, value)
        return value
    if isinstance(hint, type) and issubclass(hint, Record):
        return hint.from_dict(value)
    if origin is list and isinstance(value, list):
        (item,) = get_args(hint)
        return [_read(item, element) for element in value]
    if origin is dict and isinstance(value, Mapping):
        _, item = get_args(hint)
        return {key: _read(item, element) for key, element in value.items()}
    return value


def _plain(value: Any) -> Any:
    if isinstance(value, Record):
        return value.to_dict()
    if isinstance(value, list):
        return [_plain(element) for element in value]
    if isinstance(value, dict):
        return {key: _plain(element) for key, element in value.items()}
    return value


@dataclass(frozen=True, kw_only=True)
class Record:
    """A JSON object of a schema as a frozen dataclass (see the module text)."""

    @classmethod
    def from_dict(cls: type[R], data: Mapping[str, Any]) -> R:
        """The record of ``data``; a key that is no field of the record is refused (ValueError)."""
        hints = _hints(cls)
        names = {json_name(field.name): field.name for field in fields(cls)}
        unknown = set(data) - set(names)
        if unknown:
            raise ValueError(f"{cls.__name__}: no field {sorted(unknown)}")
        return cls(**{names[key]: _read(hints[names[key]], value) for key, value in data.items()})

    def to_dict(self) -> dict:
        """The plain dict of this record: the keys in field order, absent ones left out."""
        return {json_name(field.name): _plain(getattr(self, field.name)) for field in fields(self)
                if not isinstance(getattr(self, field.name), Absent)}


@dataclass(frozen=True, kw_only=True)
class TableCampaign(Record):
    """$.campaign."""

    name: Optional[str]
    spec_fingerprint: Optional[str]
    root_seed: int
    store_schema: int


@dataclass(frozen=True, kw_only=True)
class TableTarget(Record):
    """$.target."""

    success_rate: float
    delta: float
    confidence: float
    bound: str
    class_bound: str
    interval: str
    solver_errors: Any
    solver_errors_rule: str
    time_limit: str


@dataclass(frozen=True, kw_only=True)
class TableTheory(Record):
    """$.theory."""

    rules: list[str]
    eps_choice: Optional[float]
    eps_convention: str
    failure: float


@dataclass(frozen=True, kw_only=True)
class Predicate(Record):
    """$.analyses[].predicate: tolerances, null when not checked; classify requires the projected feasibility verdict
    to match the original."""

    name: str
    gap: Optional[float]
    obj: Optional[float]
    feas: Optional[float]
    sign: Optional[float]
    distortion: Optional[float]
    classify: bool
    faster: bool | Absent = ABSENT
    cost: Optional[float] | Absent = ABSENT


@dataclass(frozen=True, kw_only=True)
class Excluded(Record):
    """$.analyses[].excluded[]."""

    family: str
    kind: str
    reason: str


@dataclass(frozen=True, kw_only=True)
class Transition(Record):
    """$.analyses[].entries[].transition: logistic fit P(success) = 1/(1+exp(-(intercept + slope ln k))); when it has
    no finite maximum-likelihood estimate (separation) the numbers are null, reason says why and bracket gives
    where the transition lies."""

    reason: str
    bracket: Optional[list[Optional[float]]]
    intercept: Optional[float]
    slope: Optional[float]
    covariance: Optional[list[list[float]]]
    clusters: Optional[int]
    interval_scope: str
    k50: Optional[float]
    k50_interval: Optional[list[Optional[float]]]
    k_target: Optional[float]
    k_target_interval: Optional[list[Optional[float]]]


@dataclass(frozen=True, kw_only=True)
class BoundAtEps(Record):
    """$.analyses[].entries[].theory.bounds.*."""

    k: int
    failure: Optional[float]
    ratio: Optional[float]
    class_ratio: Optional[float]


@dataclass(frozen=True, kw_only=True)
class EntryTheory(Record):
    """$.analyses[].entries[].theory."""

    eps: Optional[float]
    eps_source: str
    failure: float
    bounds: dict[str, BoundAtEps]


@dataclass(frozen=True, kw_only=True)
class GridPoint(Record):
    """$.analyses[].entries[].grid[]."""

    k: int
    k_label: str
    trials: int
    successes: int
    errors: int
    solver_errors: int
    instances: int
    rate: float
    lower_bound: float
    wilson_lower: float
    passes: bool
    class_lower_bound: float
    class_passes: bool
    effective_trials: float
    cluster_size: float
    error_median: Optional[float]
    error_q90: Optional[float]


@dataclass(frozen=True, kw_only=True)
class EntryClass(Record):
    """$.analyses[].entries[].class: class scope: the safe k for the class the instances were drawn from, or null with
    the reason."""

    safe_k: Optional[int]
    safe_fraction: Optional[float]
    reason: str
    scope: str
    icc: Optional[float]
    icc_upper: Optional[float]
    anova: dict[str, Optional[float]]
    instances_needed: int


@dataclass(frozen=True, kw_only=True)
class PolicyPoint(Record):
    """$.analyses[].entries[].policy.grid[]."""

    k: int
    successes: int
    lower_bound: Optional[float]
    passes: bool
    time_median_s: Optional[float]
    baseline_median_s: Optional[float]


@dataclass(frozen=True, kw_only=True)
class Policy(Record):
    """$.analyses[].entries[].policy: present only when asked for (it rests on measured wall times): the k with the
    smallest median end-to-end time among the k where trials that succeed AND are faster than the fair baseline
    reach the target (one-sided Clopper-Pearson), or null with the answer 'no k saves time at this size'."""

    k: Optional[int]
    answer: str
    time_median_s: Optional[float]
    baseline_median_s: Optional[float]
    speedup: Optional[float]
    grid: list[PolicyPoint]


@dataclass(frozen=True, kw_only=True)
class EntryFeatures(Record):
    """$.analyses[].entries[].features."""

    rows: Optional[float]
    cols: Optional[float]
    nonzeros: Optional[float]
    rank: Optional[float]
    stable_rank: Optional[float]
    row_coherence: Optional[float]
    instances: int


@dataclass(frozen=True, kw_only=True)
class Entry(Record):
    """$.analyses[].entries[]."""

    family: str
    size: str
    params: dict
    class_params: dict
    projector: str
    retrieval: str
    kind: str
    projected_dim: int
    n_points: int
    instances: int
    solver_errors: int
    safe_k: Optional[int]
    safe_fraction: Optional[float]
    safe_k_reason: str
    safe_k_scope: str
    class_: EntryClass
    error_metric: Optional[str]
    transition: Transition
    theory: EntryTheory
    grid: list[GridPoint]
    features: Optional[EntryFeatures] | Absent = ABSENT
    policy: Policy | Absent = ABSENT


@dataclass(frozen=True, kw_only=True)
class LawPoint(Record):
    """$.analyses[].laws[].safe_k_law.points[]."""

    size: str
    n: int
    safe_k: Optional[int] | Absent = ABSENT
    censored: bool
    censoring: str
    residual: Optional[float]
    k50: Optional[float] | Absent = ABSENT


@dataclass(frozen=True, kw_only=True)
class Law(Record):
    """$.analyses[].laws[].safe_k_law: k = a + C ln n by least squares over the uncensored sizes; null numbers with a
    reason when fewer than two sizes are uncensored."""

    a: Optional[float]
    C: Optional[float]
    C_se: Optional[float]
    n_min: Optional[int]
    n_max: Optional[int]
    reason: str
    censored: int
    points: list[LawPoint]


@dataclass(frozen=True, kw_only=True)
class RuleConstant(Record):
    """$.analyses[].laws[].theory.rules.*."""

    C: float
    ratio: Optional[float]


@dataclass(frozen=True, kw_only=True)
class LawClassTheory(Record):
    """$.analyses[].laws[].theory."""

    eps: Optional[float]
    eps_source: str
    rules: dict[str, RuleConstant]


@dataclass(frozen=True, kw_only=True)
class PolicyRulePoint(Record):
    """$.analyses[].laws[].policy_rule.grid[]."""

    fraction: float
    trials: int
    successes: int
    units: int
    class_lower_bound: float
    passes: bool


@dataclass(frozen=True, kw_only=True)
class PolicyRule(Record):
    """$.analyses[].laws[].policy_rule: the rule k = f m certified across the sizes of the class with the units (files,
    or instances) as the clusters; fraction null with the reason when none is certified."""

    rule: str
    fraction: Optional[float]
    statement: str
    unit: str
    units: int
    units_needed: int
    failing: list[str]
    failing_at: Optional[float]
    grid: list[PolicyRulePoint]
    reason: str


@dataclass(frozen=True, kw_only=True)
class SweptInstancesPoint(Record):
    """$.analyses[].laws[].rules[].instances.grid[]."""

    value: float
    trials: int
    successes: int
    units: int
    lowest_unit_bound: float
    passes: bool


@dataclass(frozen=True, kw_only=True)
class SweptInstances(Record):
    """$.analyses[].laws[].rules[].instances."""

    value: Optional[float]
    reason: str
    statement: str
    units: int
    failing: list[str]
    failing_at: Optional[float]
    unit_confidence: float
    trials_per_unit: int
    trials_per_unit_needed: int
    grid: list[SweptInstancesPoint]


@dataclass(frozen=True, kw_only=True)
class SweptClassPoint(Record):
    """$.analyses[].laws[].rules[].class.grid[]."""

    value: float
    trials: int
    successes: int
    units: int
    class_lower_bound: float
    passes: bool


@dataclass(frozen=True, kw_only=True)
class SweptClass(Record):
    """$.analyses[].laws[].rules[].class."""

    value: Optional[float]
    reason: str
    statement: str
    units: int
    failing: list[str]
    failing_at: Optional[float]
    units_needed: int
    grid: list[SweptClassPoint]


@dataclass(frozen=True, kw_only=True)
class SweptRule(Record):
    """$.analyses[].laws[].rules[]: a rule k = f m or k = C ln n answered for the units measured and for their class
    (calib.analysis.classrule)."""

    rule: Any
    coefficient: Any
    unit: str
    target: float
    confidence: float
    instances: SweptInstances
    class_: SweptClass


@dataclass(frozen=True, kw_only=True)
class LawClass(Record):
    """$.analyses[].laws[]."""

    family: str
    class_params: dict
    projector: str
    retrieval: str
    kind: str
    safe_k_law: Law
    class_safe_k_law: Law
    k50_law: Law
    theory: LawClassTheory
    policy_rule: Optional[PolicyRule]
    rules: list[SweptRule] | Absent = ABSENT


@dataclass(frozen=True, kw_only=True)
class Analysis(Record):
    """$.analyses[]."""

    tau: Optional[float]
    predicate: Predicate
    excluded: list[Excluded]
    entries: list[Entry]
    laws: list[LawClass]


@dataclass(frozen=True, kw_only=True)
class SafeKTable(Record):
    """$: Per (family, size, projector, retrieval): success against the projected size k with one-sided confidence
    bounds in two scopes (the instances measured; the class they were drawn from), the safe k of each, the
    logistic transition with cluster-robust intervals, the published JL bounds at the table's failure
    probability beside them, and per class the laws k = a + C ln n fitted on uncensored sizes. Empirical
    evidence, not a proof. n is the number of points the JL theory counts (for an LP with rows projected: its
    columns plus the right-hand side)."""

    format: Any
    format_version: Any
    code_version: str
    campaign: TableCampaign
    target: TableTarget
    theory: TableTheory
    notice: str
    analyses: list[Analysis]
    checksum: str


@dataclass(frozen=True, kw_only=True)
class CmpCampaign(Record):
    """$.campaign."""

    name: Optional[str]
    spec_fingerprint: Optional[str]
    root_seed: int
    package_versions: list[dict]


@dataclass(frozen=True, kw_only=True)
class CmpSettings(Record):
    """$.settings."""

    confidence: float
    delta: float
    target: float
    resamples: int
    reference: Optional[str]
    projectors: list[str]


@dataclass(frozen=True, kw_only=True)
class CmpK50(Record):
    """$.groups[].pairs[].k50."""

    a: Optional[float]
    b: Optional[float]
    ratio: Optional[float]
    ratio_interval: Optional[list[float]]
    resamples_with_fit: Optional[float]


@dataclass(frozen=True, kw_only=True)
class CmpSafeK(Record):
    """$.groups[].pairs[].safe_k."""

    a: Optional[int]
    b: Optional[int]
    difference: Optional[int]
    difference_interval: Optional[list[float]]
    resamples_with_value: Optional[float]


@dataclass(frozen=True, kw_only=True)
class CmpClassTest(Record):
    """$.groups[].pairs[].class_test."""

    instances: int
    mean_difference: Optional[float]
    p: Optional[float]


@dataclass(frozen=True, kw_only=True)
class CmpPerK(Record):
    """$.groups[].pairs[].per_k[]."""

    k: int
    pairs: int
    rate_a: Optional[float]
    rate_b: Optional[float]
    a_only: int
    b_only: int
    mcnemar_p: Optional[float]


@dataclass(frozen=True, kw_only=True)
class CmpTiming(Record):
    """$.groups[].pairs[].cost.sketch."""

    median_a_s: Optional[float]
    median_b_s: Optional[float]
    ratio: Optional[float]
    ratio_quartiles: Optional[list[float]]


@dataclass(frozen=True, kw_only=True)
class CmpCost(Record):
    """$.groups[].pairs[].cost."""

    sketch: CmpTiming
    end_to_end: CmpTiming
    sketch_peak_memory: Optional[str | float]


@dataclass(frozen=True, kw_only=True)
class CmpDesign(Record):
    """$.groups[].pairs[].design."""

    detectable: Optional[float]
    instances_for_10pct: Optional[int]


@dataclass(frozen=True, kw_only=True)
class CmpPair(Record):
    """$.groups[].pairs[]."""

    a: str
    b: str
    instances: int
    matched_trials: int
    k50: CmpK50
    safe_k: CmpSafeK
    class_test: CmpClassTest
    per_k: list[CmpPerK]
    cost: CmpCost
    design: CmpDesign
    verdict: str


@dataclass(frozen=True, kw_only=True)
class CmpGroup(Record):
    """$.groups[]."""

    family: str
    size: str
    params: dict
    class_params: dict
    retrieval: str
    kind: str
    projected_dim: int
    pairs: list[CmpPair]


@dataclass(frozen=True, kw_only=True)
class Comparison(Record):
    """$: Paired comparisons of projectors on the same instances of one campaign: per group (family, size, parameters,
    retrieval) and pair (A, B), the k50 ratio and safe-k difference with bootstrap intervals over instances, a
    sign-flip permutation test over instances (class scope), exact McNemar tests per k (these instances), the
    cost ratios, and a one-line verdict. Empirical evidence, not a proof."""

    format: Any
    format_version: Any
    code_version: str
    campaign: CmpCampaign
    predicate: dict
    settings: CmpSettings
    methods: dict[str, str]
    notice: str
    groups: list[CmpGroup]
    checksum: str
