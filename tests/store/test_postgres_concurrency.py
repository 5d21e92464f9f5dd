"""Many labellers on one PostgreSQL store: processes labelling at once lose nothing and never
both give a candidate its first label; a process killed during a refit's write loses no label
and leaves no lock behind.

Data: scikit-learn's bundled breast-cancer data (569 x 30, classes malignant/benign), the true
class answering for the labeller. The properties are the store contract of DESIGN.md ("every
write in a transaction"; a killed refit never loses a label) and of labelq.store.engine (one
writer of events at a time, checks after the lock); common practice, no published source.
Processes are started with multiprocessing's "spawn" (fresh interpreters, as separate terminals);
their code is the WORKER and KILLED texts below, run with exec, as this module cannot be
imported by name in a child (tests run with --import-mode=importlib).
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import threading
import time

import pytest
from sklearn.datasets import load_breast_cancer
from sqlalchemy import text

from labelq.loop.refit import ensure_fit
from labelq.store import AlreadyLabelledError, Store
from labelq.store.engine import DERIVED, bump_event_mark, writing

PROCESSES = 4
PER_PROCESS = 50
POOL = 300

WORKER = """
import traceback

try:
    from labelq.loop import actions
    from labelq.loop.refit import ensure_fit
    from labelq.store import Store

    with Store.open(url) as store:
        start.wait(timeout=300)
        for key, cls in work:
            actions.label(store, key, cls, who)
        labelled.wait(timeout=600)  # every process has given all its labels
        fit = ensure_fit(store)
        results.put((who, fit.n_labels, store.counts()["labelled"], None))
except BaseException:
    results.put((who, None, None, traceback.format_exc()))
"""

KILLED = """
import time
import labelq.store.fits as fits
from labelq.loop import actions
from labelq.store import Store

real_bulk_insert = fits.bulk_insert

def insert_then_stall(*args, **kwargs):
    # the refit's rows are written but not committed when the process is killed
    real_bulk_insert(*args, **kwargs)
    in_write.set()
    time.sleep(600)

fits.bulk_insert = insert_then_stall
with Store.open(url) as store:
    actions.label(store, key, cls, "killed")
"""


@pytest.fixture
def cancer():
    return load_breast_cancer()


def _cancer_store(url, cancer, n: int) -> list[tuple[str, str]]:
    """The first ``n`` rows imported into a new store at ``url``; (key, true class) per row."""
    names = [str(c) for c in cancer.target_names]
    keys = [f"c{i:04d}" for i in range(n)]
    with Store.create(url, names) as store:
        store.add_candidates(keys, cancer.data[:n], [{} for _ in keys],
                             [f"f{j:02d}" for j in range(cancer.data.shape[1])])
    return [(k, names[cancer.target[i]]) for i, k in enumerate(keys)]


def _spawn(source: str, **names):
    """A started process (spawn) running ``source`` with ``names`` as its globals."""
    process = multiprocessing.get_context("spawn").Process(target=exec, args=(source, names))
    process.start()
    return process


@pytest.fixture
def child_settings(monkeypatch):
    """Children get one BLAS thread each (two cores are shared) and give up a lock wait after a
    minute instead of hanging the run (libpq reads PGOPTIONS)."""
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        monkeypatch.setenv(var, "1")
    monkeypatch.setenv("PGOPTIONS", "-c lock_timeout=60000")


@pytest.mark.slow
def test_four_processes_label_at_once_without_loss_or_duplicates(pg_database, cancer, child_settings):
    """Four processes each label 50 distinct candidates through actions.label (commit, then
    refit) at the same time: afterwards 200 label events, one per candidate, with 200 distinct
    event marks, and each process's refit after the last label is made on all 200 labels."""
    rows = _cancer_store(pg_database, cancer, POOL)
    url = pg_database.render_as_string(hide_password=False)
    context = multiprocessing.get_context("spawn")
    start, labelled = context.Barrier(PROCESSES), context.Barrier(PROCESSES)
    results = context.Queue()
    work = {f"p{p}": rows[p:PROCESSES * PER_PROCESS:PROCESSES] for p in range(PROCESSES)}
    processes = [_spawn(WORKER, url=url, who=who, work=w, start=start, labelled=labelled,
                        results=results) for who, w in work.items()]
    reports = [results.get(timeout=900) for _ in processes]
    for process in processes:
        process.join(timeout=60)
    assert [r[3] for r in reports] == [None] * PROCESSES, [r[3] for r in reports if r[3]]
    assert all(p.exitcode == 0 for p in processes)
    assert sorted((who, n_fit, n_labelled) for who, n_fit, n_labelled, _ in reports) == \
        [(who, PROCESSES * PER_PROCESS, PROCESSES * PER_PROCESS) for who in sorted(work)]

    with Store.open(pg_database) as store:
        log = store.label_event_log()
        assert len(log) == PROCESSES * PER_PROCESS and all(e["retracts_id"] is None for e in log)
        assert len({e["candidate_id"] for e in log}) == PROCESSES * PER_PROCESS  # no duplicates
        # the import took mark 1; every label its own mark after it
        assert sorted(e["mark"] for e in log) == list(range(2, 2 + PROCESSES * PER_PROCESS))
        expected = {key: cls for w in work.values() for key, cls in w}
        assert {r.key: r.class_ for r in store.current_labels()} == expected
        assert {r.key: r.by for r in store.current_labels()} == \
            {key: who for who, w in work.items() for key, _ in w}
        last = ensure_fit(store)
        assert last.n_labels == PROCESSES * PER_PROCESS and last.event_mark == store.event_mark()
        assert store.check() == []


def test_a_first_label_is_checked_after_the_write_lock(pg_database, cancer):
    """While one transaction holds the events lock and has labelled a candidate, a second
    attempt by the same labeller (say, from a second terminal) waits, then finds it labelled
    (AlreadyLabelledError), never a second "first label". (Another labeller would add a second
    opinion, tests/store/test_disputes.py.)"""
    rows = _cancer_store(pg_database, cancer, 10)
    key, cls = rows[0]
    outcome = []
    with Store.open(pg_database) as first, Store.open(pg_database) as second:
        cid = first.candidate(key).id

        def label_too():
            try:
                outcome.append(second.label(key, cls, "ana"))
            except AlreadyLabelledError as error:
                outcome.append(error)

        with writing(first._engine) as connection:
            connection.execute(
                text("INSERT INTO label_events (candidate_id, class, by, at, mark)"
                     " VALUES (:cid, :cls, 'ana', 't', :mark)"),
                {"cid": cid, "cls": cls, "mark": bump_event_mark(connection)})
            other = threading.Thread(target=label_too)
            other.start()
            other.join(timeout=1.0)
            assert other.is_alive()  # waiting for the lock this transaction holds
        other.join(timeout=60)
        assert len(outcome) == 1 and isinstance(outcome[0], AlreadyLabelledError)
        assert [e["by"] for e in first.label_event_log()] == ["ana"]


def test_a_claim_waits_for_a_claim_in_progress_and_leaves_it_alone(pg_database, cancer):
    """Two labellers claiming one candidate at once: the second claim waits for the first to
    commit, then leaves the candidate to its holder."""
    _cancer_store(pg_database, cancer, 10)
    with Store.open(pg_database) as ann, Store.open(pg_database) as ben:
        held = []
        with writing(ann._engine) as connection:
            connection.execute(text("INSERT INTO claims (candidate_id, holder, expires_at)"
                                    " VALUES (1, 'ann', '2999-01-01T00:00:00Z')"))
            other = threading.Thread(target=lambda: held.append(ben.claim([1, 2], "ben")))
            other.start()
            other.join(timeout=1.0)
            assert other.is_alive()
        other.join(timeout=60)
        assert held == [[2]]


def test_a_refit_write_in_progress_does_not_hold_up_labels(pg_database, cancer, monkeypatch):
    """While a refit's write transaction is open (the DERIVED lock held, the old scores deleted,
    nothing committed), another labeller labels, skips and claims without waiting: its store's
    connections give up a lock wait after 5 s (libpq reads PGOPTIONS), so a label that had to
    wait would fail here instead of passing late."""
    rows = _cancer_store(pg_database, cancer, 10)
    with Store.open(pg_database) as refitting:
        refitting.label(rows[0][0], rows[0][1], "ana")
        ensure_fit(refitting)
        monkeypatch.setenv("PGOPTIONS", "-c lock_timeout=5000")
        with Store.open(pg_database) as labeller, writing(refitting._engine, DERIVED) as connection:
            connection.execute(text("DELETE FROM scores"))
            labeller.label(rows[1][0], rows[1][1], "ben")
            labeller.skip(rows[2][0], "ben")
            assert labeller.claim([4], "ben") == [4]
            assert len(labeller.queue(20)) == 7  # the committed scores, less labels and claims
        assert refitting.event_marks() == [2, 3, 4]  # import 1, then two labels and a skip


@pytest.mark.slow
def test_a_process_killed_in_a_refit_write_loses_no_label_and_holds_no_lock(
        pg_database, cancer, child_settings):
    """A process labels, then is killed with SIGKILL while its refit has written (not yet
    committed) the new scores. The label stays; the server rolls the refit back, so the last
    fit and its scores are the earlier ones; and both locks are free: the next label and refit
    go through (a minute's lock timeout would fail them otherwise)."""
    rows = _cancer_store(pg_database, cancer, 100)
    with Store.open(pg_database) as store:
        for key, cls in rows[:4]:
            store.label(key, cls, "ana")
        before = ensure_fit(store)
    key, cls = rows[4]
    in_write = multiprocessing.get_context("spawn").Event()
    process = _spawn(KILLED, url=pg_database.render_as_string(hide_password=False), key=key,
                     cls=cls, in_write=in_write)
    deadline = time.monotonic() + 300
    try:
        while not in_write.wait(timeout=0.5):
            assert process.is_alive() and time.monotonic() < deadline, \
                "the child never reached the refit's write"
    finally:
        os.kill(process.pid, signal.SIGKILL)
        process.join(timeout=60)
    assert process.exitcode == -signal.SIGKILL
    with Store.open(pg_database) as store:
        assert {r.key: r.class_ for r in store.current_labels()}[key] == cls
        assert store.last_fit().id == before.id
        assert store.check() == []  # every score belongs to the earlier fit, none is missing
        store.label(rows[5][0], rows[5][1], "ana")
        after = ensure_fit(store)
        assert after.n_labels == 6 and after.id > before.id
        assert store.check() == []
