"""A replay (labelq simulate) and a scripted label loop through a store make the same picks.

Data: scikit-learn's bundled iris (3 classes) and breast-cancer (2 classes) data; the true class
answers for the labeller. The loop labels the candidate at rank 1 of `next` each time; the replay
(labelq.review.replay.replay_run) takes rank 1 of the same policy without a store. Common
practice, no published source: a simulation is only worth its advice if it is the system.
"""

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_iris

from labelq.loop import actions, settings
from labelq.loop.refit import load_state
from labelq.gp.hyperparameters import median_distance
from labelq.review.replay import replay_run
from labelq.store import Store


def scripted_loop(tmp_path, X, y, strategy, n_labels):
    """Label rank 1 of the queue n_labels times through a store; the row indices picked."""
    classes = sorted(set(y))
    store = Store.create(tmp_path / f"{strategy}.db", classes)
    keys = [f"c{i:04d}" for i in range(len(y))]
    store.add_candidates(keys, X, [{} for _ in keys], [f"f{j}" for j in range(X.shape[1])])
    picks = []
    with store:
        for _ in range(n_labels):
            head = actions.next_queue(store, 1, strategy=strategy).rows[0]
            row = keys.index(head.key)
            picks.append(row)
            actions.label(store, head.key, y[row], "tester", strategy=strategy)
        state = load_state(store)
    return picks, state


@pytest.mark.slow
@pytest.mark.parametrize("data, strategy, n", [(load_iris, "margin", 20),
                                               (load_iris, "epig", 12),
                                               (load_breast_cancer, "bald", 20),
                                               (load_breast_cancer, "random", 8)])
def test_replay_makes_the_loops_picks(tmp_path, data, strategy, n):
    X, target = data(return_X_y=True)
    y = np.array([f"k{t}" for t in target], dtype=object)
    picks, state = scripted_loop(tmp_path, X, y, strategy, n)
    policy = settings.POLICY.with_(strategy=strategy)
    # the store's standardised pool is the replay's input, so both see the same numbers
    run = replay_run(state.X, y, sorted(set(y)), policy, n, median=median_distance(state.X))
    assert run.picks == picks
