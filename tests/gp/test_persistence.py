"""JSON storage of fitted models (labelq.gp.persistence via GPClassifier.to_dict/save)."""
import json

import numpy as np
import pytest

from labelq.gp import GPClassifier

RNG = np.random.default_rng(0)
X = RNG.normal(size=(40, 3))
Y_BIN = np.where(X[:, 0] > 0, 1, 0)
Y_MULTI = np.array(["low", "mid", "high"])[(X[:, 0] > 0).astype(int) + (X[:, 1] > 0.5)]


@pytest.mark.parametrize("settings,y", [
    (dict(), Y_BIN),
    (dict(link="probit", inference="ep", kernel="matern52"), Y_BIN),
    (dict(ard=False), Y_MULTI),
])
def test_round_trip_reproduces_probabilities(tmp_path, settings, y):
    # Source: labelq contract (reloaded model reproduces predict_proba to 1e-9).
    clf = GPClassifier(max_optimizer_iter=20, **settings).fit(X, y)
    Xt = RNG.normal(size=(30, 3))
    again = GPClassifier.from_dict(json.loads(json.dumps(clf.to_dict())))
    np.testing.assert_allclose(again.predict_proba(Xt), clf.predict_proba(Xt), rtol=0, atol=1e-9)
    path = tmp_path / "model.json"
    clf.save(path)
    loaded = GPClassifier.load(path)
    np.testing.assert_allclose(loaded.predict_proba(Xt), clf.predict_proba(Xt), atol=1e-9)
    assert list(loaded.classes_) == list(clf.classes_)
    assert loaded.hyperparameters_ == clf.hyperparameters_
    assert loaded.log_marginal_likelihood_ == clf.log_marginal_likelihood_
    np.testing.assert_allclose(loaded.latent_cross_cov(Xt[:3], Xt[3:5]),
                               clf.latent_cross_cov(Xt[:3], Xt[3:5]), atol=1e-9)


def test_reloaded_model_can_warm_start():
    # Source: labelq contract (warm start matches rows by content and label).
    clf = GPClassifier(optimize=False).fit(X, Y_BIN)
    loaded = GPClassifier.from_dict(clf.to_dict())
    assert loaded.fit(X, Y_BIN, warm_start=True).n_iter_ <= 2


def test_one_class_round_trip():
    # Source: labelq contract.
    clf = GPClassifier().fit(X, np.zeros(len(X), dtype=int))
    again = GPClassifier.from_dict(clf.to_dict())
    np.testing.assert_array_equal(again.predict_proba(X[:2]), np.ones((2, 1)))


def test_non_scalar_labels_and_bad_dicts():
    # Source: labelq contract (classes stored as JSON scalars; errors name the value).
    clf = GPClassifier(optimize=False).fit(X[:4], [(1, 2), (1, 2), (3,), (3,)])
    with pytest.raises(TypeError, match=r"\(1, 2\)"):
        clf.to_dict()
    with pytest.raises(ValueError, match="format"):
        GPClassifier.from_dict({"format": "other"})
