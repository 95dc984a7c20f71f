"""One metrics record for every class: every documented field, None only where FIELDS says so."""

import json

import numpy as np
import pytest

from calib import projectors
from calib.metrics import CONDITIONS, FIELDS, KINDS, expected_fields, fills
from calib.reduce import HANDLERS, retrieval_names
from reduce_helpers import SOLVER, SparseSignProjector, instance

SCENARIOS = [  # (family, params, k values, projected statuses the scenario exists to produce)
    ("lp-planted", {"rows": 20, "cols": 40}, (4, 12, 20), {"optimal", "unbounded"}),  # k << m leaves the LP unbounded
    ("lp-planted", {"rows": 20, "cols": 40, "density": 0.3, "cost": "nonnegative"}, (10,), {"optimal"}),  # c >= 0, x >= 0: bounded
    ("lp-farkas", {"rows": 12, "cols": 24}, (2, 12), {"optimal", "infeasible"}),  # k = m keeps the Farkas certificate
    ("sdp-planted", {"order": 6, "constraints": 12}, (4, 12), {"optimal", "unbounded"}),
    ("sdp-infeasible", {"order": 5, "constraints": 10}, (2, 10), {"optimal", "infeasible"}),
    ("qp-random", {"vars": 20, "rows": 10}, (3, 20), {"optimal", "infeasible"}),
    ("qp-random", {"vars": 20, "rows": 10, "radius": 1.0}, (10,), {"optimal"}),
    ("qp-portfolio", {"assets": 12}, (6,), {"optimal", "infeasible"}),
    ("points-gaussian", {"points": 20, "dim": 30}, (10,), {None}),  # nothing is solved: no status
    ("cluster-mixture", {"points": 60, "dim": 12, "clusters": 3}, (2, 6), {"optimal"}),
    ("cluster-mixture", {"points": 60, "dim": 12, "clusters": 3, "method": "sized", "min_share": 1.0}, (4,), {"optimal"}),
    ("cluster-mixture", {"points": 60, "dim": 12, "clusters": 3, "max_iter": 1}, (4,), {"stopped_on_iterations"}),
    ("milp-knapsack", {"constraints": 12, "items": 6}, (3, 12), {"optimal"}),
    ("milp-cover", {"elements": 12, "sets": 6, "density": 0.3}, (3, 12), {"optimal"}),
]


def test_fields_are_documented():
    known = set(KINDS) | {"all"} | {f"{kind}:{name}" for kind, handler in HANDLERS.items() for name in handler.retrievals}
    assert set(HANDLERS) == set(KINDS)
    for name, field in FIELDS.items():
        assert field.meaning and field.units, name
        assert set(field.classes.split()) <= known, name
        assert field.needs in CONDITIONS, name


@pytest.mark.parametrize("family,params,ks,statuses", SCENARIOS)
def test_every_record_fills_exactly_its_documented_fields(family, params, ks, statuses):
    built = instance(family, params)
    handler = HANDLERS[built.kind]
    original = handler.solve_original(built.problem, SOLVER)
    names = list(handler.retrievals)
    seen_conditions = set()
    for k in ks:
        for replicate in range(3):
            T = projectors.make("gaussian", k, handler.projected_dim(built.problem), [k, replicate])
            rows = handler.trial_records(built.problem, original, T, names, SOLVER)
            assert len(rows) == len(names)
            for retrieval, rec in zip(names, rows):
                assert list(rec) == list(FIELDS)
                filled = {name for name, value in rec.items() if value is not None}
                allowed = {name for name in FIELDS if fills(name, built.kind, retrieval)}
                assert filled <= allowed, (retrieval, sorted(filled - allowed))
                assert expected_fields(built.kind, retrieval, rec) <= filled, (retrieval, sorted(expected_fields(built.kind, retrieval, rec) - filled))
                json.dumps(rec, allow_nan=False)  # what the store writes
                seen_conditions.add(rec["proj_status"])
    # the projected outcomes the scenario is there for really occur (fixed seeds [k, replicate]),
    # so the fields of each outcome are checked above
    assert statuses <= seen_conditions, (sorted(map(str, statuses)), sorted(map(str, seen_conditions)))


@pytest.mark.parametrize("family,params", [(family, params) for family, params, _, _ in SCENARIOS])
def test_handlers_accept_a_projector_with_sparse_output(family, params):
    # Sparse projector families return scipy.sparse matrices for sparse input; every handler must
    # reduce, solve and retrieve with them as with dense output.
    built = instance(family, params)
    handler = HANDLERS[built.kind]
    original = handler.solve_original(built.problem, SOLVER)
    m = handler.projected_dim(built.problem)
    T = SparseSignProjector(max(1, m - 1), m, np.random.default_rng(0))
    names = list(handler.retrievals)
    for retrieval, rec in zip(names, handler.trial_records(built.problem, original, T, names, SOLVER)):
        assert expected_fields(built.kind, retrieval, rec) <= {name for name, value in rec.items() if value is not None}


def test_retrieval_selection_rule():
    # Supported names in the order asked, else the kind's default.
    assert retrieval_names("lp", ["warm-start", "affine", "basis-lstsq"]) == ["warm-start", "basis-lstsq"]
    assert retrieval_names("sdp", ["basis-lstsq"]) == ["affine-psd"]
    assert retrieval_names("qp", None) == ["lift"]
    assert retrieval_names("points", ["basis-lstsq", "lift"]) == ["none"]
    qp = instance("qp-random", {"vars": 8, "rows": 4}).problem
    original = HANDLERS["qp"].solve_original(qp, SOLVER)
    T = projectors.make("gaussian", 4, 8, 1)
    assert len(HANDLERS["qp"].trial_records(qp, original, T, ["basis-lstsq", "affine-psd"], SOLVER)) == 1
