"""One candidate's label history: every label and skip event, retractions included."""

from typing import Any

from sqlalchemy import text

from labelq.store.core import StoreCore, candidate_id

_ITEM_EVENTS = (
    "SELECT e.mark, 0 AS source, e.id,"
    " CASE WHEN e.retracts_id IS NULL THEN 'label' ELSE 'undo-label' END AS kind,"
    " COALESCE(e.class, r.class) AS class, e.by, e.at, e.note"
    " FROM label_events e LEFT JOIN label_events r ON r.id = e.retracts_id"
    " WHERE e.candidate_id = :cid"
    " UNION ALL"
    " SELECT s.mark, 1, s.id,"
    " CASE WHEN s.retracts_id IS NULL THEN 'skip' ELSE 'undo-skip' END, NULL, s.by, s.at, NULL"
    " FROM skip_events s WHERE s.candidate_id = :cid"
    " ORDER BY 1, 2, 3"
)
"""Both event tables of one candidate, oldest first: by event mark, then (within one write, e.g.
a label that retracts a skip) the label event before the skip event, then by id."""


class ItemHistoryMixin(StoreCore):
    """The label and skip events of one candidate."""

    def item_history(self, key: str) -> list[dict[str, Any]]:
        """Every label and skip event of candidate ``key``, oldest first, as ``{"kind", "class",
        "by", "at", "note"}``: ``kind`` is "label" (relabels included), "skip", "undo-label"
        (with the class it took back) or "undo-skip"; ``class`` is None for skips and
        ``note`` None except on labels given with one. UnknownKeyError if there is no such key."""
        with self._read() as connection:
            cid = candidate_id(connection, key)
            rows = connection.execute(text(_ITEM_EVENTS), {"cid": cid}).all()
        return [{"kind": kind, "class": class_, "by": by, "at": at, "note": note}
                for _, _, _, kind, class_, by, at, note in rows]
