"""Numerical edge cases, through labelq.gp.GPClassifier and through the label workflow: every
probability finite, in [0, 1], rows summing to one; hyperparameters and the log marginal
likelihood finite.

Data: scikit-learn's bundled breast-cancer and iris data sets (subsets named in each test).
"""

from __future__ import annotations

import numpy as np

from labelq.acquire import select_batch
from labelq.gp import GPClassifier, predictive_probability
from labelq.loop import actions
from labelq.store import Store


def assert_sensible(clf, X):
    """Probabilities on the simplex and everything the fit reports finite."""
    proba = clf.predict_proba(X)
    assert np.isfinite(proba).all()
    assert (proba >= 0.0).all() and (proba <= 1.0).all(), (proba.min(), proba.max())
    np.testing.assert_allclose(proba.sum(axis=1), 1.0, atol=1e-9)
    assert np.isfinite(clf.log_marginal_likelihood_)
    for name, value in clf.hyperparameters_.items():
        assert np.isfinite(np.asarray(value, dtype=float)).all(), (name, value)
    mean, var = clf.latent(X)
    assert np.isfinite(mean).all() and np.isfinite(var).all() and (var >= 0).all()
    return proba


def _cancer(cancer, rows):
    X = cancer.data[rows]
    y = np.array([str(cancer.target_names[t]) for t in cancer.target[rows]], dtype=object)
    return X, y


def test_duplicated_rows(cancer):
    """The first 40 breast-cancer rows, each given twice with the same label (a pool holding the
    same item twice); the fit must not break on the singular kernel matrix (GPML Alg. 3.1 uses
    B = I + W^1/2 K W^1/2, well conditioned for any K); common practice."""
    X, y = _cancer(cancer, np.arange(40))
    X2, y2 = np.vstack([X, X]), np.concatenate([y, y])
    clf = GPClassifier(random_state=0).fit(X2, y2)
    proba = assert_sensible(clf, cancer.data[:100])
    # duplicated rows get identical predictions
    np.testing.assert_allclose(proba[:40], clf.predict_proba(X), atol=1e-12)
    # the labelled rows are predicted as labelled
    assert (clf.predict(X) == y).mean() > 0.9


def test_constant_features(cancer):
    """Breast-cancer rows 0-59 with three extra columns that never change (0, 1 and 1e6):
    standardising must not divide by a zero spread; common practice."""
    X, y = _cancer(cancer, np.arange(60))
    const = np.column_stack([np.zeros(len(X)), np.ones(len(X)), np.full(len(X), 1e6)])
    Xc = np.hstack([X, const])
    clf = GPClassifier(random_state=0).fit(Xc, y)
    assert_sensible(clf, np.hstack([cancer.data[:120], np.tile(const[:1], (120, 1))]))


def test_every_feature_constant_in_the_labels(cancer):
    """Two labelled breast-cancer rows made identical in every feature but of different
    classes (the least informative data possible): p near 1/2, all finite; common practice."""
    X = np.vstack([cancer.data[0], cancer.data[0]])
    y = np.array(["malignant", "benign"], dtype=object)
    clf = GPClassifier(random_state=0).fit(X, y)
    proba = assert_sensible(clf, cancer.data[:50])
    np.testing.assert_allclose(proba[0], [0.5, 0.5], atol=1e-6)


def test_features_on_a_1e9_scale(cancer):
    """Breast-cancer rows 0-79 with every feature multiplied by 1e9: after standardisation the
    model is the same as on the raw rows (GPClassifier standardize=True); common practice."""
    X, y = _cancer(cancer, np.arange(80))
    a = GPClassifier(random_state=0).fit(X, y)
    b = GPClassifier(random_state=0).fit(X * 1e9, y)
    pa = assert_sensible(a, cancer.data[:200])
    pb = assert_sensible(b, cancer.data[:200] * 1e9)
    np.testing.assert_allclose(pa, pb, atol=1e-4)


def test_one_labelled_class(cancer):
    """Labels of one class only (breast-cancer rows labelled malignant), the second class declared:
    finite, on the simplex; common practice."""
    rows = np.flatnonzero(cancer.target == 0)[:10]
    X, y = _cancer(cancer, rows)
    clf = GPClassifier(random_state=0).fit(X, y, classes=["malignant", "benign"])
    assert list(clf.classes_) == ["malignant", "benign"]
    assert_sensible(clf, cancer.data[:100])


def test_two_labels(cancer):
    """One label of each class (breast-cancer rows 0 malignant and 19 benign): the smallest
    fit that has a model; common practice."""
    X, y = _cancer(cancer, np.array([0, 19]))
    assert sorted(y) == ["benign", "malignant"]
    clf = GPClassifier(random_state=0).fit(X, y)
    proba = assert_sensible(clf, cancer.data)
    assert proba[0, list(clf.classes_).index("malignant")] > 0.5
    assert proba[19, list(clf.classes_).index("benign")] > 0.5


def test_perfectly_separable_setosa_versus_rest(iris):
    """Iris setosa against the other two species is linearly separable (Fisher 1936; the standard
    example); 30 labels. Probabilities stay on the simplex, correct on every flower, and the
    hyperparameters stay finite (learning may stop at a bound)."""
    y_all = np.where(iris.target == 0, "setosa", "other").astype(object)
    rows = np.arange(0, 150, 5)
    clf = GPClassifier(random_state=0).fit(iris.data[rows], y_all[rows])
    proba = assert_sensible(clf, iris.data)
    assert (clf.predict(iris.data) == y_all).all()
    assert proba[np.arange(150), [list(clf.classes_).index(c) for c in y_all]].min() > 0.5


def test_workflow_edge_cases_in_a_store(tmp_path, cancer):
    """The same edge cases through a store and actions.label/next_queue: duplicated candidates,
    a constant feature and features on a 1e9 scale (breast-cancer rows 0-99), one labelled class
    first (cold start), then two labels; common practice."""
    X = cancer.data[:100] * 1e9
    X = np.hstack([X, np.full((100, 1), 3.0)])  # a constant feature
    X = np.vstack([X, X[:10]])  # rows 0-9 again under other keys
    keys = [f"c{i:04d}" for i in range(100)] + [f"dup{i:04d}" for i in range(10)]
    with Store.create(tmp_path / "edge.db", ["malignant", "benign"]) as store:
        store.add_candidates(keys, X, [{} for _ in keys], [f"f{j:02d}" for j in range(31)])
        step = actions.label(store, "c0000", "malignant", "t")  # one class only
        queue = actions.next_queue(store, 5)
        assert queue.cold_start and len(queue.rows) == 5
        for row in queue.rows:
            assert np.isfinite(row.probabilities).all()
        actions.label(store, "c0019", "benign", "t")  # two labels, two classes
        queue = actions.next_queue(store, 20)
        assert not queue.cold_start
        assert queue.fit.n_labels == 2 and step.event
        for row in queue.rows:
            p = np.asarray(row.probabilities)
            assert np.isfinite(p).all() and (p >= 0).all() and (p <= 1).all()
            assert abs(p.sum() - 1) < 1e-9 and np.isfinite(row.score)
        for value in queue.fit.hyperparameters.values():
            assert np.isfinite(np.asarray(value, dtype=float)).all()
        assert np.isfinite(queue.fit.log_marginal_likelihood)
        chunk = next(store.scores())
        assert np.isfinite(chunk.probabilities).all()
        # the duplicate of a candidate gets its scores
        ids = store.pool_ids()
        by_id = dict(zip(chunk.candidate_id.tolist(), chunk.probabilities.tolist()))
        np.testing.assert_allclose(by_id[int(ids[5])], by_id[int(ids[105])], atol=1e-12)
        assert store.check() == []


def test_logistic_average_of_a_confident_latent_is_at_most_one():
    """E[sigma(f)] for f ~ N(m, s^2) lies in [0, 1] for every m and s (an average of values in
    [0, 1]; GPML eq. 3.25). Latent means of 30-200 with variance 4 occur for far-out breast-cancer
    rows after ~50 labels in the workflow; common practice."""
    mean = np.array([30.0, 50.0, 200.0, -30.0])
    var = np.array([4.0, 4.0, 4.0, 4.0])
    p = predictive_probability(mean, var, "logistic")
    assert (p >= 0.0).all() and (p <= 1.0).all(), p - 1.0


def test_batch_selection_with_a_confident_wide_latent():
    """select_batch on three candidates whose latents are N(40, 4), N(0, 4), N(-40, 4) (the shape
    of a well-separated pool; values common practice): must return a batch, not raise."""
    mean = np.array([40.0, 0.0, -40.0])
    var = np.array([4.0, 4.0, 4.0])
    proba = np.array([[0.0, 1.0], [0.5, 0.5], [1.0, 0.0]])
    cov = np.diag(var) * 0.5 + 0.5 * var.mean()

    def cross_cov(rows, j):
        return cov[np.asarray(rows), j]

    picks = select_batch("entropy", proba, mean, var, "logistic", 2, cross_cov, np.arange(3))
    assert len(picks) == 2
