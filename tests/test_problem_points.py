"""The problem layer: each container counts its own JL points, and the layer imports nothing above it.

A family states the count from its sizes before building (``n_points``, through the container's
``jl_points_for``); the built problem states it from its own arrays (``jl_points``). The two must
agree for every family, or a table would compare its measured k with the published bounds at the
wrong n. What is counted, by kind:

- LP and MILP: the columns of the standard form's A plus b (K. Vu, P.-L. Poirion and L. Liberti,
  "Random projections for linear programming", Math. Oper. Res. 43(4), 2018, project A's columns
  and b; from memory);
- SDP of order d: d(d + 1)/2 svec columns plus b (the same count in svec coordinates);
- QP: the inequality rows (finite bounds counted as rows), c and the optimum (rows + 2);
- points: the points (the lemma's own setting: Johnson and Lindenstrauss 1984);
- clustering: the number of clusters K (Makarychev, Makarychev and Razenshteyn, STOC 2019: the
  dimension depends on K and eps, not on the number of points).
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

from calib.families import REGISTRY
from calib.families.lp_real import netlib_files
from calib.problems.clustering import ClusteringProblem
from calib.problems.lp import StandardLP
from calib.problems.points import PointSet
from calib.problems.qp import QP
from calib.problems.sdp import StandardSDP

SMALL = [("lp-planted", {"rows": 6, "cols": 12}), ("lp-farkas", {"rows": 6, "cols": 12}),
         ("lp-covering", {"rows": 5, "cols": 7}), ("lp-quantile", {"rows": 10, "features": 1}),
         ("lp-basis-pursuit", {"measurements": 5, "length": 10}), ("lp-transport", {"sources": 3, "sinks": 4}),
         ("netlib", {"name": "afiro"}), ("points-gaussian", {"points": 7, "dim": 9}),
         ("points-binary", {"points": 10, "dim": 8, "density": 0.25}), ("qp-random", {"vars": 8, "rows": 5}),
         ("qp-portfolio", {"assets": 8}), ("sdp-planted", {"order": 4, "constraints": 5}), ("sdp-maxcut", {"nodes": 6}),
         ("sdp-theta", {"nodes": 6}), ("cluster-mixture", {"points": 12, "dim": 5, "clusters": 3}),
         ("milp-knapsack", {"constraints": 6, "items": 4}), ("milp-cover", {"elements": 6, "sets": 5, "density": 0.4})]


@pytest.mark.parametrize("name,params", SMALL, ids=[name for name, _ in SMALL])
def test_a_family_counts_the_points_its_built_problem_counts(name, params):
    family = REGISTRY[name]
    full = family.resolve(params, "test")
    problem = family.make(full, 0, np.random.default_rng([0, 7])).problem
    assert family.n_points(full) == problem.jl_points


def test_each_container_counts_as_its_kind_says():
    # worked by hand from the counts of the module docstring
    lp = StandardLP(c=[1.0, 0.0, 2.0], A=[[1.0, 1.0, 0.0], [0.0, 1.0, 1.0]], b=[1.0, 1.0])
    assert lp.jl_points == 4  # three columns and b
    sdp = StandardSDP.from_matrices(np.eye(3), [np.eye(3)], [1.0])
    assert sdp.jl_points == 7  # svec of a 3 x 3 matrix has 6 coordinates, plus b
    qp = QP(Q=np.eye(3), c=np.zeros(3), A=np.ones((2, 3)), b=np.ones(2), lower=[0.0, 0.0, -np.inf], upper=[1.0, 2e20, 5.0])
    assert qp.jl_points == 2 + 4 + 2  # two rows, four finite bounds (2e20 counts as infinite), c and x*
    assert PointSet(np.arange(10.0).reshape(5, 2)).jl_points == 5
    assert ClusteringProblem(np.arange(20.0).reshape(10, 2), clusters=3).jl_points == 3


PROGRAM = """
import json, sys, pathlib
import calib.problems.kinds, calib.problems.mps
from calib.problems.mps import read_mps_standard
read_mps_standard(pathlib.Path(sys.argv[1]))  # the lazy imports of reading a file run too
print(json.dumps(sorted(name for name in sys.modules if name.startswith("calib"))))
"""


def test_the_problem_layer_loads_nothing_of_calib_above_it():
    path = str(netlib_files()["afiro"][0])
    done = subprocess.run([sys.executable, "-c", PROGRAM, path], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    loaded = json.loads(done.stdout.strip().splitlines()[-1])
    foundation = ("calib", "calib.errors", "calib.checks", "calib.keys", "calib.wording")  # the layer below every other
    above = [name for name in loaded if name not in foundation and not name.startswith("calib.problems")]
    assert above == []
