"""Two terminals on one store: two OS processes label at once, and ask for `next` at once.

Data: scikit-learn's bundled iris data (150 rows, three classes, true classes) for the labelling
race, and the first 200 rows of its breast-cancer data for `next`. The properties are
the store contract of DESIGN.md ("SQLite in WAL mode with a busy timeout; every write in a
transaction") and the claims of labelq.loop.actions.next_queue; common practice, no published
source.
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap
import time

import pytest

from labelq.loop import actions
from labelq.store import Store

POOL = 200
PER_PROCESS = 50

LABELLER = textwrap.dedent("""
    import json, sys, time
    from pathlib import Path
    from labelq.loop import actions
    from labelq.loop.refit import ensure_fit
    from labelq.store import Store

    db, who, go, total = sys.argv[1], sys.argv[2], Path(sys.argv[3]), int(sys.argv[4])
    work = json.loads(sys.argv[5])
    while not go.exists():
        time.sleep(0.01)
    with Store.open(db) as store:
        for key, cls in work:
            actions.label(store, key, cls, who)
        deadline = time.time() + 240
        while store.counts()["labelled"] < total and time.time() < deadline:
            time.sleep(0.05)
        fit = ensure_fit(store)
        queue = actions.next_queue(store, 1, holder=who)
        print(json.dumps({"who": who, "n_labels": fit.n_labels, "queue_fit_n": queue.fit.n_labels,
                          "labelled": store.counts()["labelled"]}))
""")


@pytest.fixture
def cancer_store(tmp_path, cancer):
    """A store with the first 200 breast-cancer rows, nothing labelled."""
    db = tmp_path / "two.db"
    with Store.create(db, list(cancer.target_names)) as store:
        keys = [f"c{i:04d}" for i in range(POOL)]
        store.add_candidates(keys, cancer.data[:POOL], [{} for _ in keys],
                             [f"f{j:02d}" for j in range(cancer.data.shape[1])])
    return db


@pytest.fixture
def iris_store(tmp_path, iris):
    """A store with the 150 iris rows, nothing labelled."""
    db = tmp_path / "iris.db"
    with Store.create(db, list(iris.target_names)) as store:
        keys = [f"c{i:04d}" for i in range(len(iris.target))]
        store.add_candidates(keys, iris.data, [{} for _ in keys], ["sl", "sw", "pl", "pw"])
    return db


def _run_both(procs, timeout=600):
    """Wait for both processes; when one fails, stop the other at once. Their (stdout, stderr)."""
    deadline = time.time() + timeout
    while any(p.poll() is None for p in procs.values()) and time.time() < deadline:
        if any(p.returncode not in (None, 0) for p in procs.values()):
            break
        time.sleep(0.1)
    for p in procs.values():
        if p.poll() is None:
            p.kill()
    return {who: p.communicate() for who, p in procs.items()}


@pytest.mark.slow
def test_two_processes_label_at_once_without_loss_or_lock_errors(tmp_path, iris, iris_store,
                                                                 child_env, sql):
    """Two processes each label 50 distinct iris rows (rows 0, 3, 6, ... vs 1, 4, 7, ...; true
    classes) through actions.label (commit + refit each time); common practice, no published
    source."""
    query, _ = sql
    go = tmp_path / "go"
    names = iris.target_names
    work = {who: [(f"c{i:04d}", str(names[iris.target[i]])) for i in range(start, 150, 3)]
            for who, start in (("A", 0), ("B", 1))}
    assert all(len(w) == PER_PROCESS for w in work.values())
    procs = {who: subprocess.Popen([sys.executable, "-c", LABELLER, str(iris_store), who, str(go),
                                    str(2 * PER_PROCESS), json.dumps(work[who])],
                                   stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                                   env=child_env())
             for who in work}
    time.sleep(0.5)
    go.touch()
    outputs = _run_both(procs)

    for who, p in procs.items():
        out, err = outputs[who]
        assert "database is locked" not in err, err
        assert p.returncode == 0, (who, err[-3000:])
    events = query(iris_store, "SELECT l.candidate_id, l.class, l.by FROM label_events l"
                                 " WHERE l.retracts_id IS NULL AND NOT EXISTS (SELECT 1 FROM"
                                 " label_events r WHERE r.retracts_id = l.id)")
    assert len(events) == 2 * PER_PROCESS
    assert len({cid for cid, _, _ in events}) == 2 * PER_PROCESS  # no duplicates
    assert sorted(by for _, _, by in events) == ["A"] * PER_PROCESS + ["B"] * PER_PROCESS
    for who in work:
        report = json.loads(outputs[who][0].strip().splitlines()[-1])
        # after its next refit each process sees the other's labels
        assert report["n_labels"] == report["queue_fit_n"] == 2 * PER_PROCESS, report
        assert report["labelled"] == 2 * PER_PROCESS
    with Store.open(iris_store) as store:
        assert store.check() == []
        expected = {k: c for who in work for k, c in work[who]}
        assert {r.key: r.class_ for r in store.current_labels()} == expected


@pytest.mark.slow
def test_two_people_asking_next_are_handed_different_heads(cancer_store, labelq_process):
    """`labelq next --by A --json` then `--by B` from two processes: the head shown to A is
    claimed, so B is handed another candidate (DESIGN.md claims); common practice."""
    with Store.open(cancer_store) as store:
        for i in (0, 1, 2, 3):  # two labels of each class
            store.label(f"c{i:04d}", "malignant" if i < 2 else "benign", "setup")
    a = labelq_process("next", "-n", "3", "--by", "A", "--json", db=cancer_store)
    b = labelq_process("next", "-n", "3", "--by", "B", "--json", db=cancer_store)
    assert a.returncode == 0 and b.returncode == 0, (a.stderr, b.stderr)
    qa, qb = json.loads(a.stdout)["queue"], json.loads(b.stdout)["queue"]
    assert qa[0]["key"] != qb[0]["key"]
    assert qa[0]["key"] not in [r["key"] for r in qb]
    # A asking again keeps its own claimed head
    a2 = labelq_process("next", "-n", "1", "--by", "A", "--json", db=cancer_store)
    assert json.loads(a2.stdout)["queue"][0]["key"] == qa[0]["key"]


def test_next_queue_in_process_claims_for_each_holder(cancer_store):
    """actions.next_queue(store, 1, holder=...) for A then B on two Store objects (as two
    terminals hold); common practice, no published source."""
    with Store.open(cancer_store) as s1, Store.open(cancer_store) as s2:
        for i in (0, 1, 2, 3):
            s1.label(f"c{i:04d}", "malignant" if i < 2 else "benign", "setup")
        head_a = actions.next_queue(s1, 1, holder="A").rows[0].key
        head_b = actions.next_queue(s2, 1, holder="B").rows[0].key
        assert head_a != head_b


def test_next_queue_asked_at_the_same_moment_hands_out_different_heads(cancer_store):
    """Interleaving of two terminals asking `next` at the same moment: B's whole next_queue runs
    between A's queue read and A's claim (both through the public API, two Store objects, as two
    processes would); common practice, no published source."""
    with Store.open(cancer_store) as s1, Store.open(cancer_store) as s2:
        for i in (0, 1, 2, 3):
            s1.label(f"c{i:04d}", "malignant" if i < 2 else "benign", "setup")
        actions.next_queue(s1, 1)  # the fit, so that both only read persisted scores
        seen = {}
        read_queue = s1.queue

        def queue_then_b_asks(*args, **kwargs):
            rows = read_queue(*args, **kwargs)
            seen["B"] = actions.next_queue(s2, 1, holder="B").rows[0].key
            return rows

        s1.queue = queue_then_b_asks
        head_a = actions.next_queue(s1, 1, holder="A").rows[0].key
        assert head_a != seen["B"]
