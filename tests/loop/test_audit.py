"""Audits (issue 11): a seeded random sample of unlabelled candidates, each scored against the
prediction the model made before its label (test-then-train), then trained on like any label.

Data: scikit-learn's bundled breast-cancer data (569 rows, 2 classes) and iris data (3 classes);
the true class answers for the labeller. The Wilson interval is Wilson (1927), JASA 22; the
coverage check is the issue's acceptance test (at least 90 of 100 seeded repetitions).
"""

import sqlite3
from contextlib import closing

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_iris

from labelq.loop import actions, audit
from labelq.loop.refit import ensure_fit
from labelq.store import Store


def _store(path, data, classes):
    X, y = data.data, data.target
    store = Store.create(path, classes)
    keys = [f"k{i:03d}" for i in range(len(y))]
    store.add_candidates(keys, X, [{} for _ in keys], [f"f{j}" for j in range(X.shape[1])])
    return store, dict(zip(keys, np.array(classes)[y]))


def _copy(src, dst):
    """A consistent copy of a store in WAL mode (sqlite3's online backup)."""
    with closing(sqlite3.connect(src)) as a, closing(sqlite3.connect(dst)) as b:
        a.backup(b)


def _label_head(store, truth, n):
    for _ in range(n):
        head = actions.next_queue(store, 1).rows[0]
        actions.label(store, head.key, truth[head.key], "tester")


@pytest.fixture
def iris(tmp_path):
    store, truth = _store(tmp_path / "iris.db", load_iris(), ["setosa", "versicolor", "virginica"])
    with store:
        _label_head(store, truth, 6)
        yield store, truth


def test_each_audit_item_is_scored_with_the_prediction_made_before_its_label(iris):
    """Test-then-train: the recorded prediction is the last fit's before the label, and the fit
    after the label (which trained on it) is a different one."""
    store, truth = iris
    store.draw_audit(6, "tester", seed=11)
    for _ in range(6):
        head = actions.next_queue(store, 1).rows[0]
        if not head.audit:
            actions.label(store, head.key, truth[head.key], "tester")
            continue
        before = ensure_fit(store)
        chunk = next(store.scores([head.candidate_id]))
        actions.label(store, head.key, truth[head.key], "tester")
        after = store.last_fit()
        item = next(i for i in store.audit_items() if i.key == head.key)
        assert item.fit_id == before.id != after.id
        assert after.event_mark > before.event_mark  # the new fit saw the label; the old did not
        np.testing.assert_array_equal(item.probabilities, chunk.probabilities[0])
        assert item.predicted == store.classes[int(chunk.predicted[0])]
        assert item.p_top == pytest.approx(float(chunk.p_top[0]), abs=0)
        assert item.label == truth[head.key]


def test_audit_items_are_offered_one_in_five_without_a_prediction(iris):
    """This project's rule (issue 11: "e.g. one in five"): A q q q q A ... from the draw on."""
    store, truth = iris
    store.draw_audit(3, "tester", seed=5)
    rows = actions.next_queue(store, 11).rows
    assert [r.audit for r in rows] == [True, False, False, False, False, True,
                                       False, False, False, False, True]
    assert all(r.predicted is None and r.probabilities is None for r in rows if r.audit)
    assert len({r.key for r in rows}) == 11
    pattern = []
    for _ in range(7):  # label the head each time: the same rhythm
        head = actions.next_queue(store, 1).rows[0]
        pattern.append(head.audit)
        actions.label(store, head.key, truth[head.key], "tester")
    assert pattern == [True, False, False, False, False, True, False]


def test_undo_puts_an_audit_item_back_and_a_relabel_is_scored_by_its_new_class(iris):
    store, truth = iris
    store.draw_audit(1, "tester", seed=2)
    head = actions.next_queue(store, 1).rows[0]
    assert head.audit
    actions.label(store, head.key, truth[head.key], "tester")
    doc = audit.report(store)
    assert (doc["n"], doc["pending"]) == (1, 0)
    actions.undo(store, "tester")
    doc = audit.report(store)
    assert (doc["n"], doc["pending"]) == (0, 1)
    assert actions.next_queue(store, 1).rows[0].key == head.key
    item = next(i for i in store.audit_items() if i.key == head.key)
    wrong = next(c for c in store.classes if c != item.predicted)
    actions.label(store, head.key, wrong, "tester")
    assert audit.report(store)["accuracy"] == 0.0  # scored against the same, earlier prediction


def test_an_audit_needs_a_model_and_enough_candidates(tmp_path):
    store, truth = _store(tmp_path / "iris.db", load_iris(), ["setosa", "versicolor", "virginica"])
    with store:
        with pytest.raises(audit.NoModelForAuditError, match="no model yet"):
            audit.draw(store, 5, "tester")
        _label_head(store, truth, 6)
        with pytest.raises(Exception, match="only 144 unlabelled"):
            audit.draw(store, 145, "tester")
        assert store.audit_items() == []  # nothing changed


def test_the_draw_is_seeded_and_uniform_over_the_unlabelled(iris):
    store, _ = iris
    copy = store.path.with_name("copy.db")
    _copy(store.path, copy)
    first = store.draw_audit(10, "tester", seed=42)
    with Store.open(copy) as other:
        second = other.draw_audit(10, "tester", seed=42)
        assert [i.key for i in other.audit_items()] == [i.key for i in store.audit_items()]
    assert first.seed == second.seed == 42 and first.drawn_from == 144
    labelled = {r.key for r in store.current_labels()}
    assert not labelled & {i.key for i in store.audit_items()}


def test_the_audit_interval_covers_the_true_pool_accuracy(tmp_path):
    """Coverage of the 95% Wilson interval (issue 11 acceptance): a fixed model (the fit after 10
    labels, never refitted: labels go in through the store, which does no model work), its true
    accuracy over the unlabelled pool known from the data's own classes; 100 seeded audits of
    40 items each; the interval must cover the pool accuracy in at least 90 of them."""
    store, truth = _store(tmp_path / "base.db", load_breast_cancer(), ["malignant", "benign"])
    with store:
        _label_head(store, truth, 10)
        classes = store.classes
        labelled = {r.candidate_id for r in store.current_labels()}
        right = []
        for chunk in store.scores():
            keys = store.keys(chunk.candidate_id)
            for cid, key, k in zip(chunk.candidate_id, keys, chunk.predicted):
                if int(cid) not in labelled:
                    right.append(classes[int(k)] == truth[key])
        pool_accuracy = float(np.mean(right))
    assert 0.6 < pool_accuracy < 0.99  # an informative case: neither trivial nor hopeless
    covered = 0
    for seed in range(100):
        path = tmp_path / f"rep{seed}.db"
        _copy(tmp_path / "base.db", path)
        with Store.open(path) as rep:
            rep.draw_audit(40, "auditor", seed=seed)
            for item in rep.audit_items():
                rep.label(item.key, truth[item.key], "auditor")  # store only: the model stays fixed
            doc = audit.report(rep)
        assert doc["n"] == 40
        covered += doc["low"] <= pool_accuracy <= doc["high"]
        path.unlink()
    assert covered >= 90
