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
