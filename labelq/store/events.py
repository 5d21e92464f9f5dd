"""Labels and skips as append-only events; undo appends a retraction of the latest live event (or of
one candidate's current label or skip)."""

from typing import Any, Optional

import numpy as np
from sqlalchemy import Connection, text

from labelq.store.audits import record_prediction
from labelq.store.core import CURRENT_LABEL_IDS, LIVE_LABEL, LIVE_SKIP, StoreCore, candidate_id, class_names
from labelq.store.disputes import (DisputedError, NotDisputedError, latest_live_label,
                                   open_dispute, open_new_dispute, settle)
from labelq.store.engine import bump_event_mark
from labelq.store.classes import resolve_class
from labelq.store.errors import AlreadyLabelledError, NothingToUndoError
from labelq.store.records import LabelRecord, UndoRecord
from labelq.store.timestamps import utc_now


class EventsMixin(StoreCore):
    """Label, skip and undo."""

    def event_mark(self) -> int:
        """A number that grows with every import, label, skip, unskip and undo."""
        with self._read() as connection:
            return connection.execute(text("SELECT event_mark FROM store_info WHERE id = 1")).scalar_one()

    def current_labels(self) -> list[LabelRecord]:
        """Every candidate's current label, ordered by event id."""
        with self._read() as connection:
            rows = connection.execute(
                text(
                    "SELECT e.id, e.candidate_id, c.key, e.class, e.by, e.note, e.at"
                    " FROM label_events e JOIN candidates c ON c.id = e.candidate_id"
                    f" WHERE e.id IN ({CURRENT_LABEL_IDS}) ORDER BY e.id"
                )
            ).all()
        return [LabelRecord(*row) for row in rows]

    def label(self, key: str, class_: str, by: str, note: Optional[str] = None, relabel: bool = False,
              resolve: bool = False) -> int:
        """Label candidate ``key`` as ``class_``; the new event id.

        ``class_`` is matched by labelq.store.classes.resolve_class (exact name, then case-insensitive,
        then its number 1..C) and the stored name is recorded. A labelled candidate raises
        AlreadyLabelledError unless ``relabel``, when the new event supersedes the old one (an undo
        brings the old one back). A skip of the candidate is retracted.

        Teams (labelq.store.disputes): a labeller other than the one who gave the current label
        adds a second opinion without ``relabel``; when its class differs, the candidate becomes
        disputed and leaves the training set. A disputed candidate takes only a resolving label
        (``resolve``), which settles the dispute; ``resolve`` on an undisputed one is an error.
        """
        with self._write() as connection:
            cid = candidate_id(connection, key)
            class_ = resolve_class(class_, class_names(connection))
            dispute = open_dispute(connection, cid)
            latest = latest_live_label(connection, cid)
            second_opinion = False
            if resolve and dispute is None:
                raise NotDisputedError(f"candidate {key!r} is not disputed; label it without --resolve")
            if dispute is not None and not resolve:
                raise DisputedError(
                    f"candidate {key!r} is disputed; settle it with `labelq label {key} CLASS --resolve`")
            if latest is not None and not (relabel or resolve):
                if latest.by == by:
                    raise AlreadyLabelledError(
                        f"candidate {key!r} is already labelled {latest.class_!r}; use --relabel to "
                        "replace the label")
                second_opinion = True
            mark = bump_event_mark(connection)
            at = utc_now()
            event_id = connection.execute(
                text(
                    "INSERT INTO label_events (candidate_id, class, by, note, at, mark)"
                    " VALUES (:cid, :class_, :by, :note, :at, :mark) RETURNING id"
                ),
                {"cid": cid, "class_": class_, "by": by, "note": note, "at": at, "mark": mark},
            ).scalar_one()
            skip_id = _live_skip(connection, cid)
            if skip_id is not None:
                _retract(connection, "skip_events", skip_id, cid, by, at, mark)
            record_prediction(connection, cid, mark)  # audit items: the prediction before the label
            if resolve:
                settle(connection, dispute, event_id)
            elif second_opinion and latest.class_ != class_:
                open_new_dispute(connection, cid, latest.id, event_id, at)
        return event_id

    def skip(self, key: str, by: str) -> int:
        """Skip candidate ``key``; the skip event id (the existing one if it is already skipped)."""
        with self._write() as connection:
            cid = candidate_id(connection, key)
            current = _current_class(connection, cid)
            if current is not None:
                raise AlreadyLabelledError(f"candidate {key!r} is already labelled {current!r}")
            existing = _live_skip(connection, cid)
            if existing is not None:
                return existing
            return connection.execute(
                text(
                    "INSERT INTO skip_events (candidate_id, by, at, mark)"
                    " VALUES (:cid, :by, :at, :mark) RETURNING id"
                ),
                {"cid": cid, "by": by, "at": utc_now(), "mark": bump_event_mark(connection)},
            ).scalar_one()

    def unskip(self, key: str, by: str) -> Optional[int]:
        """Retract the skip of candidate ``key``; the retraction's event id, None if it was not skipped."""
        with self._write() as connection:
            cid = candidate_id(connection, key)
            skip_id = _live_skip(connection, cid)
            if skip_id is None:
                return None
            return _retract(
                connection, "skip_events", skip_id, cid, by, utc_now(), bump_event_mark(connection)
            )

    def undo(self, by: str, key: Optional[str] = None) -> UndoRecord:
        """Retract the most recent live label or skip; NothingToUndoError if none is left.

        With ``key``, retract that candidate's current label (its latest live label event), else
        its live skip; NothingToUndoError naming the key if it has neither (UnknownKeyError if
        there is no such candidate). Undoing a relabel brings back the label it superseded.
        Undoing a label that un-skipped a candidate leaves it unlabelled and not skipped.
        """
        with self._write() as connection:
            only = "" if key is None else " AND {0}.candidate_id = :cid"
            params = {} if key is None else {"cid": candidate_id(connection, key)}
            latest = [
                connection.execute(
                    text(
                        f"SELECT l.mark, 'label', l.id, l.candidate_id, l.class FROM label_events l"
                        f" WHERE {LIVE_LABEL}{only.format('l')} ORDER BY l.id DESC LIMIT 1"
                    ),
                    params,
                ).first(),
                connection.execute(
                    text(
                        f"SELECT s.mark, 'skip', s.id, s.candidate_id, NULL FROM skip_events s"
                        f" WHERE {LIVE_SKIP}{only.format('s')} ORDER BY s.id DESC LIMIT 1"
                    ),
                    params,
                ).first(),
            ]
            found = [row for row in latest if row is not None]
            if not found:
                raise NothingToUndoError(
                    "nothing to undo: no label or skip left to retract"
                    if key is None
                    else f"nothing to undo for candidate {key!r}: it has no label or skip"
                )
            # with a key, its label before its skip (a candidate never has both live at once)
            _, kind, event_id, cid, class_ = found[0] if key is not None else max(found, key=lambda row: row[0])
            table = "label_events" if kind == "label" else "skip_events"
            _retract(connection, table, event_id, cid, by, utc_now(), bump_event_mark(connection))
            key = connection.execute(
                text("SELECT key FROM candidates WHERE id = :id"), {"id": cid}
            ).scalar_one()
        return UndoRecord(kind=kind, key=key, class_=class_)

    def skipped_ids(self, max_mark: Optional[int] = None) -> np.ndarray:
        """Ids of the skipped candidates in id order, int64 (as of event ``max_mark`` if given)."""
        with self._read() as connection:
            if max_mark is None:
                ids = connection.execute(
                    text(f"SELECT s.candidate_id FROM skip_events s WHERE {LIVE_SKIP} ORDER BY s.candidate_id")
                ).scalars()
            else:
                ids = connection.execute(
                    text(
                        "SELECT s.candidate_id FROM skip_events s WHERE s.mark <= :m"
                        " AND s.retracts_id IS NULL AND NOT EXISTS (SELECT 1 FROM skip_events r"
                        " WHERE r.retracts_id = s.id AND r.mark <= :m) ORDER BY s.candidate_id"
                    ),
                    {"m": max_mark},
                ).scalars()
            return np.fromiter(ids, dtype=np.int64)

    def labels_as_of(self, mark: int) -> list[LabelRecord]:
        """Every candidate's label as it stood at event ``mark``, ordered by event id.

        Events after ``mark`` (labels and retractions alike) are ignored, so this replays the
        label history: ``labels_as_of(event_mark())`` equals ``current_labels()``.
        """
        disputed_then = (  # an open dispute as of :m (see OPEN_DISPUTE)
            "SELECT 1 FROM disputes d JOIN label_events s2 ON s2.id = d.second_id"
            " WHERE d.candidate_id = l.candidate_id AND s2.mark <= :m AND NOT EXISTS (SELECT 1 FROM"
            " label_events r1 WHERE (r1.retracts_id = d.first_id OR r1.retracts_id = d.second_id)"
            " AND r1.mark <= :m) AND (d.resolved_id IS NULL OR NOT EXISTS (SELECT 1 FROM"
            " label_events v WHERE v.id = d.resolved_id AND v.mark <= :m AND NOT EXISTS (SELECT 1"
            " FROM label_events r3 WHERE r3.retracts_id = v.id AND r3.mark <= :m)))"
        )
        live_then = (
            "SELECT MAX(l.id) FROM label_events l WHERE l.mark <= :m AND l.retracts_id IS NULL"
            " AND NOT EXISTS (SELECT 1 FROM label_events r WHERE r.retracts_id = l.id AND r.mark <= :m)"
            f" AND NOT EXISTS ({disputed_then}) GROUP BY l.candidate_id"
        )
        with self._read() as connection:
            rows = connection.execute(
                text(
                    "SELECT e.id, e.candidate_id, c.key, e.class, e.by, e.note, e.at"
                    " FROM label_events e JOIN candidates c ON c.id = e.candidate_id"
                    f" WHERE e.id IN ({live_then}) ORDER BY e.id"
                ),
                {"m": mark},
            ).all()
        return [LabelRecord(*row) for row in rows]

    def label_event_log(self) -> list[dict[str, Any]]:
        """Every label event, retractions (undos) included, oldest first, as ``{"id",
        "candidate_id", "by", "at", "mark", "retracts_id"}`` (``retracts_id`` is None for a
        label, the retracted event's id for an undo)."""
        with self._read() as connection:
            rows = connection.execute(
                text("SELECT id, candidate_id, by, at, mark, retracts_id FROM label_events ORDER BY id")
            )
            return [dict(row._mapping) for row in rows]

    def event_marks(self) -> list[int]:
        """The distinct event marks of label and skip events (and their retractions), ascending."""
        with self._read() as connection:
            return list(
                connection.execute(
                    text("SELECT mark FROM label_events UNION SELECT mark FROM skip_events ORDER BY mark")
                ).scalars()
            )


def _current_class(connection: Connection, cid: int) -> Optional[str]:
    return connection.execute(
        text(
            f"SELECT l.class FROM label_events l WHERE l.candidate_id = :cid AND {LIVE_LABEL}"
            " ORDER BY l.id DESC LIMIT 1"
        ),
        {"cid": cid},
    ).scalar()


def _live_skip(connection: Connection, cid: int) -> Optional[int]:
    return connection.execute(
        text(f"SELECT s.id FROM skip_events s WHERE s.candidate_id = :cid AND {LIVE_SKIP}"), {"cid": cid}
    ).scalar()


def _retract(connection: Connection, table: str, event_id: int, cid: int, by: str, at: str, mark: int) -> int:
    """Append to ``table`` a retraction of ``event_id``; its id."""
    return connection.execute(
        text(
            f"INSERT INTO {table} (candidate_id, by, at, mark, retracts_id)"
            " VALUES (:cid, :by, :at, :mark, :event_id) RETURNING id"
        ),
        {"cid": cid, "by": by, "at": at, "mark": mark, "event_id": event_id},
    ).scalar_one()
