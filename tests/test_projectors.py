"""Projector families: exactness against their explicit matrices, E[TᵀT] = I, distortion laws
against reference libraries (scipy.stats, scikit-learn, SciPy's CountSketch), the fast
Walsh–Hadamard transform against scipy.linalg.hadamard, and validation at ``make``.

Statistical checks use fixed seeds and levels chosen before running them (stated beside each).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
import scipy.stats as st
from scipy.linalg import clarkson_woodruff_transform, hadamard
from sklearn.random_projection import SparseRandomProjection

from calib.errors import InputError
from calib.projectors import REGISTRY, check_name, make, names
from calib.projectors import kernels
from calib.projectors import srht as srht_module
from calib.projectors.construct import bernoulli_positions, distinct_rows
from calib.projectors.hadamard import HadamardPlan, next_power_of_two, walsh_hadamard

FAMILIES = ["gaussian", "achlioptas", "very-sparse", "srht", "sparse-jl", "countsketch"]
#: Level of each distribution test (KS, binomial); fixed before the tests were run.
ALPHA = 0.01


def test_registry_lists_every_family():
    assert names() == sorted(FAMILIES)
    assert set(REGISTRY) == set(FAMILIES)
    assert check_name("srht") == "srht"


# ---------------------------------------------------------------- apply == explicit matrix product

def _inputs(m: int, rng: np.random.Generator):
    dense = rng.standard_normal((m, 7))
    sparse = sp.random_array((m, 9), density=0.3, rng=rng, format="csr")
    return dense, sparse


@pytest.mark.parametrize("name", FAMILIES)
@pytest.mark.parametrize("m,k", [(1, 1), (12, 5), (64, 16), (100, 30), (37, 64)])
def test_apply_equals_explicit_product(name, m, k):
    if name == "srht" and k > next_power_of_two(m):
        pytest.skip("srht needs k <= padded m")
    projector = make(name, k, m, seed=11)
    T = projector.matrix()
    assert T.shape == (k, m)
    rng = np.random.default_rng(5)
    dense, sparse = _inputs(m, rng)
    np.testing.assert_allclose(projector.apply(dense), T @ dense, atol=1e-12)
    vector = dense[:, 0]
    assert projector.apply(vector).shape == (k,)
    np.testing.assert_allclose(projector.apply(vector), T @ vector, atol=1e-12)
    for fmt in ("csr", "csc", "coo"):
        out = projector.apply(sparse.asformat(fmt))
        assert out.shape == (k, sparse.shape[1])
        if projector.keeps_sparse:
            assert sp.issparse(out) and out.format == ("csc" if fmt == "csc" else "csr")
            out = out.toarray()
        else:
            assert isinstance(out, np.ndarray)
        np.testing.assert_allclose(out, T @ sparse.toarray(), atol=1e-12)


def test_spmatrix_and_integer_inputs_are_accepted():
    projector = make("countsketch", 4, 10, seed=0)
    X = np.arange(30).reshape(10, 3)
    np.testing.assert_allclose(projector.apply(sp.csr_matrix(X)).toarray(), projector.matrix() @ X)
    np.testing.assert_allclose(projector.apply(X), projector.matrix() @ X)


def test_srht_sparse_input_in_several_column_blocks(monkeypatch):
    # a workspace of 3 dense columns forces the blocked path of a sparse input
    monkeypatch.setattr(srht_module, "SPARSE_BLOCK_BYTES", 3 * 8 * 64)
    projector = make("srht", 20, 50, seed=2)
    X = sp.random_array((50, 11), density=0.2, rng=np.random.default_rng(1), format="csr")
    np.testing.assert_allclose(projector.apply(X), projector.matrix() @ X.toarray(), atol=1e-12)


@pytest.mark.parametrize("name,options", [("countsketch", {}), ("sparse-jl", {"s": 3})])
def test_accumulator_and_scipy_paths_agree_on_csr_input(monkeypatch, name, options):
    # the dense-accumulator kernel (small k·n) in several chunks, and SciPy's product (large k·n)
    X = sp.random_array((300, 5), density=0.2, rng=np.random.default_rng(4), format="csr")
    projector = make(name, 6, 300, seed=9, **options)
    expected = projector.matrix() @ X.toarray()
    assert kernels.accumulator_fits(6, X)
    monkeypatch.setattr(kernels, "CHUNK_NONZEROS", 7)
    out = projector.apply(X)
    assert out.format == "csr" and out.has_canonical_format
    np.testing.assert_allclose(out.toarray(), expected, atol=1e-12)
    monkeypatch.setattr(kernels, "accumulator_fits", lambda k, X: False)
    np.testing.assert_allclose(projector.apply(X).toarray(), expected, atol=1e-12)


def test_dense_input_paths_agree(monkeypatch):
    # SciPy's sparse-dense product (sparse T) and BLAS on expanded blocks of rows (dense T)
    X = np.random.default_rng(6).standard_normal((400, 5))
    sparse_T = make("very-sparse", 12, 400, seed=1, density=0.01)
    np.testing.assert_allclose(sparse_T.apply(X), sparse_T.matrix() @ X, atol=1e-12)
    monkeypatch.setattr(kernels, "BLOCK_BYTES", 3 * 8 * 400)  # three rows of T per block
    dense_T = make("achlioptas", 12, 400, seed=1)
    np.testing.assert_allclose(dense_T.apply(X), dense_T.matrix() @ X, atol=1e-12)
    monkeypatch.setattr(kernels, "BLAS_DENSITY", 0.0)
    np.testing.assert_allclose(sparse_T.apply(X), sparse_T.matrix() @ X, atol=1e-12)


def test_dense_to_csr_keeps_exactly_the_nonzeros():
    dense = np.random.default_rng(0).standard_normal((300, 7)) * (np.random.default_rng(1).random((300, 7)) < 0.3)
    out = kernels.dense_to_csr(dense, block_rows=16)
    assert out.nnz == np.count_nonzero(dense) and out.has_canonical_format
    np.testing.assert_array_equal(out.toarray(), dense)


def test_wrong_row_count_is_refused():
    with pytest.raises(ValueError, match="expects 8 rows"):
        make("gaussian", 3, 8, seed=0).apply(np.ones((7, 2)))


# ---------------------------------------------------------------- seeds, timing, structure

@pytest.mark.parametrize("name", FAMILIES)
def test_same_seed_same_matrix(name):
    np.testing.assert_array_equal(make(name, 6, 40, seed=7).matrix(), make(name, 6, 40, seed=7).matrix())
    np.testing.assert_array_equal(make(name, 6, 40, seed=[3, 1]).matrix(),
                                  make(name, 6, 40, seed=np.random.default_rng([3, 1])).matrix())
    assert not np.array_equal(make(name, 6, 40, seed=7).matrix(), make(name, 6, 40, seed=8).matrix())


@pytest.mark.parametrize("name", FAMILIES)
def test_draw_and_apply_times_are_recorded(name):
    projector = make(name, 8, 50, seed=1)
    assert projector.draw_seconds > 0 and projector.apply_seconds == 0
    projector.apply(np.ones((50, 2)))
    assert projector.apply_seconds > 0


def test_entry_values_of_each_family():
    k, m = 9, 400
    # Achlioptas 2003: sqrt(3/k)·{+1, 0, -1}
    values = np.unique(make("achlioptas", k, m, seed=0).matrix())
    np.testing.assert_allclose(values, [-np.sqrt(3 / k), 0.0, np.sqrt(3 / k)])
    # Li, Hastie & Church 2006: ±sqrt(1/(k·density))
    values = np.unique(make("very-sparse", k, m, seed=0, density=0.05).matrix())
    np.testing.assert_allclose(values, [-np.sqrt(20 / k), 0.0, np.sqrt(20 / k)])
    # sparse JL: exactly s entries ±1/sqrt(s) per column; CountSketch: one ±1 per column
    T = make("sparse-jl", k, m, seed=0, s=3).matrix()
    assert (np.count_nonzero(T, axis=0) == 3).all()
    np.testing.assert_allclose(np.abs(T[T != 0]), 1 / np.sqrt(3))
    T = make("countsketch", k, m, seed=0).matrix()
    assert (np.count_nonzero(T, axis=0) == 1).all() and set(np.unique(T)) == {-1.0, 0.0, 1.0}
    # SRHT: every entry ±1/sqrt(k) (sqrt(m'/k) times the normalised Hadamard ±1/sqrt(m'))
    projector = make("srht", k, 300, seed=0)
    np.testing.assert_allclose(np.abs(projector.matrix()), 1 / np.sqrt(k))
    assert len(set(projector.rows.tolist())) == k and projector.rows.max() < 512


def test_countsketch_output_never_holds_more_than_the_input_nonzeros():
    X = sp.random_array((5000, 40), density=0.01, rng=np.random.default_rng(3), format="csr")
    for fmt in ("csr", "csc"):
        out = make("countsketch", 200, 5000, seed=4).apply(X.asformat(fmt))
        assert out.nnz <= X.nnz


def test_bernoulli_positions_are_iid_bernoulli():
    # count of successes among 10^6 trials ~ Binomial(10^6, 0.01): exact two-sided binomial test
    positions = bernoulli_positions(10**6, 0.01, np.random.default_rng(0))
    assert np.all(np.diff(positions) > 0) and positions[-1] < 10**6
    assert st.binomtest(positions.size, 10**6, 0.01).pvalue > ALPHA
    # each of 10 equal blocks gets a multinomial share: chi-square goodness of fit (scipy.stats)
    counts = np.bincount(positions // 10**5, minlength=10)
    assert st.chisquare(counts).pvalue > ALPHA


def test_distinct_rows_are_uniform_subsets():
    # Floyd's sampler: all C(6, 2) = 15 subsets equally likely, chi-square goodness of fit
    rows = np.sort(distinct_rows(6, 30000, 2, np.random.default_rng(0)), axis=1)
    assert (rows[:, 0] < rows[:, 1]).all()
    _, counts = np.unique(rows[:, 0] * 6 + rows[:, 1], return_counts=True)
    assert counts.size == 15 and st.chisquare(counts).pvalue > ALPHA


# ---------------------------------------------------------------- E[TᵀT] = I (CLT bound)

def _entry_variance(name: str, k: int, m: int, options: dict) -> tuple[float, float]:
    """Variance of a diagonal and of an off-diagonal entry of TᵀT (derivations in the comments)."""
    if name == "gaussian":
        # T_ri ~ N(0, 1/k): diag = sum of k terms with Var(T²) = 2/k²; off-diag k terms of Var 1/k²
        return 2.0 / k, 1.0 / k
    if name in ("achlioptas", "very-sparse"):
        # T_ri = ±c w.p. d, c² = 1/(kd): Var(T²) = c⁴ d(1-d); off-diag E[(T_ri T_rj)²] = (c² d)² = 1/k²
        d = 1.0 / 3.0 if name == "achlioptas" else options.get("density", 1.0 / np.sqrt(m))
        return (1.0 - d) / (k * d), 1.0 / k
    if name in ("sparse-jl", "countsketch"):
        # columns have norm 1 exactly; off-diag = (1/s)·(sum of |S_i ∩ S_j| independent signs), and
        # E|S_i ∩ S_j| = s²/k for independent uniform s-subsets, so Var = (s²/k)/s² = 1/k
        return 0.0, 1.0 / k
    # SRHT: diag = 1 exactly; off-diag = (1/k)·d_i d_j·(sum over k rows drawn without replacement
    # from m' values ±1 of zero mean): Var = k(m'-k)/(m'-1) / k² (finite-population correction)
    padded = next_power_of_two(m)
    return 0.0, (padded - k) / (k * (padded - 1))


@pytest.mark.parametrize("name,options", [
    ("gaussian", {}), ("achlioptas", {}), ("very-sparse", {}), ("very-sparse", {"density": 0.1}),
    ("srht", {}), ("sparse-jl", {"s": 3}), ("countsketch", {}),
])
def test_mean_of_TtT_is_identity_within_clt_bound(name, options):
    k, m, draws = 6, 12, 3000
    mean = np.zeros((m, m))
    for draw in range(draws):
        T = make(name, k, m, seed=[2024, draw], **options).matrix()
        mean += T.T @ T / draws
    var_diag, var_off = _entry_variance(name, k, m, options)
    # CLT: each entry of the mean is ~ normal with variance var/draws. Bonferroni over the
    # m(m+1)/2 distinct entries at family-wise level ALPHA gives the z bound (about 4.5 sigma).
    z = st.norm.isf(ALPHA / (m * (m + 1)))
    diag, off = np.diag(mean), mean[np.triu_indices(m, 1)]
    if var_diag == 0.0:
        np.testing.assert_allclose(diag, 1.0, atol=1e-12)
    else:
        assert np.max(np.abs(diag - 1.0)) <= z * np.sqrt(var_diag / draws)
        # the m diagonal entries are independent for i.i.d. entries: their average checks the
        # scale to within a two-sided normal bound at level ALPHA
        assert abs(diag.mean() - 1.0) <= st.norm.isf(ALPHA / 2) * np.sqrt(var_diag / (draws * m))
    assert np.max(np.abs(off)) <= z * np.sqrt(var_off / draws)
    np.testing.assert_allclose(mean, mean.T, atol=1e-12)


# ---------------------------------------------------------------- fast Walsh–Hadamard transform

def test_walsh_hadamard_equals_scipy_hadamard_for_every_m_up_to_1024():
    # scipy.linalg.hadamard is the Sylvester construction; m not a power of two is zero-padded
    rng = np.random.default_rng(0)
    sylvester = {2**p: hadamard(2**p) / np.sqrt(2**p) for p in range(11)}
    for m in range(1, 2**10 + 1):
        X = rng.standard_normal((m, 2))
        expected = sylvester[next_power_of_two(m)][:, :m] @ X
        np.testing.assert_allclose(walsh_hadamard(X), expected, atol=1e-10, err_msg=f"m={m}")
    np.testing.assert_allclose(walsh_hadamard(X[:, 0]), expected[:, 0], atol=1e-10)


@pytest.mark.parametrize("full_bits,last_bits", [(1, 1), (2, 3), (3, 2), (3, 11)])
@pytest.mark.parametrize("m", [1, 2, 5, 16, 33, 64, 200, 1024])
@pytest.mark.parametrize("sampled", [1, 7, None])
def test_hadamard_plan_with_row_sample_equals_scipy_hadamard(m, full_bits, last_bits, sampled):
    # every digit schedule (many small digits, one large) gives (H·diag(w)·[X; 0])[rows]
    rng = np.random.default_rng(m + 10 * full_bits + last_bits)
    size = next_power_of_two(m)
    rows = None if sampled is None else rng.choice(size, min(size, sampled), replace=False)
    weights = rng.standard_normal(m)
    X = rng.standard_normal((m, 4))
    plan = HadamardPlan(weights, rows, full_bits, last_bits)
    assert sorted(plan.rows.tolist()) == (list(range(size)) if rows is None else sorted(rows.tolist()))
    expected = (hadamard(size)[:, :m] * weights) @ X
    np.testing.assert_allclose(plan.apply(X), expected[plan.rows], atol=1e-10)


# ---------------------------------------------------------------- distortion laws

def _distortions(name: str, k: int, x: np.ndarray, seeds: range, **options) -> np.ndarray:
    return np.array([np.sum(make(name, k, x.size, seed=seed, **options).apply(x) ** 2) for seed in seeds]) \
        / np.sum(x**2)


def _test_vectors(m: int) -> list[np.ndarray]:
    """A dense vector (the whole law) and e_0 + e_1, on which the sparse laws are discrete and
    differ visibly from each other and from the Gaussian one (this is what gives the tests power)."""
    pair = np.zeros(m)
    pair[:2] = 1.0
    return [np.random.default_rng(m).standard_normal(m), pair]


def test_gaussian_distortion_is_chi_square():
    # Dasgupta & Gupta 2003: k·|Tx|²/|x|² ~ chi2_k; KS test against scipy.stats.chi2 at level ALPHA
    k = 10
    for x in _test_vectors(40):
        sample = k * _distortions("gaussian", k, x, range(1500))
        assert st.kstest(sample, st.chi2(k).cdf).pvalue > ALPHA


def _sklearn_distortions(k: int, x: np.ndarray, density, seeds: range) -> np.ndarray:
    out = []
    for seed in seeds:
        reference = SparseRandomProjection(n_components=k, density=density, random_state=seed)
        out.append(np.sum(reference.fit_transform(x[None, :]) ** 2))
    return np.array(out) / np.sum(x**2)


@pytest.mark.parametrize("name,density", [
    ("achlioptas", 1.0 / 3.0),
    ("very-sparse", "auto"),  # both default to 1/sqrt(m) (scikit-learn's 'auto' density)
])
def test_sparse_sign_distortion_matches_scikit_learn(name, density):
    # scikit-learn's SparseRandomProjection draws the same law (±sqrt(1/(density·k)) w.p. density/2).
    # Two-sample KS test (scipy.stats.ks_2samp; conservative on the discrete law) at level ALPHA.
    k, m = 8, 64
    for x in _test_vectors(m):
        ours = _distortions(name, k, x, range(1000))
        theirs = _sklearn_distortions(k, x, density, range(1000))
        assert st.ks_2samp(ours, theirs).pvalue > ALPHA


def test_countsketch_distortion_matches_scipy_clarkson_woodruff():
    # SciPy's clarkson_woodruff_transform is CountSketch; same law of |Sx|²/|x|². KS at level ALPHA.
    k, m = 8, 60
    for x in _test_vectors(m):
        ours = _distortions("countsketch", k, x, range(1500))
        theirs = np.array([np.sum(clarkson_woodruff_transform(x[:, None], k, rng=seed) ** 2)
                           for seed in range(1500)]) / np.sum(x**2)
        assert st.ks_2samp(ours, theirs).pvalue > ALPHA


# ---------------------------------------------------------------- validation at make()

@pytest.mark.parametrize("call,field", [
    (lambda: make("nope", 4, 10, seed=0), "projector"),
    (lambda: make("gaussian", 0, 10, seed=0), "k"),
    (lambda: make("gaussian", -3, 10, seed=0), "k"),
    (lambda: make("gaussian", 2.5, 10, seed=0), "k"),
    (lambda: make("gaussian", True, 10, seed=0), "k"),
    (lambda: make("gaussian", 4, 0, seed=0), "m"),
    (lambda: make("srht", 17, 10, seed=0), "k"),
    (lambda: make("sparse-jl", 4, 10, seed=0, s=0), "projector sparse-jl: s"),
    (lambda: make("sparse-jl", 4, 10, seed=0, s=5), "projector sparse-jl: s"),
    (lambda: make("sparse-jl", 4, 10, seed=0, s=1.5), "projector sparse-jl: s"),
    (lambda: make("very-sparse", 4, 10, seed=0, density=0.0), "projector very-sparse: density"),
    (lambda: make("very-sparse", 4, 10, seed=0, density=1.5), "projector very-sparse: density"),
    (lambda: make("very-sparse", 4, 10, seed=0, density="dense"), "projector very-sparse: density"),
    (lambda: make("countsketch", 4, 10, seed=0, s=2), "projector countsketch"),
    (lambda: make("gaussian", 4, 10, seed=0, density=0.5), "projector gaussian"),
])
def test_bad_parameters_raise_input_error(call, field):
    with pytest.raises(InputError) as error:
        call()
    assert error.value.where == field
    assert "\n" not in str(error.value)


def test_boundary_parameters_are_accepted():
    assert make("srht", 16, 10, seed=0).matrix().shape == (16, 10)  # k = m' is a full permutation
    assert make("sparse-jl", 4, 10, seed=0, s=4).nnz == 40
    assert make("sparse-jl", 3, 10, seed=0).options == {"s": 3}  # default s = min(8, k)
    assert make("very-sparse", 4, 10, seed=0, density=1).nnz == 40
