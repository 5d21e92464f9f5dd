"""Disputes between labellers, and the pairs of labels of double-labelled audit items.

A second labeller who labels a candidate someone else has labelled adds a second opinion (both
label events are kept). When the two classes differ a dispute is opened: while it is open the
candidate is labelled (it is not offered again) but is left out of the training set and of every
current-label figure, until someone settles it with a resolving label (`labelq label KEY CLASS
--resolve`). A dispute also closes when either of its label events is undone, and opens again
when its resolving label is undone.
"""

from __future__ import annotations

from typing import Optional

from sqlalchemy import Connection, text

from labelq.store.core import LIVE_LABEL, StoreCore, candidate_id
from labelq.store.errors import LabelqError
from labelq.store.sql import OPEN_DISPUTE


class DisputedError(LabelqError):
    """A label was given to a disputed candidate without --resolve."""


class NotDisputedError(LabelqError):
    """--resolve was given for a candidate that is not disputed."""


def open_dispute(connection: Connection, cid: int) -> Optional[int]:
    """The id of the candidate's open dispute, or None."""
    return connection.execute(text(
        f"SELECT d.id FROM disputes d WHERE d.candidate_id = :cid AND {OPEN_DISPUTE}"
        " ORDER BY d.id DESC LIMIT 1"), {"cid": cid}).scalar()


def latest_live_label(connection: Connection, cid: int):
    """(event id, class, by) of the candidate's latest live label event, or None."""
    return connection.execute(text(
        f"SELECT l.id, l.class AS class_, l.by FROM label_events l WHERE l.candidate_id = :cid"
        f" AND {LIVE_LABEL} ORDER BY l.id DESC LIMIT 1"), {"cid": cid}).first()


def open_new_dispute(connection: Connection, cid: int, first_id: int, second_id: int,
                     at: str) -> None:
    connection.execute(text(
        "INSERT INTO disputes (candidate_id, first_id, second_id, at)"
        " VALUES (:cid, :first, :second, :at)"),
        {"cid": cid, "first": first_id, "second": second_id, "at": at})


def settle(connection: Connection, dispute_id: int, event_id: int) -> None:
    connection.execute(text("UPDATE disputes SET resolved_id = :eid WHERE id = :id"),
                       {"eid": event_id, "id": dispute_id})


class DisputesMixin(StoreCore):
    """Open disputes and double-labelled pairs."""

    def disputes(self) -> list[dict]:
        """Every open dispute, oldest first: key, the two labellers' classes, who and when."""
        with self._read() as connection:
            rows = connection.execute(text(
                "SELECT c.key, a.class, a.by, a.at, b.class, b.by, b.at, d.at"
                " FROM disputes d JOIN candidates c ON c.id = d.candidate_id"
                " JOIN label_events a ON a.id = d.first_id JOIN label_events b ON b.id = d.second_id"
                f" WHERE {OPEN_DISPUTE} ORDER BY d.id")).all()
        return [{"key": key, "first": {"class": ca, "by": ba, "at": ta},
                 "second": {"class": cb, "by": bb, "at": tb}, "opened_at": opened}
                for key, ca, ba, ta, cb, bb, tb, opened in rows]

    def is_disputed(self, key: str) -> bool:
        with self._read() as connection:
            return open_dispute(connection, candidate_id(connection, key)) is not None

    def double_pairs(self) -> list[tuple[str, str, str, str]]:
        """For every item of a double audit labelled by two labellers: (class by the first,
        class by the second, first labeller, second labeller), from each labeller's latest live
        label of it (labellers in the order of their first label of the item)."""
        with self._read() as connection:
            rows = connection.execute(text(
                "SELECT l.candidate_id, l.by, l.class FROM label_events l"
                " JOIN audit_items a ON a.candidate_id = l.candidate_id"
                " JOIN audits u ON u.id = a.audit_id"
                f" WHERE u.double AND {LIVE_LABEL} ORDER BY l.id")).all()
        by_item: dict[int, dict[str, str]] = {}
        for cid, by, class_ in rows:
            by_item.setdefault(cid, {})[by] = class_  # latest wins; insertion order = first seen
        pairs = []
        for labels in by_item.values():
            if len(labels) >= 2:
                (ba, ca), (bb, cb) = list(labels.items())[:2]
                pairs.append((ca, cb, ba, bb))
        return pairs
