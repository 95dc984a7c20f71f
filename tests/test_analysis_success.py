"""Success predicates decided at analysis time, on hand-made rows of the tidy trial table.

The expected verdicts follow the definitions of README.md ("Success predicates") and calib.metrics: the
projected LP is a relaxation, so "original infeasible, projected feasible" is a failure; a metric
is checked only on the kinds that fill it; a point set is judged by its distortion alone.
"""

from __future__ import annotations

import pandas as pd
import pytest

from calib.analysis.tables import build_analysis
from calib.errors import InputError
from calib.verdicts.saferule import Confidence
from calib.verdicts.success import PRESETS, evaluate, make_predicate, primary_tau, with_tau


def _rows(*records):
    base = {"status": "ok", "orig_status": "optimal", "proj_status": "optimal", "kind": "lp", "proj_gap": None,
            "obj_error": None, "feas_error": None, "sign_violation": None, "distortion_max": None}
    return pd.DataFrame([{**base, **record} for record in records])


def test_bound_preset_uses_the_absolute_gap_and_counts_misclassification():
    rows = _rows({"proj_gap": 0.01}, {"proj_gap": -0.5}, {"proj_gap": 0.2},
                 {"orig_status": "infeasible", "proj_status": "optimal"},
                 {"orig_status": "infeasible", "proj_status": "infeasible"},
                 {"status": "error", "proj_gap": 0.0}, {"proj_gap": None})
    assert evaluate(rows, PRESETS["bound"]).tolist() == [True, False, False, False, True, False, False]


def test_metrics_are_checked_only_on_kinds_that_fill_them():
    # calib.metrics.FIELDS: sign_violation is filled for LP and SDP, not QP; distortion for point sets.
    rows = _rows({"kind": "qp", "obj_error": 0.01, "feas_error": 0.01},
                 {"kind": "lp", "obj_error": 0.01, "feas_error": 0.01},
                 {"kind": "lp", "obj_error": 0.01, "feas_error": 0.01, "sign_violation": 0.01})
    assert evaluate(rows, PRESETS["usable"]).tolist() == [True, False, True]


def test_point_sets_are_judged_by_distortion_and_left_out_otherwise():
    rows = _rows({"kind": "points", "orig_status": "ok", "distortion_max": 0.1},
                 {"kind": "points", "orig_status": "ok", "distortion_max": 0.3})
    assert evaluate(rows, PRESETS["distortion"]).tolist() == [True, False]
    assert evaluate(rows, PRESETS["bound"]).tolist() == [False, False]
    assert not PRESETS["bound"].covers("points") and PRESETS["distortion"].covers("points")
    assert not PRESETS["distortion"].covers("lp")
    analysis = build_analysis(rows.assign(family="points-x", k=4), PRESETS["bound"], Confidence())
    assert analysis["entries"] == [] and analysis["excluded"][0]["kind"] == "points"


def test_explicit_tolerances_and_the_tau_ladder():
    predicate = make_predicate("usable", feas=0.2)
    assert (predicate.name, predicate.obj, predicate.feas) == ("usable+custom", 0.05, 0.2)
    assert primary_tau(predicate) == 0.2
    assert with_tau(PRESETS["bound"], 0.01).gap == 0.01
    assert with_tau(PRESETS["distortion"], 0.3).distortion == 0.3
    with pytest.raises(InputError, match="--max-gap"):
        make_predicate("bound", gap=-1.0)
    with pytest.raises(InputError, match="no tolerance to vary"):
        with_tau(PRESETS["classify"], 0.1)
    with pytest.raises(InputError, match="unknown preset"):
        make_predicate("nope")
