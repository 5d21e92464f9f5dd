"""The public estimator (labelq.gp.GPClassifier) and its contract in DEVELOPERS.md."""
import numpy as np
import pytest

from labelq.gp import GPClassifier, Prediction


def _binary(n=40, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 2)) * [1.0, 50.0] + [0.0, 100.0]
    y = np.where(X[:, 0] + 0.3 * rng.normal(size=n) > 0, "ripe", "unripe")
    return X, y


def _three(n=45, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 2))
    y = np.array(["a", "b", "c"])[(X[:, 0] > 0).astype(int) + (X[:, 1] > 0.5)]
    return X, y


FAST = dict(max_optimizer_iter=30)


def test_binary_api_shapes_and_order():
    # Source: labelq contract (DEVELOPERS.md); probabilities sum to one (definition).
    X, y = _binary()
    clf = GPClassifier(**FAST).fit(X, y)
    assert list(clf.classes_) == ["ripe", "unripe"]
    proba = clf.predict_proba(X[:5])
    assert proba.shape == (5, 2)
    np.testing.assert_allclose(proba.sum(1), 1.0)
    mean, var = clf.latent(X[:5])
    assert mean.shape == var.shape == (5,)
    assert np.all(var > 0)
    assert set(clf.predict(X)) <= {"ripe", "unripe"}
    assert (clf.predict(X) == y).mean() > 0.85  # common practice: easy separable-ish problem
    assert isinstance(clf.hyperparameters_, dict) and len(clf.hyperparameters_["lengthscale"]) == 2
    assert np.isfinite(clf.log_marginal_likelihood_) and clf.n_iter_ >= 1
    assert all(isinstance(w, str) and "\n" not in w for w in clf.fit_warnings_)


def test_standardize_makes_feature_scale_irrelevant():
    # Source: standardisation is an affine change of each feature, so with standardize=True a
    # rescaled copy of the data gives the same model (common practice, no published source).
    X, y = _binary()
    a = GPClassifier(optimize=False).fit(X, y)
    b = GPClassifier(optimize=False).fit(X * [3.0, 0.01] + 7.0, y)
    np.testing.assert_allclose(a.predict_proba(X), b.predict_proba(X * [3.0, 0.01] + 7.0),
                               rtol=1e-9)


@pytest.mark.parametrize("settings", [
    dict(kernel="matern52", link="probit"),
    dict(link="probit", inference="ep"),
    dict(ard=False, n_restarts=1, random_state=3),
])
def test_other_settings_fit(settings):
    # Source: labelq contract; accuracy level is common practice, no published source.
    X, y = _binary()
    clf = GPClassifier(**FAST, **settings).fit(X, y)
    assert (clf.predict(X) == y).mean() > 0.85
    assert np.all(np.isfinite(clf.predict_proba(X)))


def test_multiclass_api():
    # Source: labelq contract; GPML Alg. 3.4 (one latent per class).
    X, y = _three()
    clf = GPClassifier(**FAST).fit(X, y)
    assert list(clf.classes_) == ["a", "b", "c"]
    proba = clf.predict_proba(X)
    assert proba.shape == (len(X), 3)
    np.testing.assert_allclose(proba.sum(1), 1.0, atol=1e-12)
    mean, var = clf.latent(X)
    assert mean.shape == var.shape == (len(X), 3)
    assert (clf.predict(X) == y).mean() > 0.8


def test_declared_classes():
    # Source: labelq contract (classes declares all classes, unobserved ones included).
    X, y = _binary()
    clf = GPClassifier(**FAST).fit(X, y, classes=["unripe", "ripe", "rotten"])
    assert list(clf.classes_) == ["unripe", "ripe", "rotten"]
    proba = clf.predict_proba(X)
    assert proba.shape == (len(X), 3)
    assert proba[:, 2].max() < 0.5
    with pytest.raises(ValueError, match="rotten"):
        GPClassifier().fit(X, np.where(y == "ripe", "rotten", y), classes=["ripe", "unripe"])


def test_one_class_observed():
    # Source: labelq contract: one class and no declaration -> that class with probability 1;
    # two declared classes with one observed -> a proper binary fit with all targets on one side.
    X, _ = _binary()
    y = np.full(len(X), 7)
    single = GPClassifier().fit(X, y)
    assert list(single.classes_) == [7]
    np.testing.assert_array_equal(single.predict_proba(X[:3]), np.ones((3, 1)))
    assert list(single.predict(X[:3])) == [7, 7, 7]
    assert single.log_marginal_likelihood_ == 0.0
    pool = single.predict_pool(X[:3])
    np.testing.assert_array_equal(pool.mean, 0.0)
    both = GPClassifier().fit(X, y, classes=[3, 7])
    proba = both.predict_proba(np.vstack([X, X * 10]))
    assert np.all(np.isfinite(proba))
    assert np.all(proba[:, 1] > 0.5) and np.all(proba[:, 1] < 1.0)


def test_duplicated_rows_are_allowed():
    # Source: common practice (no published source): duplicates make K singular, but the stable
    # form B = I + W^1/2 K W^1/2 (GPML Alg. 3.1) stays positive definite. Duplicating every row
    # must keep probabilities finite and in (0, 1), and a conflicting duplicate pair sits near 1/2.
    X, y = _binary(20)
    X2, y2 = np.vstack([X, X]), np.concatenate([y, y])
    clf = GPClassifier(**FAST).fit(X2, y2)
    proba = clf.predict_proba(X)
    assert np.all(np.isfinite(proba)) and np.all((proba > 0) & (proba < 1))
    Xc = np.vstack([X, [[0.0, 100.0], [0.0, 100.0]]])
    yc = np.concatenate([y, ["ripe", "unripe"]])
    conflict = GPClassifier(optimize=False).fit(Xc, yc).predict_proba([[0.0, 100.0]])[0, 0]
    assert 0.2 < conflict < 0.8


@pytest.mark.parametrize("X,y,match", [
    (np.array([[np.nan, 1.0], [0.0, 1.0]]), ["a", "b"], "NaN or inf"),
    (np.array([[np.inf, 1.0], [0.0, 1.0]]), ["a", "b"], "NaN or inf"),
    (np.zeros(4), ["a", "b", "a", "b"], "2-D"),
    (np.zeros((3, 2)), ["a", "b"], "3 rows but y has 2"),
    (np.zeros((0, 2)), [], "no labels"),
    ([["x", "y"]], ["a"], "numeric"),
    (np.zeros((2, 2)), [["a"], ["b"]], "1-D"),
])
def test_invalid_input_raises_value_error(X, y, match):
    # Source: labelq contract (ValueError naming the problem).
    with pytest.raises(ValueError, match=match):
        GPClassifier().fit(X, y)


@pytest.mark.parametrize("settings,match", [
    (dict(kernel="rbf"), "kernel"), (dict(link="tanh"), "link"),
    (dict(inference="vb"), "inference"), (dict(inference="ep"), "probit"),
    (dict(n_restarts=-1), "n_restarts"), (dict(lengthscale=[1.0, 2.0, 3.0]), "lengthscale"),
    (dict(signal_variance=-1.0), "signal_variance"),
])
def test_invalid_settings(settings, match):
    # Source: labelq contract.
    X, y = _binary(10)
    with pytest.raises(ValueError, match=match):
        GPClassifier(**settings).fit(X, y)


def test_predict_errors():
    # Source: labelq contract.
    X, y = _binary(10)
    with pytest.raises(ValueError, match="not fitted"):
        GPClassifier().predict_proba(X)
    clf = GPClassifier(optimize=False).fit(X, y)
    with pytest.raises(ValueError, match="3 features"):
        clf.predict_proba(np.zeros((2, 3)))
    with pytest.raises(ValueError, match="binary only"):
        GPClassifier(link="probit", inference="ep").fit(*_three())


@pytest.mark.parametrize("data", [_binary, _three])
def test_predict_pool_equals_latent_and_proba(data):
    # Source: labelq contract (predict_pool in double precision = latent + predict_proba,
    # chunked; the mixed-precision default is bounded in test_mixed_precision.py).
    X, y = data()
    clf = GPClassifier(**FAST).fit(X, y)
    Xt = np.random.default_rng(4).normal(size=(23, 2)) * X.std(0) + X.mean(0)
    pred = clf.predict_pool(Xt, chunk_size=5, precision="double")
    assert isinstance(pred, Prediction)
    mean, var = clf.latent(Xt)
    np.testing.assert_allclose(pred.mean, mean, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(pred.var, var, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(pred.proba, clf.predict_proba(Xt), rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("data", [_binary, _three])
def test_latent_cross_cov(data):
    # Source: labelq contract; GPML eq. 3.24 / Alg. 3.4 line 9 (the diagonal of the posterior
    # covariance is the latent variance; the covariance is symmetric in its two arguments).
    X, y = data()
    clf = GPClassifier(optimize=False).fit(X, y)
    A, B = X[:6] + 0.1, X[3:10] - 0.2
    cov = clf.latent_cross_cov(A, B)
    C = clf.posterior_.weights.shape[1] if clf.n_classes_ > 2 else None
    assert cov.shape == ((6, 7) if C is None else (6, 7, C))
    np.testing.assert_allclose(np.swapaxes(clf.latent_cross_cov(B, A), 0, 1), cov, atol=1e-12)
    self_cov = clf.latent_cross_cov(A, A)
    diag = np.diagonal(self_cov, axis1=0, axis2=1).T
    np.testing.assert_allclose(diag, clf.latent(A)[1], rtol=1e-9)


@pytest.mark.parametrize("settings", [dict(), dict(link="probit", inference="ep")])
def test_warm_start_gives_the_cold_start_mode(settings):
    # Source: the Laplace and EP objectives have a unique optimum for log-concave links
    # (GPML sec. 3.4.1, 3.6); warm and cold starts must agree (labelq contract).
    X, y = _binary(60)
    fixed = dict(optimize=False, lengthscale=1.5, signal_variance=2.0, **settings)
    first = GPClassifier(**fixed).fit(X[:40], y[:40])
    warm = first.fit(X, y, warm_start=True)
    warm_proba = warm.predict_proba(X)
    cold = GPClassifier(**fixed).fit(X, y)
    np.testing.assert_allclose(warm_proba, cold.predict_proba(X), rtol=1e-6, atol=1e-9)


def test_warm_start_keeps_hyperparameters_when_not_optimizing():
    # Source: labelq contract (optimize=False with warm_start keeps previous hyperparameters;
    # attributes are read at fit time).
    X, y = _binary(50)
    clf = GPClassifier(**FAST).fit(X[:30], y[:30])
    before = clf.hyperparameters_
    clf.optimize = False
    clf.fit(X, y, warm_start=True)
    assert clf.hyperparameters_ == before
    clf.optimize = True
    clf.fit(X, y, warm_start=True)
    assert np.isfinite(clf.log_marginal_likelihood_)


def test_warm_start_reuses_the_mode_for_seen_rows():
    # Source: labelq contract: a refit on the same data from the previous mode needs at most a
    # confirming Newton step.
    X, y = _binary(50)
    clf = GPClassifier(optimize=False).fit(X, y)
    assert clf.fit(X, y, warm_start=True).n_iter_ <= 2


def test_logistic_probabilities_bounded_for_far_points():
    # Source: far from the data the latent returns to the prior N(0, s2) (GPML eq. 3.21-3.24),
    # so probabilities approach E[sigma(f)] = 1/2.
    X, y = _binary()
    clf = GPClassifier(optimize=False).fit(X, y)
    far = clf.predict_proba(np.array([[1e6, 1e6]]))[0]
    np.testing.assert_allclose(far, [0.5, 0.5], atol=1e-9)
    mean, var = clf.latent(np.array([[1e6, 1e6]]))
    assert var[0] == pytest.approx(clf.hyperparameters_["signal_variance"])


@pytest.mark.parametrize("data", [_binary, _three])
def test_predict_pool_threads_give_the_same_rows(data):
    # Source: labelq contract (chunks are independent, so threads change only the timing).
    X, y = data()
    clf = GPClassifier(**FAST).fit(X, y)
    Xt = np.random.default_rng(5).normal(size=(101, 2)) * X.std(0) + X.mean(0)
    one = clf.predict_pool(Xt, chunk_size=10)
    two = clf.predict_pool(Xt, chunk_size=10, n_jobs=3)
    for a, b in zip(one, two):
        np.testing.assert_allclose(a, b, rtol=1e-12, atol=1e-15)
    assert clf.predict_pool(Xt[:0]).proba.shape == (0, len(clf.classes_))
    with pytest.raises(ValueError, match="n_jobs"):
        clf.predict_pool(Xt, n_jobs=0)
