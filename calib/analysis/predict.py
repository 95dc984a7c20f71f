"""A k predicted from instance features, with its error measured on families and sizes left out.

For a model that matches no measured class, the only evidence calib has is how k varied with the
structure of the classes it did measure. This module fits that relation on the cells of safe-k
tables (the shipped atlas by default) and, above all, measures how wrong it is.

The model. One row per cell (family, size, projector, tolerance) of every analysis of the tables,
with its per-cell feature medians (:mod:`calib.features`). Two responses, each fitted apart:

- ``ln k50``: the logistic transition's k50 of the cell;
- ``ln safe k``: the cell's class safe k (the default answer of ``calib lookup``).

Regressors x (p = 7 + projectors - 1): ln rows, ln cols, ln nonzeros, ln rank, ln stable rank and
row coherence of the sketched matrix, ln tau (the predicate's primary tolerance), and one
indicator per projector but the first (sorted by name). The fit is ridge regression on
standardised regressors,

    min_w,b  || y - b - Z w ||^2 + ALPHA || w ||^2,   Z = (X - mean) / std   (std 1 where it is 0),

the intercept b unpenalised: a small ridge, ALPHA = 1 fixed a priori (never tuned on the errors
below), keeps the fit defined when the few measured families make regressors collinear. Solved
by numpy (normal equations on p columns): O(cells p^2 + p^3).

Censoring, stated: a cell without a value (no swept k reaches the target, the safe k equals m, or
no logistic fit) is *left out of the fit*; it says only that k lies beyond the largest swept k,
so the assessment counts the cells without a safe k whose prediction falls at or below their
largest swept k (predictions the data contradict; a missing k50 says nothing of the kind). Cells lacking a feature (rank and row coherence
are skipped for large matrices) are left out too, and counted.

The error. Each cell's ln error e = ln(predicted) - ln(measured) is taken from a fit that did not
see it, under two splits:

- *leave one family out*: the model is fitted on the other families; this is the error for a
  model of a family calib never measured;
- *leave one size out*: one size of one class (all its projectors and tolerances) is held out;
  this is the error for a new size of a measured class.

The typical error is exp(sqrt(mean e^2)) - 1, reported as "±x%" (a factor, so +x% and its
inverse), overall and per class. When the leave-one-family-out error is worse than
:data:`UNSEEN_LIMIT` (±50%), the predictor says so and offers no prediction for a model of an
unseen family. These are empirical figures on the tables' cells, not a bound.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from typing import Optional, Sequence

import numpy as np

from calib.analysis.classnames import class_namer
from calib.errors import InputError
from calib.verdicts.saferule import censoring

#: ridge penalty on the standardised regressors (fixed a priori, module text)
ALPHA = 1.0
#: the leave-one-family-out typical error above which no unseen family is predicted (±50%)
UNSEEN_LIMIT = 0.5
#: the feature regressors, in order (each from a per-cell median of :mod:`calib.features`)
FEATURES = ("rows", "cols", "nonzeros", "rank", "stable_rank", "row_coherence")
LOGGED = {"rows", "cols", "nonzeros", "rank", "stable_rank"}
RESPONSES = ("k50", "safe_k")
#: how :func:`calib.verdicts.saferule.censoring` starts the reason of a cell whose k lies beyond its grid
BEYOND = "no safe k"


@dataclass(frozen=True)
class Cell:
    """One table cell as a regression row: its features, target, values and groups."""

    family: str
    klass: str  # family with the class parameters that tell it apart
    size: str
    projector: str
    tau: float
    features: dict
    largest_k: int
    values: dict  # response -> value or None
    censored: dict  # response -> reason ('' when fitted)

    @property
    def complete(self) -> bool:
        return all(self.features.get(name) is not None and self.features[name] > 0 for name in FEATURES)


def table_cells(tables: Sequence[dict]) -> list[Cell]:
    """Every cell of every analysis of ``tables`` (module text), in table order."""
    cells = []
    for table in tables:
        for analysis in table["analyses"]:
            if analysis["tau"] is None:
                continue
            by_family: dict = {}
            for entry in analysis["entries"]:
                by_family.setdefault(entry["family"], []).append(entry)
            namers = {family: class_namer([item["class_params"] for item in items]) for family, items in by_family.items()}
            for entry in analysis["entries"]:
                safe = entry["class"]["safe_k"]
                k50 = entry["transition"]["k50"]
                label = namers[entry["family"]](entry["class_params"])
                cells.append(Cell(
                    entry["family"], f"{entry['family']} {label}".strip(), entry["size"], entry["projector"],
                    float(analysis["tau"]), entry.get("features") or {}, max(point["k"] for point in entry["grid"]),
                    {"safe_k": safe, "k50": k50},
                    {"safe_k": censoring(safe, entry["class"]["reason"], entry["projected_dim"]),
                     "k50": "" if k50 is not None else f"no logistic fit ({entry['transition']['reason']})"}))
    return cells


def regressors(features: dict, projector: str, tau: float, projectors: Sequence[str]) -> np.ndarray:
    """The regressor row x of one model (module text): shape (7 + len(projectors) - 1,)."""
    values = [math.log(features[name]) if name in LOGGED else float(features[name]) for name in FEATURES]
    return np.array(values + [math.log(tau)] + [1.0 if projector == name else 0.0 for name in projectors[1:]])


@dataclass(frozen=True)
class RidgeFit:
    """A fitted ridge model on standardised regressors (module text)."""

    mean: np.ndarray
    scale: np.ndarray
    coef: np.ndarray
    intercept: float

    def predict(self, X: np.ndarray) -> np.ndarray:
        return self.intercept + ((np.atleast_2d(X) - self.mean) / self.scale) @ self.coef


def fit_ridge(X: np.ndarray, y: np.ndarray, alpha: float = ALPHA) -> RidgeFit:
    """Ridge regression of ``y`` (n,) on ``X`` (n, p), standardised, intercept unpenalised (module text)."""
    mean = X.mean(axis=0)
    scale = X.std(axis=0)
    scale = np.where(scale > 0, scale, 1.0)
    Z = (X - mean) / scale
    centred = y - y.mean()
    coef = np.linalg.solve(Z.T @ Z + alpha * np.eye(X.shape[1]), Z.T @ centred)
    return RidgeFit(mean, scale, coef, float(y.mean()))


def held_out_errors(X: np.ndarray, y: np.ndarray, groups: Sequence[str]) -> np.ndarray:
    """Per row, prediction minus value from a fit without the row's group (leave one group out)."""
    groups = np.asarray(groups)
    errors = np.empty_like(y)
    for group in np.unique(groups):
        out = groups == group
        if out.all():
            errors[out] = np.nan  # nothing left to fit on
            continue
        errors[out] = fit_ridge(X[~out], y[~out]).predict(X[out]) - y[out]
    return errors


def typical_error(ln_errors) -> Optional[float]:
    """exp(root mean square of the ln errors) - 1: the typical factor of error as a fraction (±).

    >>> round(typical_error([math.log(1.5), -math.log(1.5)]), 12)
    0.5
    """
    ln_errors = np.asarray([e for e in ln_errors if np.isfinite(e)], dtype=float)
    if ln_errors.size == 0:
        return None
    return float(math.exp(math.sqrt(float(np.mean(ln_errors ** 2)))) - 1.0)


def _rounded(value: Optional[float]) -> Optional[float]:
    return None if value is None else float(f"{value:.4g}")


@dataclass
class Dataset:
    """The fitted rows of one response: regressors, ln values and the rows' groups."""

    response: str
    cells: list
    X: np.ndarray
    y: np.ndarray
    projectors: tuple
    censored: list
    incomplete: int

    def groups(self, split: str) -> list[str]:
        if split == "family":
            return [cell.family for cell in self.cells]
        return [f"{cell.klass} | {cell.size}" for cell in self.cells]


def dataset(cells: list[Cell], response: str) -> Dataset:
    """The rows of ``response`` (uncensored cells with every feature) and the censored ones kept apart."""
    projectors = tuple(sorted({cell.projector for cell in cells}))
    complete = [cell for cell in cells if cell.complete]
    fitted = [cell for cell in complete if not cell.censored[response]]
    censored = [cell for cell in complete if cell.censored[response]]
    width = len(FEATURES) + len(projectors)  # the features, ln tau and projectors - 1 indicators
    X = np.array([regressors(cell.features, cell.projector, cell.tau, projectors) for cell in fitted]).reshape(len(fitted), width)
    y = np.log(np.array([float(cell.values[response]) for cell in fitted]))
    return Dataset(response, fitted, X, y, projectors, censored, len(cells) - len(complete))


def split_errors(data: Dataset, split: str) -> dict:
    """The typical error of one split, overall and per class, with the per-cell ln errors."""
    errors = held_out_errors(data.X, data.y, data.groups(split))
    per_class = {}
    for klass in sorted({cell.klass for cell in data.cells}):
        mine = [error for error, cell in zip(errors, data.cells) if cell.klass == klass]
        per_class[klass] = _rounded(typical_error(mine))
    return {"typical_error": _rounded(typical_error(errors)), "per_class": per_class,
            "groups": len(set(data.groups(split))), "ln_errors": [float(e) for e in errors]}


def assess(tables: Sequence[dict]) -> dict:
    """The predictor's assessment per response (module text): cells fitted, censored, both splits' errors."""
    cells = table_cells(tables)
    out = {"alpha": ALPHA, "features": list(FEATURES) + ["tau"], "unseen_limit": UNSEEN_LIMIT, "responses": {}}
    for response in RESPONSES:
        data = dataset(cells, response)
        block = {"cells": len(data.cells), "censored": len(data.censored), "incomplete_features": data.incomplete,
                 "families": sorted({cell.family for cell in data.cells})}
        if len(block["families"]) < 2:
            block |= {"reason": "fewer than two families with a value: no leave-one-family-out error"}
        else:
            fit = fit_ridge(data.X, data.y)
            block["family"] = split_errors(data, "family")
            block["size"] = split_errors(data, "size")
            beyond = [cell for cell in data.censored if cell.censored[response].startswith(BEYOND)]
            block["censored_beyond_grid"] = len(beyond)
            block["censored_contradicted"] = sum(1 for cell in beyond if math.exp(fit.predict(
                regressors(cell.features, cell.projector, cell.tau, data.projectors))[0]) <= cell.largest_k)
            lofo = block["family"]["typical_error"]
            block["unseen_families"] = lofo is not None and lofo <= UNSEEN_LIMIT
        out["responses"][response] = block
    return out


def verdict_lines(assessment: dict) -> list[str]:
    """Plain sentences of an assessment: the errors per split and class, and what is offered."""
    lines = [f"k predicted from features (ridge, alpha {assessment['alpha']:g}, on {', '.join(assessment['features'])}; "
             f"censored cells left out of the fit)"]
    for response, block in assessment["responses"].items():
        name = "ln k50" if response == "k50" else "ln class safe k"
        head = (f"{name}: {block['cells']} cells of {len(block['families'])} families fitted, {block['censored']} censored "
                f"cells left out, {block['incomplete_features']} without every feature")
        if "family" not in block:
            lines.append(f"{head}; {block['reason']}")
            continue
        lines.append(head)
        for split, title in (("family", "leave one family out"), ("size", "leave one size out")):
            errors = block[split]
            classes = "; ".join(f"{klass} ±{_percent(value)}" for klass, value in errors["per_class"].items())
            lines.append(f"  {title} ({errors['groups']} groups): typical error ±{_percent(errors['typical_error'])} "
                         f"(per class: {classes})")
        if block["censored_beyond_grid"]:
            lines.append(f"  cells with no safe k up to their largest swept k whose prediction lies at or below it "
                         f"(contradicted by the data): {block['censored_contradicted']} of {block['censored_beyond_grid']}")
        if block["unseen_families"]:
            lines.append(f"  offered for unseen families as 'predicted, typical error ±{_percent(block['family']['typical_error'])}'")
        else:
            lines.append(f"  NOT offered for unseen families: the leave-one-family-out error ±"
                         f"{_percent(block['family']['typical_error'])} is worse than ±{UNSEEN_LIMIT:.0%}")
    return lines


def _percent(value: Optional[float]) -> str:
    return "n/a" if value is None else f"{value * 100:.0f}%"


def predict(tables: Sequence[dict], features: dict, projector: str, tau: float, family: Optional[str] = None,
            response: str = "safe_k") -> dict:
    """The predicted k of one model (its features, the projector and tolerance asked), or why none is offered.

    ``family`` names the model's family when it is one of the tables' (then the leave-one-size-out
    error applies), else the model counts as an unseen family (the leave-one-family-out error).
    """
    if response not in RESPONSES:
        raise InputError("response", f"unknown response {response!r}", f"choose one of {', '.join(RESPONSES)}")
    cells = table_cells(tables)
    data = dataset(cells, response)
    if projector not in data.projectors:
        raise InputError("--projector", f"{projector!r} is not among the measured projectors",
                         f"choose one of {', '.join(data.projectors)}")
    missing = [name for name in FEATURES if features.get(name) is None or features[name] <= 0]
    if missing:
        return {"k": None, "reason": f"the model lacks the features {', '.join(missing)}"}
    seen = family in {cell.family for cell in data.cells}
    split = "size" if seen else "family"
    errors = split_errors(data, split)["typical_error"]
    if not seen and (errors is None or errors > UNSEEN_LIMIT):
        return {"k": None, "split": split, "typical_error": errors,
                "reason": f"no prediction for a model of an unseen family: the predictor's leave-one-family-out error is "
                          f"±{_percent(errors)}, worse than ±{UNSEEN_LIMIT:.0%}"}
    value = math.exp(fit_ridge(data.X, data.y).predict(regressors(features, projector, tau, data.projectors))[0])
    return {"k": math.ceil(value), "value": value, "split": split, "typical_error": errors,
            "reason": f"predicted, typical error ±{_percent(errors)} (leave one {split} out)"}


def report_section(tables: Sequence[dict]) -> str:
    """The report's HTML section on the predictor (its assessment on the report's table)."""
    from html import escape

    lines = verdict_lines(assess(tables))
    return "<h2>A k predicted from features</h2>" + "".join(f"<p>{escape(line)}</p>" for line in lines)


def cells_json(assessment: dict) -> str:
    """The assessment without its per-cell errors, as JSON text."""
    slim = json.loads(json.dumps(assessment))
    for block in slim["responses"].values():
        for split in ("family", "size"):
            if split in block:
                block[split].pop("ln_errors")
    return json.dumps(slim, indent=2, sort_keys=True)
