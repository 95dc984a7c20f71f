"""Projector speed and memory, against dense Gaussian T@A, scikit-learn and SciPy (one run, same inputs).

Run with ``pytest tests/benchmarks --benchmark-only`` (``make bench``); skipped in normal runs.
Inputs: dense A of shape (2^14, 512); sparse CSR A of shape (10^5, 10^3) with 10^6 nonzeros;
k in {256, 1024}. scikit-learn projects the rows of X, so it is given X = Aᵀ. Our projectors are
drawn before timing ("apply"); "make+apply" includes the draw, as SciPy's
clarkson_woodruff_transform does. Ratios and the targets are printed at the end of the run.
"""

from __future__ import annotations

import time
import tracemalloc

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.linalg import clarkson_woodruff_transform
from sklearn.random_projection import GaussianRandomProjection, SparseRandomProjection

from calib.projectors import make

FAMILIES = ["gaussian", "achlioptas", "very-sparse", "srht", "sparse-jl", "countsketch"]
SPARSE_FAMILIES = ["very-sparse", "sparse-jl", "countsketch"]
KS = [256, 1024]
#: Rounds per benchmark: more for fast calls, where the best of many filters out a busy machine.
FAST_ROUNDS, SLOW_ROUNDS, SLOW_SECONDS = 15, 3, 0.5


@pytest.fixture(scope="module")
def dense_A() -> np.ndarray:
    return np.random.default_rng(1).standard_normal((2**14, 512))


@pytest.fixture(scope="module")
def sparse_A() -> sp.csr_array:
    return sp.random_array((10**5, 10**3), density=0.01, format="csr", rng=np.random.default_rng(2))


def _inputs(kind: str, dense_A, sparse_A):
    return dense_A if kind == "dense" else sparse_A


def _timed(benchmark, figures, group: str, label: str, function) -> None:
    benchmark.group = group
    benchmark.name = label
    start = time.perf_counter()
    function()  # warm-up, also sizes the number of rounds
    rounds = SLOW_ROUNDS if time.perf_counter() - start > SLOW_SECONDS else FAST_ROUNDS
    benchmark.pedantic(function, rounds=rounds)
    figures[(group, label)] = benchmark.stats.stats.min


@pytest.mark.parametrize("kind", ["dense", "sparse"])
@pytest.mark.parametrize("k", KS)
@pytest.mark.parametrize("name", FAMILIES)
def test_apply(benchmark, figures, dense_A, sparse_A, name, k, kind):
    A = _inputs(kind, dense_A, sparse_A)
    projector = make(name, k, A.shape[0], seed=3)
    _timed(benchmark, figures, f"{kind} k={k}", f"{name} apply", lambda: projector.apply(A))


@pytest.mark.parametrize("kind", ["dense", "sparse"])
@pytest.mark.parametrize("k", KS)
@pytest.mark.parametrize("name", ["countsketch", "srht"])
def test_make_and_apply(benchmark, figures, dense_A, sparse_A, name, k, kind):
    A = _inputs(kind, dense_A, sparse_A)
    _timed(benchmark, figures, f"{kind} k={k}", f"{name} make+apply",
           lambda: make(name, k, A.shape[0], seed=3).apply(A))


@pytest.mark.parametrize("kind", ["dense", "sparse"])
@pytest.mark.parametrize("k", KS)
def test_reference_dense_gaussian(benchmark, figures, dense_A, sparse_A, k, kind):
    A = _inputs(kind, dense_A, sparse_A)
    T = np.random.default_rng(4).standard_normal((k, A.shape[0])) / np.sqrt(k)
    _timed(benchmark, figures, f"{kind} k={k}", "ref dense Gaussian T@A", lambda: T @ A)


@pytest.mark.parametrize("kind", ["dense", "sparse"])
@pytest.mark.parametrize("k", KS)
@pytest.mark.parametrize("label,reference", [
    ("ref sklearn GaussianRandomProjection", lambda k: GaussianRandomProjection(k, random_state=5)),
    ("ref sklearn SparseRandomProjection auto", lambda k: SparseRandomProjection(k, random_state=5)),
    ("ref sklearn SparseRandomProjection 1/3", lambda k: SparseRandomProjection(k, density=1 / 3, random_state=5)),
])
def test_reference_sklearn(benchmark, figures, dense_A, sparse_A, k, kind, label, reference):
    X = _inputs(kind, dense_A, sparse_A).T
    fitted = reference(k).fit(X)
    _timed(benchmark, figures, f"{kind} k={k}", label, lambda: fitted.transform(X))


@pytest.mark.parametrize("kind", ["dense", "sparse"])
@pytest.mark.parametrize("k", KS)
def test_reference_scipy_countsketch(benchmark, figures, dense_A, sparse_A, k, kind):
    A = _inputs(kind, dense_A, sparse_A)
    _timed(benchmark, figures, f"{kind} k={k}", "ref scipy clarkson_woodruff_transform",
           lambda: clarkson_woodruff_transform(A, k, rng=6))


def _peak(function) -> int:
    tracemalloc.start()
    try:
        function()
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


@pytest.mark.parametrize("k", KS)
@pytest.mark.parametrize("name", SPARSE_FAMILIES)
def test_peak_memory_on_sparse_input(benchmark, memory, sparse_A, name, k):
    size = sparse_A.data.nbytes + sparse_A.indices.nbytes + sparse_A.indptr.nbytes
    projector = make(name, k, sparse_A.shape[0], seed=3)
    benchmark.group = "peak memory (one round)"
    benchmark.name = f"{name} k={k}"
    apply_peak = benchmark.pedantic(lambda: _peak(lambda: projector.apply(sparse_A)), rounds=1)
    total_peak = _peak(lambda: make(name, k, sparse_A.shape[0], seed=3).apply(sparse_A))
    memory[(str(k), name)] = (size, apply_peak, total_peak)
    benchmark.extra_info.update(input_bytes=size, apply_peak_bytes=apply_peak, draw_apply_peak_bytes=total_peak)
