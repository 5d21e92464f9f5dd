"""Covariance functions (labelq.gp.kernels)."""
import numpy as np
import pytest
from sklearn.gaussian_process.kernels import RBF, ConstantKernel, Matern

from labelq.gp.kernels import make_kernel

RNG = np.random.default_rng(0)
X = RNG.normal(size=(25, 3))
Z = RNG.normal(size=(7, 3))
LS = np.array([0.7, 1.3, 2.0])


@pytest.mark.parametrize("name,reference", [
    ("se", lambda: ConstantKernel(1.7) * RBF(LS)),
    ("matern52", lambda: ConstantKernel(1.7) * Matern(LS, nu=2.5)),
])
def test_values_match_scikit_learn(name, reference):
    # Source: scikit-learn's RBF and Matern(nu=2.5) kernels (GPML eq. 4.9 / 4.17), ARD form.
    ours = make_kernel(name, LS, 1.7)
    np.testing.assert_allclose(ours(X, Z), reference()(X, Z), rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(ours(X), reference()(X), rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(ours.diag(X), 1.7)


@pytest.mark.parametrize("name", ["se", "matern52"])
@pytest.mark.parametrize("ls", [LS, np.array([1.1])], ids=["ard", "shared"])
def test_gradient_contractions_match_finite_differences(name, ls):
    # Source: central finite differences of sum(G * K(theta)) in each log hyperparameter
    # (common practice, no published source).
    G = RNG.normal(size=(25, 25))
    G = G + G.T
    k = make_kernel(name, ls, 1.7)
    got = k.gradient_contractions(X, k(X), G)
    h = 1e-6
    for j in range(len(k.theta)):
        e = np.zeros(len(k.theta))
        e[j] = h
        fd = ((k.with_theta(k.theta + e)(X) - k.with_theta(k.theta - e)(X)) * G).sum() / (2 * h)
        assert got[j] == pytest.approx(fd, rel=1e-6, abs=1e-8)


def test_bad_hyperparameters_and_names():
    # Source: labelq contract (ValueError naming the bad value).
    with pytest.raises(ValueError, match="lengthscale"):
        make_kernel("se", [-1.0], 1.0)
    with pytest.raises(ValueError, match="signal_variance"):
        make_kernel("se", [1.0], 0.0)
    with pytest.raises(ValueError, match="rq"):
        make_kernel("rq", [1.0], 1.0)


@pytest.mark.parametrize("name", ["se", "matern52"])
@pytest.mark.parametrize("ls", [LS, np.array([1.1])], ids=["ard", "shared"])
def test_structured_contractions_equal_the_explicit_ones(name, ls):
    # Source: algebra (G = sum_r c_r v_r v_r^T + m diag(s) M diag(s) written out explicitly).
    k = make_kernel(name, ls, 1.7)
    K = k(X)
    v, u, s = RNG.normal(size=(3, 25))
    M = RNG.normal(size=(25, 25))
    M = M + M.T
    G = 0.5 * np.outer(v, v) - 0.25 * np.outer(u, u) - 0.5 * s[:, None] * M * s[None, :]
    got = k.structured_gradient_contractions(X, K, [(0.5, v), (-0.25, u)], s, np.tril(M), -0.5)
    np.testing.assert_allclose(got, k.gradient_contractions(X, K, G), rtol=1e-10, atol=1e-10)


@pytest.mark.parametrize("name", ["se", "matern52"])
def test_pool_kernel_with_buffer_matches_scikit_learn(name):
    # Source: scikit-learn's RBF / Matern(nu=2.5); the pool path (many rows against few, written
    # into a caller's buffer) must give the same matrix.
    pool = RNG.normal(size=(40, 3))
    reference = ConstantKernel(1.7) * (RBF(LS) if name == "se" else Matern(LS, nu=2.5))
    k = make_kernel(name, LS, 1.7)
    out = np.empty((40, 7))
    got = k(pool, Z, out=out)
    np.testing.assert_allclose(got, reference(pool, Z), rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(out, reference(pool, Z), rtol=1e-12, atol=1e-14)


def test_inverse_lower_is_the_lower_triangle_of_the_inverse():
    # Source: numpy.linalg.inv as the reference (tests only); B = I + S K S as in GPML eq. 3.26.
    from labelq.gp.posterior import b_matrix, inverse_lower, robust_cholesky

    s = np.abs(RNG.normal(size=25))
    B = b_matrix(make_kernel("se", LS, 1.7)(X), s)
    L, _ = robust_cholesky(B)
    lower, diagonal = inverse_lower(L)
    reference = np.linalg.inv(B)
    np.testing.assert_allclose(lower, np.tril(reference), rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(diagonal, np.diag(reference), rtol=1e-10)
