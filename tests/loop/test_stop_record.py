"""The stop set's predictions kept in each fit's info (labelq.loop.refit._stop_record) equal the
ones in the fit's score blocks, so Cohen's kappa between successive fits (Cohen 1960, as
labelq.review.cohen_kappa computes it) does not change with where they are read from.

Data: scikit-learn's bundled iris data (three classes), 2,500 rows with jitter so the stop set
(2,000) is a true subset of the pool.
"""
import numpy as np
from sklearn.datasets import load_iris

from labelq.loop import actions
from labelq.loop.refit import STOP_SIZE, _stop_predictions, load_state
from labelq.review import stop_set
from labelq.store import Store


def test_kept_stop_predictions_equal_the_score_blocks(tmp_path):
    X, y = load_iris(return_X_y=True)
    rng = np.random.default_rng(0)
    rows = rng.integers(0, len(y), 2500)
    pool = X[rows] + rng.normal(0, 0.05, (2500, X.shape[1]))
    names = ["setosa", "versicolor", "virginica"]
    store = Store.create(tmp_path / "iris.db", names)
    keys = [f"i{i:04d}" for i in range(len(pool))]
    store.add_candidates(keys, pool, [{} for _ in keys], [f"x{j}" for j in range(4)])
    for i in [int(np.flatnonzero(y[rows] == c)[0]) for c in range(3)] + [5, 9, 13]:
        actions.label(store, keys[i], names[y[rows][i]], "ana")
    fit = store.last_fit()
    stop_ids = stop_set(load_state(store).ids, size=STOP_SIZE)
    assert len(stop_ids) == STOP_SIZE and "stop_set" in fit.info
    kept = _stop_predictions(store, fit, stop_ids)
    np.testing.assert_array_equal(kept, store.predictions_for(stop_ids))
    # a different stop set (another pool) falls back to the score blocks
    other = stop_ids[:-1]
    np.testing.assert_array_equal(_stop_predictions(store, fit, other),
                                  store.predictions_for(other))
    assert fit.info is not None and store.last_fit().id == fit.id
    store.close()
