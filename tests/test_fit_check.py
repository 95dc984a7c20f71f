"""The fit check of a lookup: a Netlib LP is refused for a planted-rank class, a fresh instance of it is not.

Outside references: numpy's SVD (rank by the rule of numpy.linalg.matrix_rank, stable rank
||M||_F^2 / ||M||_2^2) of the sketched matrix [A b] of each model, and the Netlib LP afiro
(Netlib lp/data, vendored) as a model of another structure than lp-planted rank=10 of the atlas.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from calib import atlas
from calib.cli import main
from calib.families import get
from calib.families.lp_real import NETLIB_DIR
from calib.keys import stable_key, stream
from calib.problems.mps import read_mps

AFIRO = NETLIB_DIR / "feasible" / "afiro.mps"
CLASS = ("--family", "lp-planted", "--param", "rank=10", "--projector", "gaussian")


def _lookup(capsys, *argv):
    assert main(["lookup", *argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def _numpy_features(A, b):
    matrix = np.hstack([A.toarray() if hasattr(A, "toarray") else np.asarray(A), np.asarray(b).reshape(-1, 1)])
    singular = np.linalg.svd(matrix, compute_uv=False)
    rank = int(np.sum(singular > singular[0] * max(matrix.shape) * np.finfo(float).eps))  # numpy matrix_rank's rule
    return rank, float(np.sum(singular ** 2) / singular[0] ** 2), np.count_nonzero(matrix) / matrix.size


def test_a_netlib_lp_is_withheld_for_the_planted_rank_class(capsys):
    found = _lookup(capsys, "--mps", str(AFIRO), *CLASS)
    check = found["fit_check"]
    lp = read_mps(AFIRO).to_standard().lp
    rank, stable, density = _numpy_features(lp.A, lp.b)
    model = check["model_features"]
    assert model["rank"] == rank == 27 and model["stable_rank"] == pytest.approx(stable, rel=1e-5)
    assert check["features"]["density"]["value"] == pytest.approx(density, rel=1e-5)
    # the planted class has rank 10 at every measured size and dense rows: afiro is far from both
    assert check["verdict"] == "outside" and {"rank", "density"} <= set(check["outside"])
    assert found["withheld"] and found["safe_k"] is None and found["withheld_safe_k"] is not None
    assert f"calib probe {AFIRO} --find-k" in found["next_step"] and found["answer"].startswith("answer withheld")
    assert found["prediction"]["k"] is None and "worse than ±50%" in found["prediction"]["reason"]
    forced = _lookup(capsys, "--mps", str(AFIRO), *CLASS, "--force")
    assert forced["safe_k"] == found["withheld_safe_k"] and not forced["withheld"] and "FORCED" in forced["flag"]
    assert atlas.safe_k("lp-planted", projector="gaussian", params={"rank": 10}, mps=AFIRO) == found
    assert main(["lookup", "--mps", str(AFIRO), *CLASS, "--k-only"]) == 0
    assert capsys.readouterr().out.strip() == "none"


def test_a_fresh_instance_of_the_class_is_accepted(capsys):
    found = _lookup(capsys, "--size", "rows=60,cols=150", *CLASS)
    check = found["fit_check"]
    assert check["verdict"] in ("fits", "near") and check["outside"] == [] and not found["withheld"]
    assert found["safe_k"] == 10 and found["method"] == "measured at this size"
    # the same fresh instance built here (index 0, root seed 0 of the class's full parameters)
    family = get("lp-planted")
    entry_params = next(e["class_params"] for e in json.loads((atlas.SHIPPED / "safe_k.json").read_text())
                        ["analyses"][0]["entries"] if e["family"] == "lp-planted" and e["class_params"]["rank"] == 10)
    params = family.resolve({**entry_params, "rows": 60, "cols": 150}, "test")
    problem = family.make(params, 0, stream(stable_key({"family": "lp-planted", "params": params, "index": 0}), root_seed=0)).problem
    rank, stable, _ = _numpy_features(problem.A, problem.b)
    assert check["model_features"]["rank"] == rank == 10
    assert check["model_features"]["stable_rank"] == pytest.approx(stable, rel=1e-5)
    assert atlas.safe_k("lp-planted", {"rows": 60, "cols": 150}, "gaussian", params={"rank": 10}) == found
