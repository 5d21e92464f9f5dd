"""Labels, skips and undo as append-only events."""

import threading

import numpy as np
import pytest

from labelq.store import (
    AlreadyLabelledError,
    NothingToUndoError,
    Store,
    UndoRecord,
    UnknownClassError,
    UnknownKeyError,
)

from .conftest import table_rows

A, B, C = "apple-0-0000", "apple-0-0001", "apple-0-0002"


def _current(store: Store) -> dict[str, str]:
    return {label.key: label.class_ for label in store.current_labels()}


def test_label_records_who_what_and_why(pool: Store) -> None:
    event_id = pool.label(A, "export", by="ana", note="firm, red")
    (label,) = pool.current_labels()
    assert (label.event_id, label.candidate_id, label.key, label.class_) == (event_id, 1, A, "export")
    assert (label.by, label.note) == ("ana", "firm, red")
    assert label.at.endswith("Z") and len(label.at) == len("2026-12-01T22:03:10Z")
    assert pool.candidate(A).label == "export"
    assert pool.counts()["labelled"] == 1


def test_current_labels_are_ordered_by_event(pool: Store) -> None:
    pool.label(C, "juice", by="ana")
    pool.label(A, "local", by="ana")
    assert [label.key for label in pool.current_labels()] == [C, A]


def test_labelling_twice_needs_relabel(pool: Store) -> None:
    # the same labeller; another labeller adds a second opinion (tests/store/test_disputes.py)
    pool.label(A, "export", by="ana")
    before = table_rows(pool.path)
    with pytest.raises(AlreadyLabelledError, match=f"'{A}' is already labelled 'export'"):
        pool.label(A, "juice", by="ana")
    assert table_rows(pool.path) == before
    pool.label(A, "juice", by="ana", relabel=True)
    assert _current(pool) == {A: "juice"}


def test_label_errors_name_the_value_and_change_nothing(pool: Store) -> None:
    before = table_rows(pool.path)
    with pytest.raises(UnknownKeyError, match="'nope'"):
        pool.label("nope", "export", by="ana")
    with pytest.raises(UnknownClassError, match="'cider'"):
        pool.label(A, "cider", by="ana")
    assert table_rows(pool.path) == before


def test_undo_of_a_relabel_restores_the_previous_label(pool: Store) -> None:
    pool.label(A, "export", by="ana")
    pool.label(A, "juice", by="ben", relabel=True)
    assert pool.undo(by="ben") == UndoRecord(kind="label", key=A, class_="juice")
    assert _current(pool) == {A: "export"}
    assert pool.undo(by="ben") == UndoRecord(kind="label", key=A, class_="export")
    assert _current(pool) == {}
    with pytest.raises(NothingToUndoError):
        pool.undo(by="ben")


def test_undo_walks_back_across_labels_and_skips(pool: Store) -> None:
    pool.label(A, "export", by="ana")
    pool.skip(B, by="ana")
    pool.label(C, "local", by="ana")
    assert [pool.undo(by="ana").key for _ in range(3)] == [C, B, A]
    assert pool.counts() == {"candidates": 6, "labelled": 0, "skipped": 0}
    assert pool.check() == []


def test_undo_failure_changes_nothing(pool: Store) -> None:
    before = table_rows(pool.path)
    with pytest.raises(NothingToUndoError, match="nothing to undo"):
        pool.undo(by="ana")
    assert table_rows(pool.path) == before


def test_skip_is_idempotent_and_refused_for_labelled(pool: Store) -> None:
    first = pool.skip(B, by="ana")
    mark = pool.event_mark()
    assert pool.skip(B, by="ben") == first
    assert pool.event_mark() == mark
    np.testing.assert_array_equal(pool.skipped_ids(), [2])
    pool.label(A, "juice", by="ana")
    before = table_rows(pool.path)
    with pytest.raises(AlreadyLabelledError, match=A):
        pool.skip(A, by="ana")
    assert table_rows(pool.path) == before


def test_unskip_retracts_the_skip(pool: Store) -> None:
    pool.skip(B, by="ana")
    assert pool.unskip(B, by="ana") is not None
    assert pool.unskip(B, by="ana") is None
    assert pool.skipped_ids().size == 0 and not pool.candidate(B).skipped


def test_labelling_a_skipped_candidate_unskips_it(pool: Store) -> None:
    pool.skip(B, by="ana")
    pool.label(B, "local", by="ana")
    assert pool.skipped_ids().size == 0
    assert pool.counts() == {"candidates": 6, "labelled": 1, "skipped": 0}
    assert pool.undo(by="ana").kind == "label"
    assert pool.candidate(B).label is None and not pool.candidate(B).skipped


def test_event_mark_grows_with_every_event(pool: Store) -> None:
    marks = [pool.event_mark()]
    for act in (
        lambda: pool.label(A, "export", by="ana"),
        lambda: pool.skip(B, by="ana"),
        lambda: pool.unskip(B, by="ana"),
        lambda: pool.undo(by="ana"),
        lambda: pool.label(A, "local", by="ana", relabel=True),
    ):
        act()
        marks.append(pool.event_mark())
    assert marks == sorted(set(marks))


def test_two_writers_at_once_do_not_hit_database_is_locked(pool: Store) -> None:
    failures: list[BaseException] = []

    def work(keys: list[str], name: str) -> None:
        with Store.open(pool.path) as store:
            try:
                for _ in range(15):
                    for key in keys:
                        store.label(key, "juice", by=name, relabel=True)
                        store.counts()
                    store.undo(by=name)
            except BaseException as error:  # collected for the assertion below
                failures.append(error)

    threads = [
        threading.Thread(target=work, args=([A, B], "ana")),
        threading.Thread(target=work, args=([C, "apple-0-0003"], "ben")),
    ]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert failures == []
    assert pool.check() == []
