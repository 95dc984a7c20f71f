"""The rule file for pipelines: its rules from the shipped atlas, its schema, and the one-call answer.

Outside references: the JSON Schema 2020-12 validator of the jsonschema package, the class safe k
of the shipped atlas table (recomputed here from its JSON), numpy's SVD for the features of a fresh
lp-planted instance.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from calib import atlas
from calib.analysis.rulefile import rule_document, write_rules
from calib.analysis.tablefile import schema
from calib.errors import InputError
from calib.families import get

ATLAS = Path(__file__).resolve().parent.parent / "results" / "atlas" / "safe_k.json"


@pytest.fixture(scope="module")
def document():
    return rule_document(json.loads(ATLAS.read_text()))


def _class(document, family, projector, tau, **params):
    return next(item for item in document["classes"] if item["family"] == family and item["projector"] == projector
                and item["tau"] == tau and all(item["class_params"].get(k) == v for k, v in params.items()))


def test_the_rule_file_matches_its_schema(document):
    jsonschema.Draft202012Validator(schema("k-rule.v1.json")).validate(document)
    assert document["source_checksum"] == json.loads(ATLAS.read_text())["checksum"]


def test_the_envelope_gives_at_least_each_measured_class_safe_k(document):
    table = json.loads(ATLAS.read_text())
    entries = [e for e in table["analyses"][0]["entries"] if e["family"] == "lp-basis-pursuit" and e["projector"] == "gaussian"]
    rule = _class(document, "lp-basis-pursuit", "gaussian", 0.05)
    assert rule["scope"] == "class" and rule["basis"] == "measured sizes"
    ratio = max(e["class"]["safe_k"] / e["projected_dim"] for e in entries)
    assert ratio <= rule["fraction_rule"]["f"] <= ratio * (1 + 1e-3)  # rounded up at 4 significant digits
    a, C = rule["log_rule"]["a"], rule["log_rule"]["C"]
    for e in entries:
        assert math.ceil(rule["fraction_rule"]["f"] * e["projected_dim"]) >= e["class"]["safe_k"]
        assert math.ceil(a + C * math.log(e["n_points"])) >= e["class"]["safe_k"]
    covering = _class(document, "lp-covering", "gaussian", 0.05)
    assert covering["scope"] is None and "has no safe k" in covering["reason"]


def test_a_rule_file_answers_a_fresh_instance_and_withholds_a_real_lp(document, tmp_path):
    path = tmp_path / "rules.json"
    write_rules(json.loads(ATLAS.read_text()), path)
    family = get("lp-planted")
    params = family.resolve({"rows": 90, "cols": 200, "rank": 10, "cost": "nonnegative"}, "test")
    problem, _ = family.build(params, np.random.default_rng(2026))
    matrix = np.hstack([problem.A.toarray() if hasattr(problem.A, "toarray") else problem.A, problem.b.reshape(-1, 1)])
    left, singular, _ = np.linalg.svd(matrix, full_matrices=False)  # numpy's SVD as the reference for the features
    rank = int(np.sum(singular > singular[0] * max(matrix.shape) * np.finfo(float).eps))
    coherence = matrix.shape[0] / rank * float(np.max(np.sum(left[:, :rank] ** 2, axis=1)))  # Candès & Recht 2009
    features = {"rows": matrix.shape[0], "cols": matrix.shape[1], "nonzeros": int(np.count_nonzero(matrix)),
                "rank": rank, "stable_rank": float(np.sum(singular ** 2) / singular[0] ** 2), "row_coherence": coherence}
    answer = atlas.rule_k(path, "gaussian", features=features, n=201, m=90, family="lp-planted", tau=0.05, params={"rank": 10})
    assert rank == 10 and answer["fit"]["verdict"] == "fits" and answer["k"] is not None and not answer["withheld"]
    assert answer["scope"] == "class" and answer["k"] >= 10
    real = atlas.rule_k(path, "gaussian", mps=Path(atlas.__file__).parent / "data" / "netlib" / "feasible" / "afiro.mps",
                        family="lp-planted", tau=0.05, params={"rank": 10})
    assert real["withheld"] and real["k"] is None and "calib probe FILE --find-k" in real["reason"]
    assert real["fit"]["features"]["density"]["position"] == "outside"
    forced = atlas.rule_k(path, "gaussian", mps=Path(atlas.__file__).parent / "data" / "netlib" / "feasible" / "afiro.mps",
                          family="lp-planted", tau=0.05, params={"rank": 10}, force=True)
    assert forced["k"] is not None and not forced["withheld"]
    with pytest.raises(InputError, match="classes match"):
        atlas.rule_k(path, "gaussian", features=features, n=201, m=90)


def test_an_edited_rule_file_is_refused(document, tmp_path):
    path = tmp_path / "rules.json"
    path.write_text(json.dumps(document | {"notice": "edited"}))
    with pytest.raises(InputError, match="checksum mismatch"):
        atlas.rule_k(path, "gaussian", features={}, n=10, m=5)
