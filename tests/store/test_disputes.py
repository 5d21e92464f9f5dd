"""Disputes between labellers and double-labelled audits (issue 14), on each back end.

The rules are this project's (labelq.store.disputes): a second labeller's different class keeps
both events, marks the candidate disputed and takes it out of the current labels (the training
set) until a resolving label; an undo of either label closes the dispute. Data: six invented
apples (conftest), the demo scenario's own kind of data, used here only as keys.
"""

import pytest

from labelq.store import AlreadyLabelledError, Store
from labelq.store.disputes import DisputedError, NotDisputedError

KEY = "apple-0-0001"


def current(store: Store) -> dict:
    return {r.key: r.class_ for r in store.current_labels()}


def test_two_labellers_two_classes_listed_excluded_then_resolved(pool: Store) -> None:
    pool.label(KEY, "export", "ann")
    pool.label("apple-0-0002", "juice", "ann")
    pool.label(KEY, "local", "bob")  # a second opinion, not an error
    assert pool.is_disputed(KEY)
    [d] = pool.disputes()
    assert (d["key"], d["first"]["class"], d["first"]["by"], d["second"]["class"],
            d["second"]["by"]) == (KEY, "export", "ann", "local", "bob")
    assert KEY not in current(pool) and current(pool)["apple-0-0002"] == "juice"
    assert KEY not in {r.key for r in pool.labels_as_of(pool.event_mark())}
    assert pool.counts()["labelled"] == 2  # still labelled: not offered again
    with pytest.raises(DisputedError, match="--resolve"):
        pool.label(KEY, "juice", "cy")
    pool.label(KEY, "local", "cy", resolve=True)
    assert not pool.is_disputed(KEY) and pool.disputes() == []
    assert current(pool)[KEY] == "local"
    pool.undo("cy")  # taking back the resolution opens the dispute again
    assert pool.is_disputed(KEY) and KEY not in current(pool)


def test_agreement_opens_no_dispute_and_the_same_labeller_still_needs_relabel(pool: Store) -> None:
    pool.label(KEY, "export", "ann")
    pool.label(KEY, "export", "bob")
    assert not pool.is_disputed(KEY) and current(pool)[KEY] == "export"
    with pytest.raises(AlreadyLabelledError, match="--relabel"):
        pool.label(KEY, "juice", "bob")
    with pytest.raises(NotDisputedError):
        pool.label(KEY, "juice", "bob", resolve=True)


def test_undoing_the_second_opinion_closes_the_dispute(pool: Store) -> None:
    pool.label(KEY, "export", "ann")
    pool.label(KEY, "juice", "bob")
    mark = pool.event_mark()
    pool.undo("bob", key=KEY)
    assert not pool.is_disputed(KEY) and current(pool)[KEY] == "export"
    # as of the mark before the undo the candidate was disputed (the replay of fits sees that)
    assert KEY not in {r.key for r in pool.labels_as_of(mark)}
    assert {r.key: r.class_ for r in pool.labels_as_of(pool.event_mark())}[KEY] == "export"


def test_double_audit_offers_items_to_a_second_labeller_and_pairs_their_labels(pool: Store) -> None:
    for key, grade in [("apple-0-0000", "export"), ("apple-0-0005", "juice")]:
        pool.label(key, grade, "ann")
    draw = pool.draw_audit(3, "ann", seed=1, double=True)
    assert draw.n == 3
    items = [k for _, k, _ in pool.pending_audit("ann", "2000-01-01T00:00:00Z")]
    assert len(items) == 3
    grades = ["export", "local", "juice"]
    for key, grade in zip(items, grades):
        pool.label(key, grade, "ann")
    assert pool.pending_audit("ann", "2000-01-01T00:00:00Z") == []
    assert [k for _, k, _ in pool.pending_audit("bob", "2000-01-01T00:00:00Z")] == items
    pool.label(items[0], "export", "bob")
    pool.label(items[1], "juice", "bob")  # disagrees: a dispute
    assert pool.double_pairs() == [("export", "export", "ann", "bob"),
                                   ("local", "juice", "ann", "bob")]
    assert [k for _, k, _ in pool.pending_audit("bob", "2000-01-01T00:00:00Z")] == [items[2]]
    assert pool.is_disputed(items[1])
