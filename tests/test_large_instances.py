"""One large-instance trial per kind, through the worker's own code path, in a few seconds.

Each case solves the original of an instance as a worker does, sends two trial tasks the way a
sandbox does (:class:`~calib.sweep.tasks.HeldOriginals`): the first carries the original, the
second refers to it by identity only, and the worker answers it from its cache. The second trial
runs under ``tracemalloc`` (numpy and scipy report their buffers to it; the solvers' own C/C++
workspaces are partly invisible to it, which only makes the bounds below easier to fail on our
side, not to pass).

The memory bounds, derived from array shapes (8 bytes per float64 entry):

- sparse input (LP, SDP constraint matrices, m x n): one dense m x n float64 array takes m n 8
  bytes, a float32 one half of that; the trial's peak must stay below a quarter of it, so forming
  any dense m x n copy (the mistake this guards against) fails the test whatever else is allocated.
- QP (variables projected, Q is a dense m x m factor model): the reduced problem's pieces are
  m x k or k x k with k = m / 10; the peak may hold one transient copy of Q (scipy's dense-times-
  sparse product) but no second one: below 1.5 m² 8 bytes.
- points (n points, all pairs): the original squared distances are cached on the instance by the
  first trial (float32 triangle); a later trial works in Gram blocks of ``BLOCK_ENTRIES`` entries,
  so its peak is a few blocks plus the n x k projected points, far below one n x n float64 Gram
  matrix (n² 8 bytes): checked against a quarter of it.
"""

from __future__ import annotations

import pickle
import tracemalloc

import numpy as np
import pytest
import scipy.sparse as sp

from calib.reduce import points as points_module
from calib.sweep import tasks
from calib.sweep.tasks import HeldOriginals, ORIGINAL_FIELDS, OriginalTask, TrialTask, built_instance, execute
from calib.trial import InstanceRef, ProjectorChoice, Trial

SOLVER = {"time_limit_s": 30.0, "trial_timeout_s": 120.0}


def _dense_bytes(problem, kind: str) -> float:
    if kind in ("lp", "sdp"):
        rows, cols = problem.A.shape
        return 8.0 * rows * cols
    if kind == "qp":
        return 8.0 * problem.Q.shape[0] ** 2
    return 8.0 * problem.n_points ** 2


#: kind -> (family, params, projector, k of the measured trial, retrievals, share of the dense size allowed)
CASES = {
    "lp": ("lp-quantile", {"rows": 4000, "features": 3}, "countsketch", 80, ("basis-lstsq", "alternating"), 0.25),
    "sdp": ("sdp-theta", {"nodes": 80, "edge_prob": 0.5}, "countsketch", 300, ("affine-psd",), 0.25),
    "qp": ("qp-portfolio", {"assets": 600}, "countsketch", 60, ("lift",), 1.5),
    "points": ("points-gaussian", {"points": 3000, "dim": 50}, "countsketch", 20, ("none",), 0.25),
}


@pytest.mark.parametrize("kind", sorted(CASES))
def test_large_trial_forms_no_dense_copy_and_its_task_carries_no_original(kind, monkeypatch):
    family, params, projector, k, retrievals, share = CASES[kind]
    monkeypatch.setattr(tasks, "_originals", tasks.OrderedDict())
    monkeypatch.setattr(points_module, "BLOCK_ENTRIES", 100_000)  # 0.8 MB blocks: n = 3000 needs many
    from calib.families import get

    ref = InstanceRef(family, get(family).resolve(params, family), 0, 1414)
    solved = execute(OriginalTask(ref, SOLVER))["row"]
    assert solved["orig_status"] == "optimal", solved["orig_message"]
    original = {name: solved[name] for name in ORIGINAL_FIELDS}
    held, choice = HeldOriginals(), ProjectorChoice(projector, ())
    first, measured = (held.prepare(TrialTask(Trial(ref, choice, size, 0, str(size)), retrievals, SOLVER, original))
                       for size in (max(2, k // 4), k))
    assert first.original is not None and measured.original is None
    if original["orig_x"] is not None and original["orig_x"].size > 100:
        assert len(pickle.dumps(measured)) < original["orig_x"].nbytes < len(pickle.dumps(first))

    assert all(status == "ok" for status, _, _ in execute(first)["outcomes"])
    problem = built_instance(ref).problem
    if kind in ("lp", "sdp"):
        assert sp.issparse(problem.A)  # the generator kept the sparse structure sparse
    tracemalloc.start()
    try:
        outcomes = execute(measured)["outcomes"]
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert [status for status, _, _ in outcomes] == ["ok"] * len(retrievals), outcomes
    dense = _dense_bytes(problem, kind)
    assert peak < share * dense, f"peak {peak / 1e6:.1f} MB against {dense / 1e6:.1f} MB dense"
