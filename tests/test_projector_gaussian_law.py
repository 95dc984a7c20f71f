"""The Gaussian sketch's distortion law."""

import numpy as np
from scipy import stats

from calib import projectors


def test_gaussian_squared_norm_follows_chi_square():
    # With T_ij ~ N(0, 1/k) iid, the k entries of sqrt(k) T x / ||x|| are independent standard normals,
    # so k ||Tx||^2 / ||x||^2 ~ chi^2_k: the chi-square law of a sum of k squared standard normals (a fact
    # of the Gaussian distribution, the starting point of Dasgupta & Gupta 2003).
    # Reference: scipy.stats.chi2. Fixed seeds; KS test at level 0.01.
    k, m, draws = 12, 40, 1500
    x = np.random.default_rng(0).standard_normal(m)
    samples = np.array([k * np.sum(projectors.make("gaussian", k, m, seed=[seed, 99]).apply(x) ** 2) / (x @ x)
                        for seed in range(draws)])
    assert stats.kstest(samples, stats.chi2(k).cdf).pvalue > 0.01
    # E[T^T T] = I implies E ||Tx||^2 = ||x||^2; the sample mean of chi^2_k / k has sd sqrt(2/(k*draws)).
    assert abs(samples.mean() / k - 1.0) < 4 * np.sqrt(2.0 / (k * draws))


def test_dense_and_sparse_inputs_give_the_same_product():
    import scipy.sparse as sp

    A = sp.random_array((30, 7), density=0.2, rng=np.random.default_rng(1), format="csr")
    T = projectors.make("gaussian", 5, 30, seed=4)
    assert np.allclose(T.apply(A), T.matrix() @ A.toarray())
    assert np.allclose(T.apply(A.toarray()), T.matrix() @ A.toarray())
