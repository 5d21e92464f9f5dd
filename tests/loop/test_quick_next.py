"""The quick read path of `labelq next` (labelq.loop.quick) gives exactly what the full path
gives, gives up whenever the store is not current, and loads neither SQLAlchemy nor NumPy.

Data: scikit-learn's bundled iris data (3 classes); the true species answers for the labeller.
What "the same queue" means is this project's contract (DESIGN.md, `next --json`).
"""

import json
import os
import subprocess
import sys

import numpy as np
import pytest
from sklearn.datasets import load_iris

from labelq.loop import actions
from labelq.loop.quick import quick_next_queue
from labelq.store import Store

CLASSES = ["setosa", "versicolor", "virginica"]


@pytest.fixture
def iris_store(tmp_path):
    X, y = load_iris(return_X_y=True)
    names = np.array(CLASSES)[y]
    store = Store.create(tmp_path / "iris.db", CLASSES)
    keys = [f"i{i:03d}" for i in range(len(y))]
    store.add_candidates(keys, X, [{"row": i} for i in range(len(keys))], ["sl", "sw", "pl", "pw"])
    with store:
        truth = dict(zip(keys, names))
        for _ in range(6):
            head = actions.next_queue(store, 1).rows[0]
            actions.label(store, head.key, truth[head.key], "tester")
        yield store, truth


def _as_tuples(queue):
    return [(r.rank, r.candidate_id, r.key, r.predicted, tuple(float(p) for p in r.probabilities),
             float(r.p_top), float(r.score), r.meta, r.skipped, r.reason) for r in queue.rows]


def test_quick_path_gives_the_full_paths_queue(iris_store):
    store, truth = iris_store
    store.skip(actions.next_queue(store, 3).rows[2].key, "tester")
    actions.next_queue(store, 1, holder="ann")  # refit after the skip; ann holds the head
    full = actions.next_queue(store, 150, holder="bob")  # the whole queue, skipped row last
    found = quick_next_queue(store.path, 150, None, "bob")
    assert found is not None
    classes, quick = found
    assert classes == CLASSES
    assert _as_tuples(quick) == _as_tuples(full)
    assert any(r.skipped for r in quick.rows)
    assert (quick.strategy, quick.cold_start, quick.fit.id, quick.held, quick.held_until) == (
        full.strategy, full.cold_start, full.fit.id, full.held, full.held_until)
    assert quick.held == 1  # ann's claim, counted for bob


def test_quick_path_claims_the_head_like_the_full_path(iris_store):
    store, _ = iris_store
    _, first = quick_next_queue(store.path, 1, None, "ann")
    _, second = quick_next_queue(store.path, 1, None, "bob")
    assert first.rows[0].key != second.rows[0].key  # ann's head is held back from bob
    assert second.held == 1
    again = actions.next_queue(store, 1, holder="bob")
    assert again.rows[0].key == second.rows[0].key


def test_quick_path_gives_up_when_anything_is_not_current(iris_store, tmp_path):
    store, truth = iris_store
    assert quick_next_queue(tmp_path / "missing.db", 5, None, "ann") is None
    (tmp_path / "text.db").write_text("not a database")
    assert quick_next_queue(tmp_path / "text.db", 5, None, "ann") is None
    assert quick_next_queue(store.path, 5, "entropy", "ann") is None  # ranked by margin
    key = actions.next_queue(store, 1).rows[0].key
    store.label(key, truth[key], "tester")  # an event after the last fit, no refit yet
    assert quick_next_queue(store.path, 5, None, "ann") is None
    actions.next_queue(store, 1)  # refits
    assert quick_next_queue(store.path, 5, None, "ann") is not None


def test_quick_path_gives_up_on_a_store_at_an_older_revision(iris_store):
    store, _ = iris_store
    import sqlite3
    with sqlite3.connect(store.path) as db:
        db.execute("UPDATE alembic_version SET version_num = '0003'")
    assert quick_next_queue(store.path, 5, None, "ann") is None


def _run(code, cwd, env_extra=None):
    env = {**os.environ, **(env_extra or {})}
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=cwd,
                          env=env, check=True).stdout


PROBE = """
import sys
from labelq.cli.app import main
sys.argv = {argv!r}
try:
    main()
except SystemExit:
    pass
heavy = sorted(m for m in ("sqlalchemy", "numpy", "scipy", "alembic") if m in sys.modules)
print("LOADED", ",".join(heavy))
"""


def test_next_on_a_current_store_loads_no_engine(iris_store, tmp_path):
    # Start-up is measured in DEVELOPERS.md; the test checks the cause, not a time.
    store, _ = iris_store
    out = _run(PROBE.format(argv=["labelq", "next", "--json", "--db", str(store.path)]), tmp_path)
    doc = json.loads(out[: out.index("LOADED")])
    assert len(doc["queue"]) == 10
    assert out.strip().endswith("LOADED")  # nothing heavy was imported


def test_version_loads_no_engine(tmp_path):
    out = _run(PROBE.format(argv=["labelq", "--version"]), tmp_path)
    assert out.startswith("labelq ") and out.strip().endswith("LOADED")


def test_next_on_a_stale_store_takes_the_full_path(iris_store, tmp_path):
    store, truth = iris_store
    key = actions.next_queue(store, 1).rows[0].key
    store.label(key, truth[key], "tester")
    out = _run(PROBE.format(argv=["labelq", "next", "--json", "--db", str(store.path)]), tmp_path)
    assert "sqlalchemy" in out.split("LOADED")[1]
    doc = json.loads(out[: out.index("LOADED")])
    assert doc["fit"] == store.last_fit().id and key not in [r["key"] for r in doc["queue"]]


def test_past_the_head_table_the_full_path_reads_on_in_the_score_blocks(iris_store, monkeypatch):
    """Revision 0007 keeps ranks 1..QUEUE_HEAD_ROWS as rows of `scores` (here cut to 20); a
    longer `next` gives up on the quick path and the full path continues the ranks from the score
    blocks, equal to the blocks' own ranks, skipping labelled candidates (common practice: a
    queue reads the same however it is stored)."""
    import labelq.store.fits as fits
    import labelq.store.quick as quick

    monkeypatch.setattr(fits, "QUEUE_HEAD_ROWS", 20)
    monkeypatch.setattr(quick, "QUEUE_HEAD_ROWS", 20)
    store, truth = iris_store
    head = actions.next_queue(store, 1).rows[0]
    actions.label(store, head.key, truth[head.key], "tester")  # a refit writes 20 head rows
    assert quick_next_queue(store.path, 10, None, "bob") is not None
    assert quick_next_queue(store.path, 40, None, "bob") is None
    rows = actions.next_queue(store, 40, holder="bob").rows
    assert [r.rank for r in rows] == list(range(1, 41))
    ranks = {int(c): int(r) for chunk in store.scores() for c, r in zip(chunk.candidate_id,
                                                                          chunk.rank)}
    assert all(ranks[r.candidate_id] == r.rank for r in rows)
    assert [r.rank for r in store.queue(15, offset=25, exclude_claimed=False)] == list(range(26, 41))
