"""Property-based tests (hypothesis): projectors and spec expansion hold their invariants on any input.

Projectors, for every family of :func:`calib.projectors.names`: the output shape is (k, n) for an
(m, n) input and (k,) for a vector; dense, CSR and CSC inputs give the same product (sparse
families return sparse output for sparse input); the product equals the explicit matrix times the
input (the definition of a linear map, checked against numpy's own matmul); the same seed gives
bit-identical draws. Tolerances: the fast kernels sum in another order than numpy's matmul, so
they agree to a few ulps times the number of terms summed (common practice: rtol 1e-12 with an
absolute floor scaled by sqrt(m) and the input's size).

Spec expansion: trial ids are unique; growing a grid (a k, a replicate, a projector, a family)
keeps every existing trial id together with its instance, stream entropy, k and replicate, so a
grown campaign reuses every stored number (DEVELOPERS.md, "Randomness"; docs/spec.md, growing a campaign). The last
test checks the numbers themselves: the metrics of shared trials are equal between a small and a
grown campaign, timings aside.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from calib import projectors

FAST = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
#: per projector family (each family is its own parametrized test, so none is left to chance)
PER_FAMILY = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _options(name: str, k: int, data) -> dict:
    if name == "sparse-jl":
        return {"s": data.draw(st.integers(1, min(k, 4)), label="s")}
    if name == "very-sparse":
        return {"density": data.draw(st.sampled_from([0.1, 0.5, 1.0]), label="density")}
    return {}


def _input(m: int, n: int, density: float, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    X = rng.standard_normal((m, n))
    X[rng.random((m, n)) >= density] = 0.0
    return X


def _dense(Y) -> np.ndarray:
    return Y.toarray() if sp.issparse(Y) else np.asarray(Y)


@pytest.mark.parametrize("name", projectors.names())
@PER_FAMILY
@given(m=st.integers(1, 70), n=st.integers(1, 6), data=st.data(), density=st.sampled_from([0.0, 0.2, 1.0]),
       seed=st.integers(0, 2**32 - 1))
def test_projector_shapes_dense_sparse_and_explicit_matrix_agree(name, m, n, data, density, seed):
    k = data.draw(st.integers(1, m), label="k")
    options = _options(name, k, data)
    T = projectors.make(name, k, m, seed, **options)
    X = _input(m, n, density, seed)
    dense = T.apply(X)
    assert isinstance(dense, np.ndarray) and dense.shape == (k, n)
    tolerance = dict(rtol=1e-12, atol=1e-12 * np.sqrt(m) * (1.0 + np.abs(X).max()))
    np.testing.assert_allclose(dense, T.matrix() @ X, **tolerance)
    for fmt in (sp.csr_array, sp.csc_array, sp.coo_array):
        out = T.apply(fmt(X))
        assert out.shape == (k, n) and sp.issparse(out) == T.keeps_sparse
        np.testing.assert_allclose(_dense(out), dense, **tolerance)
    vector = T.apply(X[:, 0])
    assert vector.shape == (k,)
    np.testing.assert_allclose(vector, dense[:, 0], **tolerance)


@pytest.mark.parametrize("name", projectors.names())
@PER_FAMILY
@given(m=st.integers(1, 70), data=st.data(), seed=st.integers(0, 2**63 - 1))
def test_projector_draws_are_a_function_of_the_seed(name, m, data, seed):
    k = data.draw(st.integers(1, m), label="k")
    options = _options(name, k, data)
    first, second = (projectors.make(name, k, m, seed, **options) for _ in range(2))
    assert np.array_equal(first.matrix(), second.matrix())
    X = _input(m, 3, 0.5, seed % 2**32)
    assert np.array_equal(first.apply(X), second.apply(X))
    # a Generator and the same entropy as a list draw the same map (the engine passes Generators)
    third = projectors.make(name, k, m, np.random.default_rng(seed), **options)
    assert np.array_equal(first.matrix(), third.matrix())


# ----- spec expansion ---------------------------------------------------------------------------
PROJECTORS = ["gaussian", "srht", "countsketch", {"name": "sparse-jl", "s": 2}, "achlioptas"]
FAMILIES = [
    {"name": "lp-planted", "sizes": [{"rows": 12, "cols": 24}]},
    {"name": "lp-planted", "sizes": [{"rows": 16, "cols": 32}], "params": {"rank": 4}},
    {"name": "lp-farkas", "sizes": [{"rows": 12, "cols": 24}], "instances": 2},
    {"name": "qp-random", "sizes": [{"vars": 12, "rows": 6}]},
    {"name": "points-gaussian", "sizes": [{"points": 6, "dim": 16}]},
]


def _raw(ks, replicates, projector_idx, family_idx, root_seed) -> dict:
    return {"campaign": {"name": "grow", "root_seed": root_seed, "replicates": replicates},
            "families": [FAMILIES[i] for i in family_idx],
            "sweep": {"projectors": [PROJECTORS[i] for i in projector_idx], "k": sorted(ks)}}


def _trials(raw: dict) -> dict:
    from calib.sweep.expansion import expand
    from calib.sweep.spec import parse_spec

    trials = [trial for _, batch in expand(parse_spec(raw)) for trial in batch]
    table = {trial.trial_id: (trial.instance.instance_id, trial.stream_keys, trial.k, trial.replicate, trial.projector.label)
             for trial in trials}
    assert len(table) == len(trials)  # ids are unique
    return table


def _subset(size: int):
    return st.lists(st.integers(0, size - 1), min_size=1, max_size=size, unique=True)


@FAST
@given(ks=st.lists(st.integers(1, 12), min_size=1, max_size=4, unique=True), replicates=st.integers(1, 3),
       projector_idx=_subset(len(PROJECTORS)), family_idx=_subset(len(FAMILIES)), root_seed=st.integers(0, 2**63 - 1),
       grow=st.fixed_dictionaries({"k": st.integers(1, 12), "replicates": st.integers(0, 2),
                                   "projector": st.integers(0, len(PROJECTORS) - 1), "family": st.integers(0, len(FAMILIES) - 1)}))
def test_growing_a_grid_keeps_every_trial_id_and_its_stream(ks, replicates, projector_idx, family_idx, root_seed, grow):
    base = _trials(_raw(ks, replicates, projector_idx, family_idx, root_seed))
    grown_raw = _raw(sorted(set(ks) | {grow["k"]}), replicates + grow["replicates"],
                     projector_idx + [grow["projector"]] * (grow["projector"] not in projector_idx),
                     family_idx + [grow["family"]] * (grow["family"] not in family_idx), root_seed)
    grown = _trials(grown_raw)
    assert set(base) <= set(grown)
    assert all(grown[trial_id] == identity for trial_id, identity in base.items())


@FAST
@given(root_seed=st.integers(0, 2**63 - 2))
def test_another_root_seed_gives_other_ids_and_streams(root_seed):
    raw = _raw([3, 6], 2, [0, 1], [0, 3], root_seed)
    first, second = _trials(raw), _trials({**raw, "campaign": {**raw["campaign"], "root_seed": root_seed + 1}})
    assert not set(first) & set(second)
    assert {tuple(identity[1][:-1]) for identity in first.values()} == {tuple(identity[1][:-1]) for identity in second.values()}


def test_grown_campaign_reproduces_the_metrics_of_every_shared_trial(tmp_path):
    from calib.sweep.rerun import TIMING_FIELDS
    from calib.sweep.runner import run_campaign
    from calib.sweep.spec import parse_spec

    def run(raw: dict, folder: str) -> dict:
        summary = run_campaign(parse_spec(raw), tmp_path / folder, inline=True)
        connection = __import__("sqlite3").connect(summary.store_path)
        try:
            rows = connection.execute("SELECT trial_id, retrieval, status, metrics FROM trials").fetchall()
        finally:
            connection.close()
        return {(trial, retrieval): (status, {key: value for key, value in json.loads(metrics).items() if key not in TIMING_FIELDS})
                for trial, retrieval, status, metrics in rows}

    small = run(_raw([3, 6], 2, [0], [0, 3], 77), "small")
    grown = run(_raw([3, 4, 6], 3, [0, 1], [0, 3, 4], 77), "grown")
    assert len(small) == 2 * 2 * 2 and len(grown) == 3 * 3 * 2 * 3
    assert all(grown[key] == value for key, value in small.items())
    assert all(status == "ok" for status, _ in grown.values())
