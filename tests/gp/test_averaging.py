"""GridAverage: the Bayesian model average over a hyperparameter grid (GPML sec. 5.2).

Reference values: scikit-learn's GaussianProcessClassifier (binary Laplace with the logistic link,
GPML Alg. 3.1-3.2) gives the log marginal likelihood of each grid point with the kernel fixed;
the posterior weights of a flat grid prior are then exp(lml_k) / sum_j exp(lml_j) (GPML eq. 5.7).
Data: scikit-learn's bundled breast-cancer and iris data.
"""

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_iris
from sklearn.gaussian_process import GaussianProcessClassifier
from sklearn.gaussian_process.kernels import RBF, ConstantKernel

from labelq.gp import GPClassifier, GridAverage, load_model

LENGTHSCALES = (2.0, 4.0, 8.0)
VARIANCES = (1.0, 4.0, 16.0)


def _standardised(data, rows):
    X, y = data(return_X_y=True)
    X = (X - X.mean(0)) / X.std(0)
    return X, y, X[rows], y[rows]


@pytest.fixture(scope="module")
def cancer():
    rows = np.random.default_rng(3).choice(569, 24, replace=False)
    X, y, Xl, yl = _standardised(load_breast_cancer, rows)
    model = GridAverage(LENGTHSCALES, VARIANCES, min_weight=0.0).fit(Xl, yl)
    return X, Xl, yl, model


def test_weights_follow_the_evidence_of_scikit_learn(cancer):
    """w_k = exp(lml_k) / sum exp(lml_j), lml_k from scikit-learn with the kernel fixed."""
    _, Xl, yl, model = cancer
    lml = np.array([GaussianProcessClassifier(ConstantKernel(s2) * RBF(ls), optimizer=None)
                    .fit(Xl, yl).log_marginal_likelihood_value_
                    for ls in LENGTHSCALES for s2 in VARIANCES])
    expected = np.exp(lml - lml.max())
    expected /= expected.sum()
    np.testing.assert_allclose(model.weights_, expected, atol=1e-3)
    # log of the grid-averaged evidence, log mean_k exp(lml_k)
    assert model.log_marginal_likelihood_ == pytest.approx(
        lml.max() + np.log(np.mean(np.exp(lml - lml.max()))), abs=1e-3)


def test_probabilities_are_the_weighted_mixture(cancer):
    """GPML sec. 5.2: p(y* | D) = sum_k w_k p(y* | D, theta_k), each member an ordinary fit."""
    X, Xl, yl, model = cancer
    mixture = 0.0
    for w, (ls, s2) in zip(model.weights_, model.grid_):
        member = GPClassifier(ard=False, optimize=False, lengthscale=ls, signal_variance=s2,
                              standardize=False).fit(Xl, yl)
        mixture = mixture + w * member.predict_proba(X)
    np.testing.assert_allclose(model.predict_proba(X), mixture, atol=1e-10)
    np.testing.assert_allclose(model.predict_pool(X).proba, mixture, atol=1e-5)  # mixed precision


def test_latent_moments_and_cross_covariance_agree(cancer):
    """The moment-matched variance is the diagonal of the mixture covariance (law of total
    variance: Var f = E[Var f | theta] + Var E[f | theta])."""
    X, _, _, model = cancer
    mean, var = model.latent(X[:40])
    cov = model.latent_cross_cov(X[:40], X[:40])
    np.testing.assert_allclose(np.diag(cov), var, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(cov, cov.T, atol=1e-10)
    assert np.all(np.linalg.eigvalsh(cov) > -1e-8)


def test_json_round_trip_and_dispatch(cancer, tmp_path):
    """to_dict / load_model reproduce the probabilities (no pickle; common practice)."""
    X, _, _, model = cancer
    path = tmp_path / "average.json"
    model.save(path)
    again = load_model(path)
    assert isinstance(again, GridAverage)
    np.testing.assert_allclose(again.predict_proba(X), model.predict_proba(X), atol=1e-12)
    single = GPClassifier(ard=False, optimize=False).fit(X[:20], np.arange(20) % 2)
    assert isinstance(load_model(single.to_dict()), GPClassifier)


def test_small_weights_are_dropped_and_the_rest_renormalised(cancer):
    """Members below min_weight change no probability by more than that weight."""
    X, Xl, yl, full = cancer
    pruned = GridAverage(LENGTHSCALES, VARIANCES, min_weight=0.05).fit(Xl, yl)
    assert len(pruned.members_) < len(full.members_)
    assert pruned.weights_.sum() == pytest.approx(1.0) and pruned.weights_.min() >= 0.05
    dropped = full.weights_[full.weights_ < 0.05].sum()
    assert np.abs(pruned.predict_proba(X) - full.predict_proba(X)).max() <= 2 * dropped + 1e-12


def test_warm_start_reaches_the_same_fit():
    """A warm start (previous modes) changes only the Newton starting point, not the result."""
    rows = np.random.default_rng(0).choice(150, 30, replace=False)
    X, y, Xl, yl = _standardised(load_iris, rows)
    cold = GridAverage(LENGTHSCALES, VARIANCES).fit(Xl, yl, classes=[0, 1, 2])
    warm = GridAverage(LENGTHSCALES, VARIANCES).fit(Xl[:25], yl[:25], classes=[0, 1, 2])
    warm.fit(Xl, yl, classes=[0, 1, 2], warm_start=True)
    np.testing.assert_allclose(warm.weights_, cold.weights_, atol=1e-6)
    np.testing.assert_allclose(warm.predict_proba(X), cold.predict_proba(X), atol=1e-6)


def test_bad_grid():
    with pytest.raises(ValueError, match="positive"):
        GridAverage([1.0, -1.0], [1.0])
    with pytest.raises(ValueError, match="at least one"):
        GridAverage([], [1.0])
