"""Issue 13's acceptance through the label loop: with bounded scoring switched on for every pool
size, the head of the queue (top 50 by each strategy the bounds serve) and the exported
probabilities equal those of a full double-precision computation, and a large pool's snapshot is
estimated from the seeded sample within its stated standard errors.

Pools: scikit-learn's bundled breast cancer data, a scikit-learn make_classification pool, and the
invented orchard demo as a binary pool (export grade against the rest) and with its three grades. The reference is computed
here from the fit's own stored model with every member predicting in double precision
(`GPClassifier.predict_pool(precision="double")`, exact by construction) and ranked by the policy's
own `rank_pool`, as a fit without bounds would rank it.
"""
from __future__ import annotations

import csv
import io

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, make_classification

from labelq.demo import FEATURES, generate
from labelq.gp import load_model
from labelq.loop import actions, reports, settings
from labelq.loop.refit import ensure_fit, load_state
from labelq.policy import PolicySettings, rank_pool, score_pool
from labelq.policy import bounded
from labelq.policy.bounded import in_double
from labelq.store import Store

HEAD = 50


def _cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X, np.array(["malignant", "benign"])[y], ["malignant", "benign"]


def _synthetic():
    X, y = make_classification(n_samples=3000, n_features=6, n_informative=4, flip_y=0.02,
                               random_state=4)
    return X, np.array(["a", "b"])[y], ["a", "b"]


def _orchard():
    rows, truth = generate(3000)
    X = np.array([[r[f] for f in FEATURES] for r in rows], dtype=float)
    grade = np.array([truth[r["key"]] for r in rows])
    return X, np.where(grade == "export", "export", "lower"), ["export", "lower"]


def _orchard_grades():
    rows, truth = generate(3000)
    X = np.array([[r[f] for f in FEATURES] for r in rows], dtype=float)
    grade = np.array([truth[r["key"]] for r in rows])
    return X, grade, sorted(set(grade))


POOLS = {"breast-cancer": _cancer, "synthetic": _synthetic, "orchard-binary": _orchard,
         "orchard-grades": _orchard_grades}  # the last one three classes: the softmax bound


@pytest.fixture(params=sorted(POOLS))
def bounded_store(request, tmp_path, monkeypatch):
    """A store of the pool with 30 labels given through the loop (true classes, both classes
    among the first ones), every fit scored with bounds (EXACT_POOL_UP_TO 0)."""
    monkeypatch.setattr(settings, "EXACT_POOL_UP_TO", 0)
    monkeypatch.setattr(settings, "EXACT_HEAD", 300)  # the spread batch reads 300 (shortlist)
    monkeypatch.setattr(settings, "SUMMARY_SAMPLE", 100)
    # refine bounds even on 30 labels, where most rows would otherwise be scored at once
    monkeypatch.setattr(bounded, "REFINE_FROM", 0)
    X, y, classes = POOLS[request.param]()
    store = Store.create(tmp_path / "pool.db", classes)
    keys = [f"c{i:05d}" for i in range(len(X))]
    store.add_candidates(keys, X, [{} for _ in keys], [f"x{j}" for j in range(X.shape[1])])
    rng = np.random.default_rng(7)
    first = [int(np.flatnonzero(y == c)[0]) for c in classes]
    picks = first + [int(i) for i in rng.choice(len(X), 28, replace=False) if i not in first][:28]
    for i in picks:
        actions.label(store, keys[i], str(y[i]), "ana")
    yield store, keys
    store.close()


def _reference(store, strategy):
    """(top-50 candidate ids, double-precision probabilities (N, C) by pool row, state)."""
    fit = store.last_fit()
    model = load_model(fit.model)
    policy = PolicySettings.from_dict(fit.settings)
    state = load_state(store)
    unlabelled = state.unlabelled()
    scores = score_pool(in_double(model), state.X, policy, strategy, unlabelled)
    queue = rank_pool(model, state.X, state.ids, scores, policy, strategy, unlabelled,
                      state.skipped, len(set(state.label_classes)), store.classes)
    top = np.argsort(np.where(queue.rank > 0, queue.rank, np.iinfo(np.int64).max))[:HEAD]
    return state.ids[top], scores.proba, state


def test_head_and_export_equal_a_full_double_computation(bounded_store):
    """For margin, entropy and random in turn (each a refit of the same labels)."""
    store, keys = bounded_store
    for strategy in ("margin", "entropy", "random"):
        ensure_fit(store, strategy)
        fit = store.last_fit()
        assert fit.info["double"] and fit.info["exact_rows"] < len(keys)  # bounds were used
        top_ids, proba, state = _reference(store, strategy)
        shown = store.queue(HEAD, exclude_claimed=False)
        assert [r.candidate_id for r in shown] == top_ids.tolist(), strategy
        for row in shown:  # the head's stored figures are the exact ones
            np.testing.assert_allclose(
                row.probabilities, proba[state.positions([row.candidate_id])[0]], atol=1e-6)
        text = reports.export(store, "predictions")
        exported = list(csv.DictReader(io.StringIO(text)))
        assert len(exported) == len(keys)
        got = np.array([[float(r[f"p_{c}"]) for c in store.classes] for r in exported])
        order = np.array([int(r["key"][1:]) for r in exported])  # keys c00000.. in pool order
        np.testing.assert_allclose(got, proba[order], atol=1e-6)  # export rounds to 6 decimals


def test_a_large_pools_snapshot_is_a_sample_estimate_within_its_errors(tmp_path, monkeypatch):
    """Above the sample size the snapshot comes from the fixed seeded sample: each figure within
    four standard errors of the exact pool-wide value, and status says so."""
    monkeypatch.setattr(settings, "EXACT_POOL_UP_TO", 0)
    monkeypatch.setattr(settings, "SUMMARY_SAMPLE", 500)
    X, y, classes = _synthetic()
    store = Store.create(tmp_path / "pool.db", classes)
    keys = [f"c{i:05d}" for i in range(len(X))]
    store.add_candidates(keys, X, [{} for _ in keys], [f"x{j}" for j in range(X.shape[1])])
    for i in [int(np.flatnonzero(y == c)[0]) for c in classes] + list(range(10, 30)):
        actions.label(store, keys[i], str(y[i]), "ana")
    snap = reports.latest_snapshot(store)
    sample = snap["sample"]
    # the bottom-500 sample of every id, less the labelled candidates among them
    assert 470 <= sample["rows"] <= 500 and sample["of"] == len(X) - store.counts()["labelled"]
    _, proba, state = _reference(store, "margin")
    p = proba[state.unlabelled()]
    top = p.max(axis=1)
    entropy = -(p * np.log2(np.clip(p, 1e-300, 1))).sum(axis=1)
    truth = {"mean_entropy": entropy.mean(), "expected_accuracy": top.mean(),
             "n_uncertain": float((top < settings.UNCERTAIN_BELOW).sum())}
    for name, value in truth.items():
        assert abs(snap[name] - value) <= 4 * sample["se"][name] + 1e-9, (name, snap[name], value)
    store.close()
