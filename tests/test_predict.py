"""The k predicted from features: its leave-one-group-out errors against scikit-learn.

Outside reference: scikit-learn's ``LeaveOneGroupOut`` splits with a ``StandardScaler`` + ``Ridge``
pipeline (same penalty, intercept unpenalised, population standard deviation), run on a design
matrix built here from the shipped atlas tables' JSON, not by calib's own row builder. The figures
it gives must be the ones calib reports.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from sklearn.linear_model import Ridge
from sklearn.model_selection import LeaveOneGroupOut
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from calib import atlas
from calib.analysis import predict
from calib.verdicts.saferule import ALL_PASS

ATLAS = Path(__file__).resolve().parent.parent / "results" / "atlas"


@pytest.fixture(scope="module")
def tables():
    return [json.loads((ATLAS / name).read_text()) for name in atlas.ATLAS_FILES]  # every shipped campaign


def _design(tables, response):
    """(X, ln y, family groups, size groups, class per row) from the tables' JSON, for cells with a value."""
    rows, y, families, sizes, classes = [], [], [], [], []
    projectors = sorted({entry["projector"] for table in tables for analysis in table["analyses"]
                         for entry in analysis["entries"]})
    for table in tables:
        for analysis in table["analyses"]:
            for entry in analysis["entries"]:
                value = entry["class"]["safe_k"] if response == "safe_k" else entry["transition"]["k50"]
                if value is None or (response == "safe_k" and value >= entry["projected_dim"]):
                    continue
                if response == "safe_k" and entry["class"]["reason"] == ALL_PASS:  # censored: an upper bound
                    continue
                f = entry["features"]
                rows.append([math.log(f["rows"]), math.log(f["cols"]), math.log(f["nonzeros"]), math.log(f["rank"]),
                             math.log(f["stable_rank"]), f["row_coherence"], math.log(analysis["tau"])]
                            + [float(entry["projector"] == name) for name in projectors[1:]])
                y.append(math.log(value))
                klass = entry["family"] + " " + json.dumps(entry["class_params"], sort_keys=True)
                families.append(entry["family"])
                sizes.append(f"{klass} | {entry['size']}")
                classes.append(klass)
    return np.array(rows), np.array(y), np.array(families), np.array(sizes), np.array(classes)


def _sklearn_errors(X, y, groups):
    errors = np.empty_like(y)
    for train, test in LeaveOneGroupOut().split(X, y, groups):
        model = make_pipeline(StandardScaler(), Ridge(alpha=predict.ALPHA)).fit(X[train], y[train])
        errors[test] = model.predict(X[test]) - y[test]
    return errors


def _typical(errors):
    return math.exp(math.sqrt(float(np.mean(errors ** 2)))) - 1.0


@pytest.mark.parametrize("response", predict.RESPONSES)
def test_the_reported_leave_one_group_out_errors_are_scikit_learns(tables, response):
    X, y, families, sizes, classes = _design(tables, response)
    block = predict.assess(tables)["responses"][response]
    assert block["cells"] == len(y)
    for split, groups in (("family", families), ("size", sizes)):
        errors = _sklearn_errors(X, y, groups)
        reported = block[split]
        assert reported["typical_error"] == pytest.approx(_typical(errors), rel=1e-3)  # 4 significant digits
        # per class: the same figures (calib names a class by the parameters that tell it apart, here by all)
        ours = sorted(reported["per_class"].values())
        theirs = sorted(_typical(errors[classes == klass]) for klass in set(classes))
        assert ours == pytest.approx(theirs, rel=1e-3)
        np.testing.assert_allclose(np.sort(reported["ln_errors"]), np.sort(errors), rtol=1e-8, atol=1e-10)


def test_no_prediction_is_offered_for_an_unseen_family_when_the_family_error_is_above_half(tables):
    assessment = predict.assess(tables)
    for block in assessment["responses"].values():
        assert block["family"]["typical_error"] > predict.UNSEEN_LIMIT and not block["unseen_families"]
    text = "\n".join(predict.verdict_lines(assessment))
    assert "NOT offered for unseen families" in text
    features = {"rows": 27, "cols": 52, "nonzeros": 110, "rank": 27, "stable_rank": 3.0, "row_coherence": 2.0}
    answer = predict.predict(tables, features, "gaussian", 0.05, family="netlib")
    assert answer["k"] is None and "worse than ±50%" in answer["reason"]


def test_a_measured_family_gets_a_prediction_with_its_leave_one_size_out_error(tables):
    entry = next(e for e in tables[0]["analyses"][0]["entries"]
                 if e["family"] == "lp-basis-pursuit" and e["projector"] == "gaussian" and e["n_points"] == 1601)
    answer = predict.predict(tables, entry["features"], "gaussian", 0.05, family="lp-basis-pursuit")
    assert answer["split"] == "size" and answer["typical_error"] is not None
    # a measured cell is predicted within the leave-one-size-out typical factor of its class safe k
    factor = 1 + predict.assess(tables)["responses"]["safe_k"]["size"]["per_class"]["lp-basis-pursuit"]
    assert entry["class"]["safe_k"] / factor <= answer["value"] <= entry["class"]["safe_k"] * factor
    assert answer["reason"].startswith("predicted, typical error ±")


def test_the_readme_quotes_the_figures_the_predictor_reports(tables):
    readme = (ATLAS.parent.parent / "README.md").read_text()
    section = readme[readme.index("### A k predicted from features"):readme.index("### A folder of your own models")]
    for response in predict.RESPONSES:
        block = predict.assess(tables)["responses"][response]
        for split in ("family", "size"):
            assert f"±{block[split]['typical_error'] * 100:.0f}%" in section
        for klass in block["family"]["per_class"]:
            pair = f"{block['family']['per_class'][klass] * 100:.0f}% / ±{block['size']['per_class'][klass] * 100:.0f}%"
            assert f"{klass} ±{pair}" in " ".join(section.split())
        assert f"{block['cells']} ({block['censored']})" in section
    safe = predict.assess(tables)["responses"]["safe_k"]
    assert f"{safe['censored_contradicted']} of the {safe['censored_beyond_grid']} cells" in section
