"""Classes given by name in any case or by number, one candidate's label history, and undo of one
candidate's label or skip.

The expected classes, messages, event kinds and orders are this project's contracts (issue 11,
"Review and correction"; DESIGN.md's one-line errors), checked as stated there: common practice,
no outside source. Candidates are the first rows of scikit-learn's bundled iris data (features
only; the apple grades are the store fixture's class names). A refused call is checked to leave
every table and the event mark unchanged (conftest.table_rows).
"""

import pytest
from sklearn.datasets import load_iris

from labelq.store import AlreadyLabelledError, NothingToUndoError, Store, UnknownClassError, UnknownKeyError
from labelq.store.classes import resolve_class

from .conftest import table_rows

GRADES = ["export", "local", "juice"]
LISTING = "(classes: 1 export, 2 local, 3 juice)"


@pytest.fixture
def iris_pool(store: Store) -> Store:
    """The store fixture (classes export, local, juice) holding iris rows 0-5 as i0 .. i5."""
    data = load_iris()
    names = [name.replace(" ", "_") for name in data.feature_names]
    store.add_candidates([f"i{i}" for i in range(6)], data.data[:6], [{}] * 6, names)
    return store


def _current(store: Store) -> dict[str, str]:
    return {label.key: label.class_ for label in store.current_labels()}


# --- resolve_class -------------------------------------------------------------------------


@pytest.mark.parametrize("given", ["juice", "Juice", "JUICE", "jUiCe", "3"])
def test_name_in_any_case_or_number_resolves(given):
    assert resolve_class(given, GRADES) == "juice"


def test_numbers_follow_the_init_order():
    assert [resolve_class(str(k), GRADES) for k in (1, 2, 3)] == GRADES


def test_exact_name_wins_over_a_number():
    # a class literally named "2" is that class even where 2 is another class's number
    assert resolve_class("2", ["1", "2"]) == "2"
    assert resolve_class("2", ["2", "1"]) == "2"
    assert resolve_class("1", ["2", "1"]) == "1"
    with pytest.raises(UnknownClassError):
        resolve_class("3", ["2", "1"])


def test_exact_name_wins_over_a_case_insensitive_match():
    assert resolve_class("Juice", ["juice", "Juice"]) == "Juice"


def test_a_name_matching_two_classes_when_case_is_ignored_is_refused():
    with pytest.raises(UnknownClassError, match="matches 'juice' and 'Juice' when case is ignored"):
        resolve_class("JUICE", ["juice", "Juice"])


def test_unknown_class_suggests_the_close_name_and_lists_the_classes():
    with pytest.raises(UnknownClassError) as caught:
        resolve_class("jiuce", GRADES)
    assert str(caught.value) == f"unknown class 'jiuce'; did you mean 'juice'? {LISTING}"
    with pytest.raises(UnknownClassError) as caught:
        resolve_class("JIUCE", GRADES)
    assert "did you mean 'juice'?" in str(caught.value)


@pytest.mark.parametrize("given", ["cider", "0", "4", "-1", "", "\uff13"])  # \uff13: fullwidth 3
def test_unknown_class_without_a_close_name_lists_the_classes(given):
    with pytest.raises(UnknownClassError) as caught:
        resolve_class(given, GRADES)
    assert str(caught.value) == f"unknown class {given!r} {LISTING}"


# --- Store.label ---------------------------------------------------------------------------


def test_label_stores_the_resolved_name(iris_pool: Store) -> None:
    iris_pool.label("i0", "JUICE", by="ana")
    iris_pool.label("i1", "2", by="ana")
    iris_pool.label("i2", "Export", by="ana")
    assert _current(iris_pool) == {"i0": "juice", "i1": "local", "i2": "export"}


def test_unknown_class_changes_nothing(iris_pool: Store) -> None:
    before = table_rows(iris_pool.path)
    with pytest.raises(UnknownClassError, match="did you mean 'juice'"):
        iris_pool.label("i0", "jiuce", by="ana")
    assert table_rows(iris_pool.path) == before


def test_labelling_twice_names_relabel(iris_pool: Store) -> None:
    iris_pool.label("i0", "export", by="ana")
    before = table_rows(iris_pool.path)
    with pytest.raises(AlreadyLabelledError) as caught:
        iris_pool.label("i0", "juice", by="ana")
    assert str(caught.value) == (
        "candidate 'i0' is already labelled 'export'; use --relabel to replace the label"
    )
    assert table_rows(iris_pool.path) == before


# --- item_history --------------------------------------------------------------------------


def test_history_lists_labels_relabels_skips_and_undos_oldest_first(iris_pool: Store) -> None:
    iris_pool.skip("i0", by="ben")
    iris_pool.label("i0", "local", by="ana", note="soft")  # retracts the skip in the same write
    iris_pool.label("i0", "juice", by="ben", relabel=True, note="bruised")
    iris_pool.undo(by="ana", key="i0")
    iris_pool.label("i1", "export", by="ana")  # another candidate's events stay out
    history = iris_pool.item_history("i0")
    assert [(e["kind"], e["class"], e["by"], e["note"]) for e in history] == [
        ("skip", None, "ben", None),
        ("label", "local", "ana", "soft"),
        ("undo-skip", None, "ana", None),
        ("label", "juice", "ben", "bruised"),
        ("undo-label", "juice", "ana", None),
    ]
    assert all(e["at"].endswith("Z") for e in history)
    assert [e["at"] for e in history] == sorted(e["at"] for e in history)
    assert iris_pool.item_history("i2") == []
    with pytest.raises(UnknownKeyError, match="'nope'"):
        iris_pool.item_history("nope")


# --- undo of one candidate -----------------------------------------------------------------


def test_undo_key_takes_back_a_label_that_is_not_the_latest(iris_pool: Store) -> None:
    iris_pool.label("i0", "export", by="ana")
    iris_pool.label("i1", "local", by="ana")
    iris_pool.skip("i2", by="ana")
    record = iris_pool.undo(by="ben", key="i0")
    assert (record.kind, record.key, record.class_) == ("label", "i0", "export")
    assert _current(iris_pool) == {"i1": "local"}
    assert iris_pool.counts()["skipped"] == 1
    # the plain undo still takes back the latest event (the skip of i2)
    assert iris_pool.undo(by="ben").key == "i2"


def test_undo_key_of_a_relabel_brings_back_the_earlier_label(iris_pool: Store) -> None:
    iris_pool.label("i0", "export", by="ana")
    iris_pool.label("i0", "juice", by="ben", relabel=True)
    iris_pool.label("i1", "local", by="ana")
    assert iris_pool.undo(by="ana", key="i0").class_ == "juice"
    assert _current(iris_pool) == {"i0": "export", "i1": "local"}
    assert iris_pool.undo(by="ana", key="i0").class_ == "export"
    assert _current(iris_pool) == {"i1": "local"}


def test_undo_key_takes_back_a_skip(iris_pool: Store) -> None:
    iris_pool.skip("i3", by="ana")
    iris_pool.label("i0", "export", by="ana")
    record = iris_pool.undo(by="ana", key="i3")
    assert (record.kind, record.key, record.class_) == ("skip", "i3", None)
    assert iris_pool.counts()["skipped"] == 0
    assert _current(iris_pool) == {"i0": "export"}


def test_undo_key_with_nothing_to_take_back_changes_nothing(iris_pool: Store) -> None:
    iris_pool.label("i0", "export", by="ana")
    iris_pool.undo(by="ana", key="i0")
    before = table_rows(iris_pool.path)
    for key in ("i0", "i1"):
        with pytest.raises(NothingToUndoError) as caught:
            iris_pool.undo(by="ana", key=key)
        assert str(caught.value) == f"nothing to undo for candidate {key!r}: it has no label or skip"
    with pytest.raises(UnknownKeyError, match="'nope'"):
        iris_pool.undo(by="ana", key="nope")
    assert table_rows(iris_pool.path) == before
