"""Mixed-precision pool predictions (labelq.gp.posterior.latent_moments, precision="mixed").

The pool path forms the latent variance product in single precision. These tests bound what that
changes against the double-precision path on data from scikit-learn (bundled breast cancer and
its make_classification generator) and check the double-precision refinement of rows whose
variance would otherwise lose most of its digits.
"""
import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, make_classification

from labelq.acquire.scores import priority
from labelq.gp import GPClassifier
from labelq.gp import posterior as gp_posterior


def _breast_cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X[::2], y[::2], X[1::2]


def _synthetic():
    X, y = make_classification(n_samples=4400, n_features=12, n_informative=6, random_state=3)
    return X[:400], y[:400], X[400:]


@pytest.mark.parametrize("data", [_breast_cancer, _synthetic], ids=["breast-cancer", "synthetic"])
def test_mixed_precision_stays_close_to_double(data):
    # Source: IEEE 754 single precision (unit roundoff 2^-24) gives an absolute variance error of
    # order 1e-6 of the prior variance; the bounds below are ten times what we measured
    # (2e-5 in probability, 2e-3 relative in variance), not a published figure.
    X, y, pool = data()
    model = GPClassifier(random_state=0).fit(X, y)
    exact = model.predict_pool(pool, precision="double")
    mixed = model.predict_pool(pool, precision="mixed")
    np.testing.assert_array_equal(mixed.mean, exact.mean)  # the mean is always double
    np.testing.assert_allclose(mixed.var, exact.var, rtol=2e-2)
    assert np.abs(mixed.proba - exact.proba).max() < 2e-4
    for strategy in ("entropy", "margin", "bald"):
        a = priority(strategy, exact.proba, exact.mean, exact.var, "logistic")
        b = priority(strategy, mixed.proba, mixed.mean, mixed.var, "logistic")
        top_a = set(np.argsort(-a, kind="stable")[:20])
        top_b = set(np.argsort(-b, kind="stable")[:20])
        assert len(top_a & top_b) >= 19, strategy


def test_double_path_agrees_with_latent():
    # Source: definition; predict_pool(precision="double") is the latent() computation by chunks.
    X, y, pool = _breast_cancer()
    model = GPClassifier(random_state=0, optimize=False, lengthscale=5.0).fit(X, y)
    mean, var = model.latent(pool)
    pred = model.predict_pool(pool, chunk_size=37, precision="double")
    np.testing.assert_allclose(pred.mean, mean, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(pred.var, var, rtol=1e-12, atol=1e-15)


def test_rows_at_risk_are_refined_in_double(monkeypatch):
    # Source: common practice (no published source): where single precision might leave no
    # correct digit, the row is recomputed in double precision. A huge signal variance with
    # random labels (the mode stays near 0, so W is near 1/4) and test points at the training
    # inputs gives variances of order 1/W against a prior variance of 1e6.
    rng = np.random.default_rng(0)
    X = rng.normal(size=(60, 2))
    y = rng.integers(0, 2, size=60)
    model = GPClassifier(optimize=False, lengthscale=3.0, signal_variance=1e6,
                         standardize=False).fit(X, y)
    exact = model.predict_pool(X, precision="double")
    assert np.median(exact.var) < 1e-5 * 1e6
    mixed = model.predict_pool(X, precision="mixed")
    np.testing.assert_allclose(mixed.var, exact.var, rtol=2e-2)
    monkeypatch.setattr(gp_posterior, "MIXED_REFINE", np.inf)  # refinement off: digits are lost
    unrefined = model.predict_pool(X, precision="mixed")
    assert np.abs(unrefined.var / exact.var - 1.0).max() > 2e-2


def test_unknown_precision_is_a_value_error():
    X, y, pool = _breast_cancer()
    model = GPClassifier(optimize=False, lengthscale=5.0).fit(X, y)
    with pytest.raises(ValueError, match="precision"):
        model.predict_pool(pool[:3], precision="half")


def _wine():
    # scikit-learn's bundled wine data: three classes
    from sklearn.datasets import load_wine

    X, y = load_wine(return_X_y=True)
    return X[::2], y[::2], X[1::2]


def _three_classes():
    X, y = make_classification(n_samples=4400, n_features=10, n_informative=6, n_classes=3,
                               random_state=5)
    return X[:500], y[:500], X[500:]


@pytest.mark.parametrize("data", [_wine, _three_classes], ids=["wine", "three-classes"])
def test_multi_class_variances_through_the_class_factors(data):
    # Source: GPML Alg. 3.4 line 9 (diagonal), k** - k^T P_c k formed by one GEMM per class as
    # before the class factors (the reference here): the triangular form in double precision
    # equals it to rounding, and the mixed path stays within the binary path's measured bounds
    # (not a published figure; see test_mixed_precision_stays_close_to_double).
    from dataclasses import replace

    X, y, pool = data()
    model = GPClassifier(random_state=0).fit(X, y)
    post = model.posterior_
    assert post.class_factors is not None
    Xs = model._transform(pool)
    Ks, kss = model.kernel_(Xs, model._Xs), model.kernel_.diag(Xs)
    ref_mean, ref_var = gp_posterior.latent_moments(replace(post, class_factors=None), Ks, kss)
    mean, var = gp_posterior.latent_moments(post, Ks, kss, "double")
    np.testing.assert_array_equal(mean, ref_mean)
    np.testing.assert_allclose(var, ref_var, rtol=1e-9, atol=1e-12 * kss.max())
    mixed = model.predict_pool(pool, precision="mixed")
    np.testing.assert_allclose(mixed.var, ref_var, rtol=2e-2)
    exact = model._proba_from_latent(ref_mean, ref_var)
    assert np.abs(mixed.proba - exact).max() < 2e-4
