"""The head of the queue and why each row is there (labelq.policy.queue).

Data: scikit-learn's bundled iris data (3 classes), standardised. The reasons are this project's
wording; the cold start is Hacohen et al. 2022 (typical points), the batch acquire.select_batch.
"""

import numpy as np
import pytest
from sklearn.datasets import load_iris

from labelq.gp.hyperparameters import median_distance
from labelq.policy import PolicySettings, fit_labels, rank_pool, score_pool, uniform_scores

CLASSES = ["setosa", "versicolor", "virginica"]


@pytest.fixture(scope="module")
def iris():
    X, y = load_iris(return_X_y=True)
    X = (X - X.mean(0)) / X.std(0)
    return X, np.array(CLASSES)[y], np.arange(1, len(y) + 1)


def _queue(iris, labelled_rows, strategy, skipped=()):
    X, y, ids = iris
    settings = PolicySettings(strategy=strategy, head_size=8)
    unlabelled = np.ones(len(y), dtype=bool)
    unlabelled[labelled_rows] = False
    if len(labelled_rows):
        out = fit_labels(settings, X[labelled_rows], y[labelled_rows], CLASSES, None,
                         median_distance(X))
        scores = score_pool(out.model, X, settings, strategy, unlabelled)
        model = out.model
    else:
        scores, model = uniform_scores(len(y), 3), None
    seen = len(set(y[labelled_rows].tolist()))
    return rank_pool(model, X, ids, scores, settings, strategy, unlabelled, list(skipped), seen,
                     CLASSES), scores


def test_cold_start_rows_say_which_cluster_they_represent(iris):
    queue, _ = _queue(iris, [], "margin")
    assert queue.cold
    head = np.argsort(queue.rank)[:8]
    assert all(r.startswith("represents a cluster of ") for r in queue.reasons[head])
    assert sorted(queue.rank) == list(range(1, 151))


def test_batch_rows_say_why_and_that_they_spread_the_batch(iris):
    labelled = [0, 1, 50, 51, 100, 101]
    queue, scores = _queue(iris, labelled, "margin")
    assert not queue.cold and (queue.rank[labelled] == -1).all()
    order = np.argsort(np.where(queue.rank > 0, queue.rank, 10**6))
    first, second = queue.reasons[order[0]], queue.reasons[order[1]]
    assert first.startswith("near the ") and "boundary" in first and "spread" not in first
    assert second.endswith("chosen to spread the batch")
    assert queue.reasons[order[8]] is None  # below the head
    # rank 1 is the highest priority (the greedy batch's first pick)
    free = np.flatnonzero(queue.rank > 0)
    assert order[0] == free[np.argmax(scores.priority[free])]


def test_skipped_rows_sink_and_random_is_a_seeded_draw(iris):
    X, y, ids = iris
    labelled = [0, 50, 100]
    queue, _ = _queue(iris, labelled, "random", skipped=[ids[5]])
    assert queue.rank[5] == queue.rank.max()
    head = np.argsort(np.where(queue.rank > 0, queue.rank, 10**6))[:8]
    assert set(queue.reasons[head]) == {"drawn at random"}
    again, _ = _queue(iris, labelled, "random", skipped=[ids[5]])
    np.testing.assert_array_equal(again.rank, queue.rank)


@pytest.mark.parametrize("strategy", ["entropy", "bald", "epig"])
def test_every_strategy_gives_a_full_ranking_with_reasons(iris, strategy):
    queue, scores = _queue(iris, [0, 1, 50, 51, 100, 101], strategy)
    assert sorted(queue.rank[queue.rank > 0]) == list(range(1, 145))
    assert np.isfinite(scores.priority).all()
    assert sum(r is not None for r in queue.reasons) == 8
