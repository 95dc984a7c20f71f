"""The fit check of a lookup answer: does the user's model resemble the instances behind it?

``calib lookup`` and :func:`calib.atlas.safe_k` answer for a class; this module computes the
features of the user's model (:mod:`calib.features`) and compares them with the per-size feature
medians of the class's measured sizes (:mod:`calib.analysis.fitcheck`), then attaches the check to
the answer under ``fit_check``:

- the model is an MPS file (its standard form, rows projected), an instance saved by calib, or a
  size of the family: then a fresh instance of the class at that size, index 0 of root seed 0 (the
  stream ``default_rng([stable_key({family, params, index: 0}), 0])`` a campaign with
  ``root_seed = 0`` would draw it from). Rank and row coherence take a thin SVD, computed here only
  up to :data:`CHECK_SVD_FLOPS` (m N min(m, N), about a second on one core) so the lookup stays
  quick; beyond it they are not compared, and said so. ``--n`` alone names no model: nothing is
  compared;
- a model *outside* the measured structure (a feature beyond its measured range by more than one
  spread) has its safe k withheld (``safe_k`` None, ``withheld`` True, the class's value in
  ``withheld_safe_k``) with the reason and the next step, measuring the model itself
  (``calib probe FILE --find-k``); ``force`` shows it, flagged. The k predicted from features
  (:mod:`calib.analysis.predict`) is added when the predictor offers one for an unseen family,
  else its refusal with the leave-one-family-out error;
- a model *near* the range (within one spread) keeps its answer, flagged.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Optional

from calib.analysis.fitcheck import compare, measured_ranges
from calib.errors import InputError

if TYPE_CHECKING:
    from calib.analysis.records import Entry, SafeKTable

#: the thin SVD budget of the check's features (m N min(m, N) flops)
CHECK_SVD_FLOPS = 1e9


def _value(text: str):
    """A KEY=VALUE value as JSON when it parses (numbers, booleans), else the text itself."""
    import json

    try:
        return json.loads(text)
    except (TypeError, ValueError):
        return text


def resolved_size(family_name: str, size: dict, params: Optional[dict] = None):
    """(family, full parameters) of a size in the family's own keys and KEY=VALUE class parameters."""
    from calib.families import get

    family = get(family_name, "--family")
    unknown = sorted(set(size) - set(family.size_keys))
    if unknown:
        raise InputError("--size", f"{unknown[0]!r} is not a size key of {family_name}",
                         f"give {', '.join(family.size_keys)} (other parameters go in --param)")
    given = {key: _value(value) if isinstance(value, str) else value for key, value in {**(params or {}), **size}.items()}
    return family, family.resolve(given, "--size")




def mps_model(path) -> dict:
    """The model of an MPS file: its standard form's features and the probe command that measures it."""
    from calib.features import instance_features
    from calib.problems.mps import read_mps_standard

    path = Path(path)
    if not path.is_file():
        raise InputError(str(path), "no such MPS file", "give the path of an .mps or .mps.gz file")
    lp = read_mps_standard(path)
    return {"features": instance_features("lp", lp, CHECK_SVD_FLOPS), "source": f"the MPS file {path.name}",
            "probe": f"calib probe {path} --find-k"}


def instance_model(manifest) -> dict:
    """The model of an instance saved by calib (its manifest)."""
    from calib.features import instance_features
    from calib.instance_io import load_instance

    instance, _ = load_instance(manifest)
    return {"features": instance_features(instance.kind, instance.problem, CHECK_SVD_FLOPS),
            "source": f"the saved instance {Path(manifest).name}", "probe": f"calib probe {manifest} --find-k"}


def size_request(family_name: str, size: dict, params: Optional[dict] = None) -> dict:
    """A size of the family as the model: the fresh instance is built once the class is known (its
    parameters complete the size), by :func:`checked`."""
    resolved_size(family_name, size, params)  # validated at the edge
    return {"family": family_name, "size": size, "params": dict(params or {})}


def size_model(family, params: dict) -> dict:
    """The model of a size of the family: a fresh instance at those full parameters (module text)."""
    from calib.features import instance_features
    from calib.keys import stable_key, stream

    rng = stream(stable_key({"family": family.name, "params": params, "index": 0}), root_seed=0)
    instance = family.make(params, 0, rng)
    options = " ".join(f"--param {key}={value}" for key, value in sorted(params.items()) if value is not None)
    return {"features": instance_features(family.kind, instance.problem, CHECK_SVD_FLOPS),
            "source": f"a fresh {family.name} instance at {family.size_label(params)}",
            "probe": f"calib probe {family.name} {options} --find-k"}


def _numeric(features: dict) -> dict:
    return {key: value for key, value in features.items() if key != "skipped"}


def checked(result: dict, entries: list["Entry"], model: Optional[dict], force: bool, table: "SafeKTable") -> dict:
    """``result`` (a k answer of :func:`calib.analysis.lookup.k_for`) with its fit check (module text);
    ``entries`` the answering class's entries, ``table`` the table they come from."""
    if model is None:
        return result | {"fit_check": {"verdict": "not compared", "reason": "no model given (--n names a size only)",
                                       "features": {}, "outside": [], "near": [], "not_compared": [],
                                       "model_features": None}, "withheld": False}
    if "features" not in model:  # a size of the family: a fresh instance of the answering class
        model = size_model(*resolved_size(model["family"], model["size"], {**entries[0].class_params, **model["params"]}))
    check = compare(model["features"], measured_ranges([entry.features.to_dict() if entry.features else None for entry in entries]))
    check |= {"model": model["source"], "model_features": _numeric(model["features"])}
    result = result | {"fit_check": check, "withheld": False}
    if check["verdict"] == "near":
        result["flag"] = "; ".join(filter(None, [result["flag"], f"near the edge of the measured structure: {check['reason']}"]))
    if check["verdict"] != "outside" or result["safe_k"] is None:
        return result
    step = f"measure it: `{model['probe']}`"
    if force:
        result["flag"] = "; ".join(filter(None, [f"FORCED: {model['source']} lies outside the instances behind this "
                                                 f"answer ({check['reason']}); {step}", result["flag"]]))
        return result
    from calib.analysis.predict import predict

    prediction = predict([table.to_dict()], model["features"], result["projector"], result["tau"] or 0.05)
    return result | {
        "withheld": True, "withheld_safe_k": result["safe_k"], "safe_k": None, "next_step": step,
        "prediction": prediction,
        "flag": f"withheld: {model['source']} does not resemble the instances behind this answer (outside by more than "
                f"one measured spread: {', '.join(check['outside'])}; the fit check has the figures); {step} "
                f"(--force shows the class's answer)",
        "answer": f"answer withheld: {model['source']} lies outside the {result['family']} instances measured "
                  f"({', '.join(check['outside'])}); {step}"}
