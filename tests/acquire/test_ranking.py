"""Tests for labelq.acquire.rank_order (common practice, no published source)."""

import numpy as np
import pytest

from labelq.acquire import rank_order


def test_priority_descending_then_id_ascending_then_skipped_last():
    priority = np.array([0.5, 0.9, 0.5, 0.9, 0.1, 0.95])
    ids = np.array([30, 20, 10, 40, 50, 60])
    skipped = np.array([False, False, False, False, False, True])
    order = rank_order(priority, ids, skipped)
    # By hand: 0.9 (ids 20, 40), 0.5 (ids 10, 30), 0.1 (id 50), then the skipped 0.95 (id 60).
    np.testing.assert_array_equal(ids[order], [20, 40, 10, 30, 50, 60])


def test_skipped_are_ordered_the_same_way_among_themselves():
    priority = np.array([0.2, 0.8, 0.8, 0.5])
    ids = np.array([4, 3, 2, 1])
    order = rank_order(priority, ids, np.array([True, True, True, False]))
    np.testing.assert_array_equal(ids[order], [1, 2, 3, 4])


def test_order_does_not_depend_on_input_order():
    rng = np.random.default_rng(0)
    priority = rng.integers(0, 4, 200).astype(float)  # many ties
    ids = rng.permutation(1000)[:200]
    skipped = rng.random(200) < 0.2
    expected = ids[rank_order(priority, ids, skipped)]
    shuffle = rng.permutation(200)
    got = ids[shuffle][rank_order(priority[shuffle], ids[shuffle], skipped[shuffle])]
    np.testing.assert_array_equal(got, expected)


def test_no_skips_by_default_and_bad_inputs_named():
    np.testing.assert_array_equal(rank_order([1.0, 2.0], [0, 1]), [1, 0])
    with pytest.raises(ValueError, match="nan"):
        rank_order([1.0, np.nan], [0, 1])
    with pytest.raises(ValueError, match="ids shape"):
        rank_order([1.0, 2.0], [0, 1, 2])
    with pytest.raises(ValueError, match="skipped_mask"):
        rank_order([1.0, 2.0], [0, 1], [1, 0])
