"""Averaged class probabilities (labelq.gp.predictive_probability)."""
import numpy as np
import pytest
from scipy import integrate
from scipy.special import expit, ndtr

from labelq.gp import predictive_probability


def _quad_average(link, m, v):
    """Reference: scipy.integrate.quad of link(f) N(f; m, v)."""
    s = np.sqrt(v)
    dens = lambda f: np.exp(-0.5 * ((f - m) / s) ** 2) / (s * np.sqrt(2 * np.pi))
    return integrate.quad(lambda f: link(f) * dens(f), m - 40 * s, m + 40 * s,
                          points=[m, 0.0] if abs(m) < 40 * s else [m],
                          limit=500, epsabs=1e-13, epsrel=1e-12)[0]


MEANS = [-6.0, -1.0, 0.0, 0.4, 3.0, 12.0]
VARS = [1e-6, 0.2, 1.0, 1.5, 9.0, 400.0]


@pytest.mark.parametrize("link,fun", [("logistic", expit), ("probit", ndtr)])
def test_against_quadrature(link, fun):
    # Source: scipy.integrate.quad of link * Gaussian density, tolerance 1e-6 (the brief).
    m, v = np.meshgrid(MEANS, VARS)
    got = predictive_probability(m.ravel(), v.ravel(), link)
    ref = [_quad_average(fun, a, b) for a, b in zip(m.ravel(), v.ravel())]
    np.testing.assert_allclose(got, ref, atol=1e-6)


def test_probit_closed_form_check_value():
    # Source: GPML eq. 3.82, Phi(1 / sqrt 2) = 0.760250 (value from memory, also by quad above).
    assert predictive_probability(np.array([1.0]), np.array([1.0]), "probit")[0] == \
        pytest.approx(0.760250, abs=1e-6)


def test_zero_variance_is_the_link():
    # Source: N(m, 0) is a point mass (definition).
    m = np.array([-2.0, 0.5])
    np.testing.assert_allclose(predictive_probability(m, np.zeros(2), "logistic"), expit(m),
                               rtol=1e-12)


def test_softmax_two_classes_matches_logistic_of_difference():
    # Source: softmax(f1, f2)_1 = sigma(f1 - f2) and f1 - f2 ~ N(m1 - m2, v1 + v2) (algebra);
    # the logistic average is itself checked against scipy quad above. Error bound 1e-3 (brief).
    rng = np.random.default_rng(3)
    mean = rng.normal(scale=3.0, size=(200, 2))
    var = rng.uniform(0.0, 9.0, size=(200, 2))
    got = predictive_probability(mean, var, "softmax")
    ref = predictive_probability(mean[:, 0] - mean[:, 1], var.sum(1), "logistic")
    np.testing.assert_allclose(got[:, 0], ref, atol=1e-3)
    np.testing.assert_allclose(got.sum(1), 1.0, atol=1e-12)


def test_softmax_three_classes_against_tensor_gauss_hermite():
    # Source: 3-D tensor-product Gauss-Hermite quadrature (numpy.polynomial.hermite.hermgauss,
    # 60 nodes per axis) of softmax times the product Gaussian density; error bound 1e-3 (brief).
    mean = np.array([[0.5, -0.3, 1.0], [2.0, -1.0, 0.0]])
    var = np.array([[0.8, 1.5, 0.4], [3.0, 0.1, 2.0]])
    t, w = np.polynomial.hermite.hermgauss(60)
    t, w = t * np.sqrt(2.0), w / np.sqrt(np.pi)
    grid = np.stack(np.meshgrid(t, t, t, indexing="ij"), axis=-1).reshape(-1, 3)
    weight = np.einsum("i,j,k->ijk", w, w, w).ravel()
    for m, v in zip(mean, var):
        f = m + np.sqrt(v) * grid
        p = np.exp(f - f.max(1, keepdims=True))
        ref = weight @ (p / p.sum(1, keepdims=True))
        got = predictive_probability(m[None], v[None], "softmax")[0]
        np.testing.assert_allclose(got, ref, atol=1e-3)


def test_invalid_inputs():
    # Source: labelq contract (ValueError naming the problem).
    with pytest.raises(ValueError, match="shape"):
        predictive_probability(np.zeros(3), np.zeros(4), "probit")
    with pytest.raises(ValueError, match="NaN"):
        predictive_probability(np.array([np.nan]), np.ones(1), "probit")
    with pytest.raises(ValueError, match=">= 0"):
        predictive_probability(np.zeros(1), -np.ones(1), "probit")
    with pytest.raises(ValueError, match="tanh"):
        predictive_probability(np.zeros(1), np.ones(1), "tanh")
    with pytest.raises(ValueError, match="softmax"):
        predictive_probability(np.zeros(3), np.ones(3), "softmax")
