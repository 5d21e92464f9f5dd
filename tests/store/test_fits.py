"""Fits, the scores behind the queue, snapshots, sessions and claims."""

from typing import Any, Optional

import numpy as np
import pytest
from labelq.store import Store, UnknownSessionError

from .conftest import execute_sql, table_rows


def _fit(
    store: Store, ranks: list[Optional[int]], session_id: Optional[int] = None, kappa: Optional[float] = None
) -> int:
    """Record a fit over the whole pool with made-up probabilities; rank None/-1 = not queued."""
    ids = store.pool_ids()
    n = len(ids)
    rng = np.random.default_rng(len(store.fits()))
    proba = rng.dirichlet(np.ones(3), size=n)
    fit: dict[str, Any] = {
        "session_id": session_id,
        "n_labels": 2,
        "strategy": "entropy",
        "hyperparameters": {"lengthscale": [1.0, 2.0], "signal_variance": 1.5},
        "log_marginal_likelihood": -3.25,
        "seconds": 0.12,
        "event_mark": store.event_mark(),
        "model": {"kind": "laplace", "alpha": [0.1, -0.2]},
        "warnings": ["lengthscale reached its upper bound"],
        "full_optimize": True,
    }
    top = proba.max(axis=1)
    snapshot = {
        "mean_entropy": 0.8,
        "n_uncertain": 3,
        "expected_accuracy": float(top.mean()),
        "agreement_kappa": kappa,
        "class_counts": {"export": 2, "local": 3, "juice": 1},
    }
    return store.record_fit(
        fit,
        ids,
        proba,
        proba.argmax(axis=1),
        top,
        top - 0.1,
        np.minimum(top + 0.1, 1.0),
        1.0 - top,
        top,
        0.5 * top,
        1.0 - top,
        ranks,
        snapshot,
    )


def test_record_fit_and_read_it_back(pool: Store) -> None:
    session = pool.start_session("ana")
    fit_id = _fit(pool, [1, 2, 3, 4, 5, 6], session_id=session)
    fit = pool.last_fit()
    assert fit is not None and fit.id == fit_id and fit.session_id == session
    assert fit.hyperparameters == {"lengthscale": [1.0, 2.0], "signal_variance": 1.5}
    assert fit.model == {"kind": "laplace", "alpha": [0.1, -0.2]}
    assert fit.warnings == ["lengthscale reached its upper bound"]
    assert fit.full_optimize is True and fit.log_marginal_likelihood == -3.25
    assert [f.model for f in pool.fits()] == [None]
    assert pool.fits(with_model=True) == [fit]


def test_a_new_fit_replaces_all_scores(pool: Store) -> None:
    _fit(pool, [1, 2, 3, 4, 5, 6])
    second = _fit(pool, [6, 5, 4, 3, 2, 1])
    assert table_rows(pool.path)["scores"] == 6
    assert [row.rank for row in pool.queue(3)] == [1, 2, 3]
    assert pool.queue(1)[0].candidate_id == 6
    assert pool.check() == []
    assert [s["fit_id"] for s in pool.snapshots()] == [1, second]


def test_snapshots_carry_their_fit(pool: Store) -> None:
    session = pool.start_session("ana")
    _fit(pool, [1, 2, 3, 4, 5, 6], session_id=session)
    _fit(pool, [1, 2, 3, 4, 5, 6], session_id=session, kappa=0.7)
    first, second = pool.snapshots()
    assert first["agreement_kappa"] is None and second["agreement_kappa"] == 0.7
    assert first["session_id"] == session and first["n_labels"] == 2 and first["strategy"] == "entropy"
    assert first["class_counts"] == {"export": 2, "local": 3, "juice": 1}
    assert set(first) >= {"fit_id", "at", "mean_entropy", "n_uncertain", "expected_accuracy"}


def test_queue_skips_labelled_pages_by_offset_and_decodes_rows(pool: Store) -> None:
    pool.label("apple-0-0000", "export", by="ana")
    _fit(pool, [-1, 1, 2, 3, 4, None])
    pool.label("apple-0-0001", "juice", by="ana")
    rows = pool.queue(10)
    assert [row.key for row in rows] == ["apple-0-0002", "apple-0-0003", "apple-0-0004"]
    assert [row.key for row in pool.queue(2, offset=1)] == ["apple-0-0003", "apple-0-0004"]
    row = rows[0]
    assert row.probabilities.shape == (3,) and row.probabilities.sum() == pytest.approx(1.0)
    assert row.predicted == int(row.probabilities.argmax()) and row.p_top == pytest.approx(
        row.probabilities.max()
    )
    assert row.meta == {"bin": "B2", "picked_on": "2026-09-14"}


def test_queue_is_empty_before_any_fit(pool: Store) -> None:
    assert pool.queue(5) == []
    assert pool.last_fit() is None
    assert list(pool.scores()) == []


def test_claims_hide_candidates_from_other_holders_until_released_or_expired(pool: Store) -> None:
    _fit(pool, [1, 2, 3, 4, 5, 6])
    assert pool.claim([1, 2], "ana") == [1, 2]
    assert pool.claim([2, 3], "ben") == [3]
    assert [row.candidate_id for row in pool.queue(3, holder="ben")] == [3, 4, 5]
    assert [row.candidate_id for row in pool.queue(3, holder="ana")] == [1, 2, 4]
    assert [row.candidate_id for row in pool.queue(2, exclude_claimed=False)] == [1, 2]
    assert pool.release("ana", [1]) == 1
    assert [row.candidate_id for row in pool.queue(2, holder="ben")] == [1, 3]
    assert pool.claim([4], "ana", seconds=0) == [4]
    assert [row.candidate_id for row in pool.queue(3, holder="ben")] == [1, 3, 4]
    assert pool.release("ana") == 2


def test_scores_export_in_chunks_by_candidate_id(pool: Store) -> None:
    _fit(pool, [1, 2, -1, 3, 4, 5])
    chunks = list(pool.scores(chunk_size=4))
    assert [len(chunk.candidate_id) for chunk in chunks] == [4, 2]
    rank = np.concatenate([chunk.rank for chunk in chunks])
    np.testing.assert_array_equal(rank, [1, 2, -1, 3, 4, 5])
    (some,) = pool.scores(ids=[5, 2, 99])
    np.testing.assert_array_equal(some.candidate_id, [2, 5])
    assert some.probabilities.shape == (2, 3)
    np.testing.assert_array_equal(some.predicted, some.probabilities.argmax(axis=1))


def test_predictions_for_follows_the_given_order(pool: Store) -> None:
    assert pool.predictions_for([1, 2]).tolist() == [-1, -1]
    _fit(pool, [1, 2, 3, 4, 5, 6])
    (chunk,) = pool.scores()
    expected = dict(zip(chunk.candidate_id.tolist(), chunk.predicted.tolist()))
    assert pool.predictions_for([3, 1, 42]).tolist() == [expected[3], expected[1], -1]


def test_clear_derived_keeps_labels(pool: Store) -> None:
    pool.label("apple-0-0000", "export", by="ana")
    _fit(pool, [-1, 1, 2, 3, 4, 5])
    pool.clear_derived()
    rows = table_rows(pool.path)
    assert rows["fits"] == rows["scores"] == rows["snapshots"] == 0
    assert len(pool.current_labels()) == 1 and pool.last_fit() is None


def test_fit_with_unknown_session_changes_nothing(pool: Store) -> None:
    _fit(pool, [1, 2, 3, 4, 5, 6])
    before = table_rows(pool.path)
    with pytest.raises(UnknownSessionError, match="id 77"):
        _fit(pool, [1, 2, 3, 4, 5, 6], session_id=77)
    assert table_rows(pool.path) == before


def test_fit_with_wrong_shapes_is_a_value_error(pool: Store) -> None:
    with pytest.raises(ValueError, match="6 entries"):
        _fit(pool, [1, 2, 3])
    assert table_rows(pool.path)["fits"] == 0


def test_sessions_start_and_end(store: Store) -> None:
    first = store.start_session("ana")
    second = store.start_session("ben")
    store.end_session(first)
    sessions = store.sessions()
    assert [s["id"] for s in sessions] == [first, second]
    assert sessions[0]["ended_at"] is not None and sessions[1]["ended_at"] is None
    assert sessions[1]["by"] == "ben"
    with pytest.raises(UnknownSessionError, match="id 9"):
        store.end_session(9)


def test_check_reports_broken_events_and_stray_scores(pool: Store) -> None:
    pool.label("apple-0-0000", "export", by="ana")
    _fit(pool, [-1, 1, 2, 3, 4, 5])
    _fit(pool, [-1, 1, 2, 3, 4, 5])
    assert pool.check() == []
    execute_sql(
        pool.path,
        "UPDATE scores SET fit_id = 1 WHERE candidate_id = 2",
        "INSERT INTO label_events (candidate_id, by, at, mark, retracts_id) VALUES (2, 'x', 't', 9, 1)",
    )
    problems = pool.check()
    assert "1 scores do not belong to the last fit" in problems
    assert "1 retractions in label_events do not point at an earlier event of their candidate" in problems


@pytest.mark.sqlite_only("a PostgreSQL server refuses rows that break a foreign key, so there are "
                         "no orphans to find; SQLite lets a connection without the store's settings "
                         "write them")
def test_check_reports_orphans(pool: Store) -> None:
    execute_sql(pool.path,
                "INSERT INTO claims (candidate_id, holder, expires_at) VALUES (404, 'x', 't')")
    assert "1 rows of claims point at missing rows of candidates" in pool.check()
