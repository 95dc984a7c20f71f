"""`calib families`: every registered family is listed with its kind and documented parameters."""

from __future__ import annotations

import json

import numpy as np

from calib.cli import main
from calib.families import REGISTRY


def test_families_lists_every_registered_family(capsys):
    assert main(["families"]) == 0
    text = capsys.readouterr().out
    for name, family in REGISTRY.items():
        assert f"{name}  [{family.kind}]" in text
        for key in family.defaults:
            assert f"    {key} " in text


def test_families_name_json_shows_one_family(capsys):
    assert main(["families", "lp-basis-pursuit", "--json"]) == 0
    shown = json.loads(capsys.readouterr().out)
    assert shown["name"] == "lp-basis-pursuit" and shown["kind"] == "lp"
    params = {p["name"]: p for p in shown["parameters"]}
    assert set(params) == set(REGISTRY["lp-basis-pursuit"].defaults)
    assert params["measurements"]["required"] and params["signs"]["default"] == "signed"
    assert all(p["doc"] for p in params.values())


def test_unknown_family_is_a_one_line_error(capsys):
    # calib convention (helper rules): user errors exit with code 2 and one line on stderr
    assert main(["families", "no-such-family"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no-such-family" in err


# one small family per kind; the counting text is checked against the problem each one builds
KIND_EXAMPLES = {"lp": ("lp-planted", {"rows": 6, "cols": 12}), "sdp": ("sdp-planted", {"order": 4, "constraints": 5}),
                 "qp": ("qp-random", {"vars": 8, "rows": 5}), "points": ("points-gaussian", {"points": 7, "dim": 9}),
                 "clustering": ("cluster-mixture", {"points": 12, "dim": 5, "clusters": 3}),
                 "milp": ("milp-knapsack", {"constraints": 6, "items": 4})}


def _counted_from_the_problem(kind: str, problem) -> tuple[int, int]:
    """(n, m) as the kind's counting text states them, read off the built problem itself."""
    if kind in ("lp", "milp"):  # the columns of A (decisions and slacks for an MILP) plus b; the rows of A
        return problem.A.shape[1] + 1, problem.A.shape[0]
    if kind == "sdp":  # d(d + 1)/2 + 1 for order d; the constraints
        order = problem.C.shape[0]
        return order * (order + 1) // 2 + 1, len(problem.b)
    if kind == "qp":  # the rows of A plus c and the optimum; the variables
        return problem.A.shape[0] + 2, len(problem.c)
    if kind == "clustering":  # the clusters; the dimension of the points
        return problem.clusters, problem.points.shape[1]
    return problem.points.shape  # the points; their dimension


def test_every_kind_says_how_n_and_m_are_counted_and_the_families_count_so(capsys):
    from calib.problems.kinds import containers, counting

    assert set(containers()) == {family.kind for family in REGISTRY.values()} == set(KIND_EXAMPLES)
    for kind, (name, params) in KIND_EXAMPLES.items():
        family = REGISTRY[name]
        full = family.resolve(params, "test")
        problem = family.make(full, 0, np.random.default_rng([0, 7])).problem
        assert (family.n_points(full), family.projected_dim(full)) == _counted_from_the_problem(kind, problem), kind
        assert main(["families", name, "--json"]) == 0
        assert json.loads(capsys.readouterr().out)["counting"] == counting(kind)
        assert main(["families", name]) == 0
        assert "  n and m: n = " in capsys.readouterr().out
