"""Importing candidates and reading their features, keys and metadata back."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from labelq.store import (
    DuplicateKeyError,
    FeatureMismatchError,
    Store,
    UnknownCandidateError,
    UnknownClassError,
    UnknownKeyError,
)
from labelq.store.pool import pool_moments

from .conftest import FEATURES, orchard, table_rows


def test_first_import_sets_the_schema_and_scaling(store: Store) -> None:
    keys, X, meta = orchard(50)
    assert store.add_candidates(keys, X, meta, FEATURES) == 50
    assert store.feature_names == FEATURES
    mean, scale = store.feature_scaling()
    # population mean and std of the whole pool (common practice: numpy as the reference)
    np.testing.assert_allclose(mean, X.mean(axis=0), rtol=1e-12)
    np.testing.assert_allclose(scale, X.std(axis=0), rtol=1e-12)
    assert store.counts() == {"candidates": 50, "labelled": 0, "skipped": 0}
    assert store.event_mark() == 1


def test_scaling_is_recomputed_over_the_whole_pool_after_each_import(store: Store) -> None:
    first, second = orchard(30, seed=1), orchard(20, seed=2)
    store.add_candidates(*first, FEATURES)
    store.add_candidates(*second, FEATURES)
    X = np.vstack([first[1], second[1]])
    mean, scale = store.feature_scaling()
    np.testing.assert_allclose(mean, X.mean(axis=0), rtol=1e-12)
    np.testing.assert_allclose(scale, X.std(axis=0), rtol=1e-12)


def test_constant_feature_gets_scale_one(store: Store) -> None:
    keys, X, meta = orchard(5)
    X[:, 1] = 3.0
    store.add_candidates(keys, X, meta, FEATURES)
    assert store.feature_scaling()[1][1] == 1.0


def test_import_labels_become_label_events_by_the_importer(store: Store) -> None:
    keys, X, meta = orchard(4)
    store.add_candidates(keys, X, meta, FEATURES, labels=[None, "juice", None, "export"], by="lab")
    labels = store.current_labels()
    assert [(label.key, label.class_, label.by) for label in labels] == [
        (keys[1], "juice", "lab"),
        (keys[3], "export", "lab"),
    ]
    assert store.counts()["labelled"] == 2


def test_features_are_stored_bit_exact_and_read_in_any_order(store: Store) -> None:
    keys, X, meta = orchard(7)
    X[0, 0] = np.nextafter(1.0, 2.0)
    store.add_candidates(keys, X, meta, FEATURES)
    ids = store.pool_ids()
    assert ids.dtype == np.int64 and ids.tolist() == list(range(1, 8))
    order = [5, 1, 7, 1]
    np.testing.assert_array_equal(store.features(order), X[np.array(order) - 1])
    assert store.keys(order) == [keys[i - 1] for i in order]
    assert store.metas(order) == [meta[i - 1] for i in order]


def test_iter_features_yields_id_ordered_chunks(store: Store) -> None:
    keys, X, meta = orchard(25)
    store.add_candidates(keys, X, meta, FEATURES)
    chunks = list(store.iter_features(chunk_size=10))
    assert [len(ids) for ids, _ in chunks] == [10, 10, 5]
    np.testing.assert_array_equal(np.concatenate([ids for ids, _ in chunks]), np.arange(1, 26))
    np.testing.assert_array_equal(np.vstack([rows for _, rows in chunks]), X)


def test_candidate_has_features_by_name_meta_label_and_skip(pool: Store) -> None:
    record = pool.candidate("apple-0-0002")
    assert record.id == 3 and record.key == "apple-0-0002"
    assert list(record.features) == FEATURES
    assert record.meta == {"bin": "B2", "picked_on": "2026-09-14"}
    assert record.label is None and not record.skipped
    pool.skip("apple-0-0002", by="ana")
    assert pool.candidate("apple-0-0002").skipped


def test_unknown_keys_and_ids_are_named(pool: Store) -> None:
    with pytest.raises(UnknownKeyError, match="'nope'"):
        pool.candidate("nope")
    with pytest.raises(UnknownCandidateError, match="id 99"):
        pool.keys([1, 99])
    with pytest.raises(UnknownCandidateError, match="id 99"):
        pool.features([99])


def test_empty_import_adds_nothing(store: Store) -> None:
    assert store.add_candidates([], np.zeros((0, 3)), [], FEATURES) == 0
    assert store.event_mark() == 0 and store.feature_names == []


def test_duplicate_of_a_stored_key_names_the_first_and_changes_nothing(pool: Store) -> None:
    before = table_rows(pool.path)
    keys, X, meta = orchard(3, seed=9)
    keys[1], keys[2] = "apple-0-0004", "apple-0-0001"
    with pytest.raises(DuplicateKeyError, match="'apple-0-0004' is already in the store"):
        pool.add_candidates(keys, X, meta, FEATURES, labels=["juice", None, None])
    assert table_rows(pool.path) == before


def test_key_repeated_in_the_input_is_refused(store: Store) -> None:
    keys, X, meta = orchard(3)
    keys[2] = keys[0]
    with pytest.raises(DuplicateKeyError, match="appears more than once"):
        store.add_candidates(keys, X, meta, FEATURES)
    assert table_rows(store.path)["candidates"] == 0


def test_other_feature_names_are_refused_and_change_nothing(pool: Store) -> None:
    before = table_rows(pool.path)
    keys, X, meta = orchard(2, seed=5)
    with pytest.raises(FeatureMismatchError, match="sugar_brix,firmness_kgf,hue_deg"):
        pool.add_candidates(keys, X, meta, ["sugar_brix", "firmness_kgf", "hue_deg"])
    assert table_rows(pool.path) == before


def test_unknown_label_class_is_refused_and_changes_nothing(store: Store) -> None:
    before = table_rows(store.path)
    keys, X, meta = orchard(2)
    with pytest.raises(UnknownClassError, match="'cider'"):
        store.add_candidates(keys, X, meta, FEATURES, labels=["juice", "cider"])
    assert table_rows(store.path) == before
    assert store.feature_names == []


@pytest.mark.parametrize(
    "change",
    [
        lambda k, X, m: (k, X[:, :2], m),
        lambda k, X, m: (k, X[:-1], m),
        lambda k, X, m: (k, X, m[:-1]),
        lambda k, X, m: (k, np.where(X > 100, np.nan, X), m),
    ],
)
def test_malformed_imports_are_value_errors(store: Store, change) -> None:
    with pytest.raises(ValueError):
        store.add_candidates(*change(*orchard(4)), FEATURES)
    assert table_rows(store.path)["candidates"] == 0


def test_bulk_import_of_100000_by_32(store: Store) -> None:
    n, d = 100_000, 32
    X = np.random.default_rng(3).normal(size=(n, d))
    names = [f"f{j:02d}" for j in range(d)]
    store.add_candidates([f"c{i}" for i in range(n)], X, [{}] * n, names)
    assert store.counts()["candidates"] == n
    np.testing.assert_array_equal(store.features([n, 1]), X[[n - 1, 0]])
    np.testing.assert_allclose(store.feature_scaling()[0], X.mean(axis=0), atol=1e-12)


@settings(max_examples=40, deadline=None)
@given(
    rows=st.integers(1, 40),
    cuts=st.lists(st.integers(1, 39), max_size=5),
    seed=st.integers(0, 1000),
)
def test_pool_moments_match_one_pass_numpy(rows: int, cuts: list[int], seed: int) -> None:
    X = np.random.default_rng(seed).normal(5.0, 3.0, size=(rows, 3))
    bounds = sorted({c for c in cuts if c < rows})
    mean, scale = pool_moments(iter(np.split(X, bounds)))
    # Chan, Golub & LeVeque (1979) pairwise merge against numpy's direct mean/std
    np.testing.assert_allclose(mean, X.mean(axis=0), rtol=1e-12)
    np.testing.assert_allclose(scale, np.where(X.std(axis=0) > 0, X.std(axis=0), 1.0), rtol=1e-9)
