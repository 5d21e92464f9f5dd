"""Strategy replay: the JSON contract on small pools, and the breast-cancer acceptance replay."""

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
    out = simulate(X, y, strategies=("entropy", "random"), budget=6, seeds=(0, 1),
                   progress=lambda done, total: calls.append((done, total)))
    assert set(out) == {"strategies", "full_pool_accuracy", "reference_rows", "budget", "seeds",
                        "pool_fraction", "settings"}
    assert json.loads(json.dumps(out)) == out
    assert out["budget"] == 6 and out["seeds"] == [0, 1] and out["reference_rows"] == 60
    assert 0.5 < out["full_pool_accuracy"] <= 1.0
    for name in ("entropy", "random"):
        s = out["strategies"][name]
        assert s["labels"] == list(range(1, 7))
        for key in ("accuracy_mean", "accuracy_sd", "entropy_mean"):
            assert len(s[key]) == 6
        assert s["labels_to_95"] is None or 1 <= s["labels_to_95"] <= 6
        assert 0.0 <= s["auc"] <= 1.0 and s["auc_se"] >= 0.0
    # the progress bar moves from the start and ends at its total
    assert calls[0] == (0, 2 * 2 * 6 + 1)
    assert calls[-1][0] == calls[-1][1] == 2 * 2 * 6 + 1
    assert [c[0] for c in calls] == list(range(len(calls)))


def test_no_reference_model():
    """--reference 0: no full-pool fit, so no labels_to_95/99 (common practice)."""
    X, y = _two_blobs()
    out = simulate(X, y, strategies=("margin",), budget=4, seeds=(0,), reference_rows=0)
    assert out["full_pool_accuracy"] is None and out["reference_rows"] == 0
    assert out["strategies"]["margin"]["labels_to_95"] is None


def test_three_classes():
    """Common practice, no published source: a multi-class pool replays through the softmax model."""
    rng = np.random.default_rng(1)
    y = np.repeat(["export", "local", "juice"], 12)
    X = rng.normal(size=(36, 2)) + np.select([y == "export", y == "local"], [0.0, 3.0], 6.0)[:, None]
    out = simulate(X, y, strategies=("bald", "entropy", "epig"), budget=4, seeds=(0,))
    assert out["strategies"]["bald"]["labels"] == [1, 2, 3, 4]
    assert all(0.0 <= a <= 1.0 for a in out["strategies"]["entropy"]["accuracy_mean"])


def test_seeds_replay_their_own_share_of_the_pool():
    """Each seed replays on its own seeded 90% of the rows, the same for every strategy
    (common practice of resampling the pool between repetitions)."""
    from labelq.review.replay import seed_rows
    a, b = seed_rows(100, 0.9, 0), seed_rows(100, 0.9, 1)
    assert len(a) == len(b) == 90 and not np.array_equal(a, b)
    assert np.array_equal(a, seed_rows(100, 0.9, 0)) and len(seed_rows(100, 1.0, 3)) == 100


@pytest.mark.parametrize("kwargs", [{"strategies": ("greedy",)}, {"budget": 100}, {"budget": 1},
                                    {"seeds": ()}, {"pool_fraction": 0.0}])
def test_rejects_bad_settings(kwargs):
    """Common practice, no published source."""
    X, y = _two_blobs()
    with pytest.raises(ValueError):
        simulate(X, y, **kwargs)


@pytest.mark.slow
def test_default_strategy_beats_random_on_breast_cancer():
    """Acceptance: replay on scikit-learn's bundled breast-cancer data (569 x 30), seeds 0-4, 60
    labels from none. Labels chosen near the boundary should teach more than random ones (Lewis &
    Gale 1994, "A sequential algorithm for training text classifiers"), by the mean area under the
    learning curve; and no hand-over to learnt hyperparameters may cost more than 0.05 of pool
    accuracy (issue acceptance)."""
    X, y = load_breast_cancer(return_X_y=True)
    out = simulate(X, y, strategies=("margin", "random"), budget=60, seeds=(0, 1, 2, 3, 4),
                   reference_rows=0)
    margin, random = out["strategies"]["margin"], out["strategies"]["random"]
    assert margin["auc"] > random["auc"] + random["auc_se"]
    for s in (margin, random):
        assert all(change > -0.05 for _, change in s["relearns"])
