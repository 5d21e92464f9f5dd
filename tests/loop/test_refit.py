"""The label loop (labelq.loop): a label is committed before any model work, a fit is made only
when the store changed, the same label set reuses its model (so undo restores the queue), and
every fit records how it was made.

Data: scikit-learn's bundled iris data (3 classes); the true species answers for the labeller.
The rules are this project's (DEVELOPERS.md, "How the label loop works"); common practice.
"""

import numpy as np
import pytest
from sklearn.datasets import load_iris

from labelq.loop import actions, settings
from labelq.loop.refit import ensure_fit, is_current
from labelq.policy import PolicySettings
from labelq.store import Store


@pytest.fixture
def iris_store(tmp_path):
    X, y = load_iris(return_X_y=True)
    names = np.array(["setosa", "versicolor", "virginica"])[y]
    store = Store.create(tmp_path / "iris.db", ["setosa", "versicolor", "virginica"])
    keys = [f"i{i:03d}" for i in range(len(y))]
    store.add_candidates(keys, X, [{} for _ in keys], ["sl", "sw", "pl", "pw"])
    with store:
        yield store, dict(zip(keys, names))


def _label_head(store, truth, n):
    for _ in range(n):
        head = actions.next_queue(store, 1).rows[0]
        actions.label(store, head.key, truth[head.key], "tester")


def test_no_refit_while_nothing_changed(iris_store):
    store, truth = iris_store
    _label_head(store, truth, 3)
    fit = store.last_fit()
    assert is_current(store, fit)
    assert ensure_fit(store).id == fit.id  # the same fit, no new one


def test_undo_restores_the_previous_queue_exactly(iris_store):
    store, truth = iris_store
    _label_head(store, truth, 6)
    before = [r.key for r in actions.next_queue(store, 10).rows]
    fits_before = len(store.fits())
    head = actions.next_queue(store, 1).rows[0]
    actions.label(store, head.key, truth[head.key], "tester")
    actions.undo(store, "tester")
    after = [r.key for r in actions.next_queue(store, 10).rows]
    assert after == before
    reused = store.last_fit()
    assert reused.info["reused"] is True and len(store.fits()) == fits_before + 2


def test_every_fit_records_its_policy_and_hyperparameter_mode(iris_store):
    store, truth = iris_store
    _label_head(store, truth, 5)
    fit = store.last_fit()
    assert PolicySettings.from_dict(fit.settings) == settings.POLICY.with_(
        strategy=fit.info["strategy"])
    assert fit.hyper_mode in ("average", "learnt", "held")
    assert fit.learnt_at is not None


def test_a_label_is_committed_before_the_refit(iris_store, monkeypatch):
    """Even when the refit fails, the label is in the store (nothing lost)."""
    store, truth = iris_store
    _label_head(store, truth, 2)
    head = actions.next_queue(store, 1).rows[0]

    def broken(*args, **kwargs):
        raise RuntimeError("refit failed")

    monkeypatch.setattr("labelq.loop.actions.ensure_fit", broken)
    with pytest.raises(RuntimeError):
        actions.label(store, head.key, truth[head.key], "tester")
    assert head.key in {r.key for r in store.current_labels()}
