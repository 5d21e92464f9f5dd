"""Strategy replay: the JSON contract on a small pool, and the breast-cancer acceptance replay."""

import json

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer

from labelq.review import simulate


def _two_blobs(n=60, seed=0):
    rng = np.random.default_rng(seed)
    y = np.repeat(["no", "yes"], n // 2)
    X = rng.normal(size=(n, 2)) + np.where(y == "yes", 2.5, 0.0)[:, None]
    return X, y


def test_contract_on_a_small_pool():
    """The simulate --json contract in DESIGN.md (common practice, no published source)."""
    X, y = _two_blobs()
    calls = []
    out = simulate(X, y, strategies=("entropy", "random"), budget=6, seeds=(0, 1), n_initial=3,
                   progress=lambda done, total: calls.append((done, total)))
    assert set(out) == {"strategies", "full_pool_accuracy", "budget", "seeds", "n_initial"}
    assert json.loads(json.dumps(out)) == out
    assert out["budget"] == 6 and out["seeds"] == [0, 1] and out["n_initial"] == 3
    assert 0.5 < out["full_pool_accuracy"] <= 1.0
    for name in ("entropy", "random"):
        s = out["strategies"][name]
        assert s["labels"] == list(range(3, 10))
        for key in ("accuracy_mean", "accuracy_sd", "entropy_mean"):
            assert len(s[key]) == 7
        assert s["labels_to_95"] is None or 3 <= s["labels_to_95"] <= 9
        assert 0.0 <= s["auc"] <= 1.0
    # same seeded start for every strategy: identical first fit
    first = [out["strategies"][name]["accuracy_mean"][0] for name in ("entropy", "random")]
    assert first[0] == first[1]
    assert calls[-1][0] == calls[-1][1] == 2 * 2 * 7 + 1
    assert [c[0] for c in calls] == list(range(1, len(calls) + 1))


def test_three_classes():
    """Common practice, no published source: a multi-class pool replays through the softmax model."""
    rng = np.random.default_rng(1)
    y = np.repeat(["export", "local", "juice"], 12)
    X = rng.normal(size=(36, 2)) + np.select([y == "export", y == "local"], [0.0, 3.0], 6.0)[:, None]
    out = simulate(X, y, strategies=("bald", "entropy"), budget=2, seeds=(0,), n_initial=3)
    assert out["strategies"]["bald"]["labels"] == [3, 4, 5]
    assert all(0.0 <= a <= 1.0 for a in out["strategies"]["entropy"]["accuracy_mean"])


def test_refit_every_measures_fewer_points():
    """Common practice, no published source: batches of 4 labels: fits at 3, 7, 11, 13 labels."""
    X, y = _two_blobs()
    out = simulate(X, y, strategies=("margin",), budget=10, seeds=(0,), n_initial=3, refit_every=4)
    assert out["strategies"]["margin"]["labels"] == [3, 7, 11, 13]


@pytest.mark.parametrize("kwargs", [{"strategies": ("greedy",)}, {"budget": 100}, {"n_initial": 1},
                                    {"refit_every": 0}, {"seeds": ()}])
def test_rejects_bad_settings(kwargs):
    """Common practice, no published source."""
    X, y = _two_blobs()
    with pytest.raises(ValueError):
        simulate(X, y, **kwargs)


@pytest.fixture(scope="module")
def breast_cancer_replay():
    """Replay on scikit-learn's bundled breast-cancer data (569 x 30): seeds 0-4, 4 initial labels,
    60 queries, accuracy over the pool; run once and shared by the acceptance tests."""
    X, y = load_breast_cancer(return_X_y=True)
    return simulate(X, y, strategies=("entropy", "margin", "bald", "random"), budget=60,
                    seeds=(0, 1, 2, 3, 4), n_initial=4)


@pytest.mark.slow
@pytest.mark.parametrize("strategy", ["entropy", "margin", "bald"])
def test_uncertainty_strategies_beat_random_on_area_under_curve(breast_cancer_replay, strategy):
    """Acceptance: replay test on scikit-learn's bundled breast-cancer data (seeds 0-4, 4 initial
    labels, 60 queries, accuracy over the pool). Uncertainty sampling should learn faster than
    random sampling (Lewis & Gale 1994, "A sequential algorithm for training text classifiers";
    Houlsby et al. 2011, "Bayesian active learning for classification and preference learning",
    for BALD), measured by the mean area under the learning curve."""
    strategies = breast_cancer_replay["strategies"]
    assert strategies[strategy]["auc"] > strategies["random"]["auc"]


@pytest.mark.slow
def test_entropy_needs_fewer_labels_than_random_for_99_percent(breast_cancer_replay):
    """Acceptance, same replay: labels to reach 99% of the full-pool accuracy, median over 5 seeds;
    `random` not reaching it within the budget counts as needing more (Lewis & Gale 1994)."""
    strategies = breast_cancer_replay["strategies"]
    entropy, random = strategies["entropy"]["labels_to_99"], strategies["random"]["labels_to_99"]
    assert entropy is not None
    assert random is None or entropy < random


def test_hyperparameters_learnt_from_16_labels_then_when_the_count_doubles(monkeypatch):
    """The replay's refit schedule (documented in labelq.review.replay; common practice, no published
    source): defaults below LEARN_FROM labels, learning afresh at 16 and 32, warm fits otherwise."""
    import labelq.review.replay as replay

    calls = []
    real_fit = replay.GPClassifier.fit

    def spy(self, X, y, warm_start=False, classes=None):
        calls.append((len(y), self.optimize, warm_start))
        return real_fit(self, X, y, warm_start=warm_start, classes=classes)

    monkeypatch.setattr(replay.GPClassifier, "fit", spy)
    X, y = _two_blobs()
    simulate(X, y, strategies=("entropy",), budget=30, seeds=(0,), n_initial=4)
    runs = [c for c in calls if c[0] < len(y)]  # leave out the full-pool fit
    assert [n for n, learn, _ in runs if learn] == [16, 32]
    assert [n for n, _, warm in runs if not warm] == [4, 16, 32]
    assert (len(y), True, False) in calls  # full-pool model learns its hyperparameters
