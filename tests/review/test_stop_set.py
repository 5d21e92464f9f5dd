"""Stop-set choice: deterministic, sized and stable as candidates are labelled or added."""

import numpy as np
import pytest

from labelq.review import stop_set


def test_small_pool_is_kept_whole():
    """Common practice, no published source."""
    ids = np.arange(10, dtype=np.int64)
    assert np.array_equal(stop_set(ids, size=20), ids)


def test_size_sorted_subset_and_deterministic():
    """Common practice, no published source."""
    ids = np.arange(1, 10_001, dtype=np.int64) * 3
    first = stop_set(ids, size=2000)
    assert first.dtype == np.int64 and first.size == 2000
    assert np.all(np.diff(first) > 0) and np.isin(first, ids).all()
    assert np.array_equal(first, stop_set(ids.copy(), size=2000))


def test_spread_through_the_id_order():
    """Common practice, no published source: every tenth of the ids holds ~a tenth of the set."""
    ids = np.arange(100_000, dtype=np.int64)
    chosen = stop_set(ids, size=2000)
    per_tenth = np.bincount(chosen // 10_000, minlength=10)
    assert per_tenth.min() > 140 and per_tenth.max() < 260


def test_removing_ids_replaces_only_those():
    """Bottom-k sampling (Cohen & Kaplan 2007): dropping a member swaps in exactly one new id."""
    ids = np.arange(5000, dtype=np.int64)
    before = stop_set(ids, size=500)
    gone = before[[3, 100, 400]]
    after = stop_set(np.setdiff1d(ids, gone), size=500)
    assert np.setdiff1d(before, after).tolist() == sorted(gone.tolist())
    assert np.setdiff1d(after, before).size == 3


def test_adding_ids_keeps_most_members():
    """Bottom-k sampling (Cohen & Kaplan 2007): a newcomer displaces at most one member."""
    ids = np.arange(5000, dtype=np.int64)
    before = stop_set(ids, size=500)
    after = stop_set(np.arange(5010, dtype=np.int64), size=500)
    assert np.setdiff1d(before, after).size <= 10


@pytest.mark.parametrize("ids", [np.array([3, 2, 1]), np.array([1, 1, 2]), np.array([0.5, 1.5])])
def test_rejects_unsorted_or_non_integer_ids(ids):
    """Common practice, no published source."""
    with pytest.raises(ValueError):
        stop_set(ids)
