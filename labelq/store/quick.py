"""The quick read path: answer `labelq next` from a store whose scores are current, through the
standard ``sqlite3`` module alone.

Importing SQLAlchemy's ORM costs about half a second on this project's machines, more than the
whole budget of a `next` that only reads the head of a ranked queue. `QuickReader` opens the file
with the same pragmas as the store's engine (`labelq.store.engine`), runs the same SQL
(`labelq.store.sql`) and gives up, returning None, whenever anything is not as the quick path
expects: no file, not a labelq store, a schema revision other than this version's head, no fit,
a fit older than the last event, or audit items waiting (the full path interleaves them). The
caller then takes the full path, which upgrades, refits and reports errors. Nothing here decides anything the full path would decide differently;
`tests/loop/test_quick_next.py` checks the two give the same queue.
"""

from __future__ import annotations

import json
import os
import sqlite3
import struct
from dataclasses import dataclass
from typing import Optional

from labelq.store.sql import (APPLICATION, CLAIM, DROP_EXPIRED_CLAIMS, HEAD_COUNT, HELD_BY_OTHERS,
                              LIVE_LABEL, LIVE_SKIP, QUEUE_COLUMNS, QUEUE_HEAD_ROWS, queue_sql)
from labelq.store.timestamps import utc_after, utc_now

BUSY_TIMEOUT_SECONDS = 30  # as labelq.store.engine


@dataclass(frozen=True)
class QuickFit:
    """The columns of the last fit that the queue's heading and JSON need."""

    id: int
    n_labels: int
    event_mark: int
    strategy: str
    info: dict


class QuickReader:
    """A plain sqlite3 connection to a store file, or nothing (see `open`)."""

    def __init__(self, connection: sqlite3.Connection) -> None:
        self._db = connection

    @classmethod
    def open(cls, path, head: str) -> Optional["QuickReader"]:
        """A reader for the labelq store at ``path`` stamped with revision ``head``, else None."""
        if not os.path.isfile(path):
            return None
        try:
            db = sqlite3.connect(f"file:{os.fspath(path)}?mode=rw", uri=True,
                                 timeout=BUSY_TIMEOUT_SECONDS, isolation_level=None)
        except sqlite3.Error:
            return None
        try:
            db.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_SECONDS * 1000}")
            if db.execute("PRAGMA journal_mode").fetchone()[0].lower() != "wal":
                raise LookupError("not in WAL mode")  # the full path sets it up
            db.execute("PRAGMA foreign_keys = ON")
            application = db.execute("SELECT application FROM store_info WHERE id = 1").fetchone()
            revision = db.execute("SELECT version_num FROM alembic_version").fetchone()
            if application != (APPLICATION,) or revision != (head,):
                raise LookupError("not a current labelq store")
        except (sqlite3.Error, LookupError):
            db.close()
            return None
        return cls(db)

    def close(self) -> None:
        self._db.close()

    def __enter__(self) -> "QuickReader":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def classes(self) -> list[str]:
        return [name for (name,) in self._db.execute("SELECT name FROM classes ORDER BY position")]

    def current_fit(self) -> Optional[QuickFit]:
        """The last fit when no event came after it and the pool is not empty, else None."""
        row = self._db.execute(
            "SELECT f.id, f.n_labels, f.event_mark, f.strategy, f.info, i.event_mark"
            " FROM fits f, store_info i WHERE i.id = 1 ORDER BY f.id DESC LIMIT 1").fetchone()
        if row is None or row[2] != row[5]:
            return None
        if self._db.execute("SELECT 1 FROM candidates LIMIT 1").fetchone() is None:
            return None
        return QuickFit(row[0], row[1], row[2], row[3], json.loads(row[4]) if row[4] else {})

    def audit_waiting(self) -> bool:
        """True when an audit item has no label yet, or an item of a double audit fewer than
        two labellers (the full path interleaves those)."""
        return self._db.execute(
            "SELECT 1 FROM audit_items a JOIN audits u ON u.id = a.audit_id WHERE NOT EXISTS"
            " (SELECT 1 FROM label_events l WHERE l.candidate_id = a.candidate_id"
            f" AND {LIVE_LABEL}) OR (u.double AND (SELECT COUNT(DISTINCT l.by) FROM label_events l"
            f" WHERE l.candidate_id = a.candidate_id AND {LIVE_LABEL}) < 2) LIMIT 1"
        ).fetchone() is not None

    def queue(self, limit: int, holder: Optional[str]) -> Optional[list[dict]]:
        """The head of the last fit's queue, as `Store.queue` reads it (claims by others left out);
        None when it runs past the rows kept in `scores` (the full path reads on in the blocks)."""
        n_classes = self._db.execute("SELECT COUNT(*) FROM classes").fetchone()[0]
        unpack = struct.Struct(f"<{n_classes}d").unpack
        rows = self._db.execute(queue_sql(True), {"now": utc_now(), "holder": holder,
                                                  "limit": limit, "offset": 0}).fetchall()
        if len(rows) < limit and self._db.execute(HEAD_COUNT).fetchone()[0] >= QUEUE_HEAD_ROWS:
            return None  # the queue goes on in the score blocks: the full path reads them
        out = []
        for values in rows:
            row = dict(zip(QUEUE_COLUMNS, values))
            row["meta"] = json.loads(row["meta"])
            row["probabilities"] = unpack(row["probabilities"])
            out.append(row)
        return out

    def claim(self, candidate_id: int, holder: str, seconds: float) -> bool:
        """Hold one candidate for ``holder`` (as `Store.claim`); True when ``holder`` holds it."""
        db = self._db
        db.execute("BEGIN IMMEDIATE")
        try:
            db.execute(DROP_EXPIRED_CLAIMS, {"now": utc_now()})
            db.execute(CLAIM, {"cid": candidate_id, "holder": holder, "until": utc_after(seconds)})
            held = db.execute("SELECT 1 FROM claims WHERE holder = ? AND candidate_id = ?",
                              (holder, candidate_id)).fetchone()
        except BaseException:
            db.execute("ROLLBACK")
            raise
        db.execute("COMMIT")
        return held is not None

    def held_by_others(self, holder: Optional[str]) -> tuple[int, Optional[str]]:
        count, until = self._db.execute(HELD_BY_OTHERS, {"now": utc_now(), "holder": holder}).fetchone()
        return int(count), until

    def skipped(self, candidate_ids: list[int]) -> set[int]:
        """Which of ``candidate_ids`` are skipped now."""
        if not candidate_ids:
            return set()
        marks = ",".join("?" * len(candidate_ids))
        found = self._db.execute(
            f"SELECT s.candidate_id FROM skip_events s WHERE s.candidate_id IN ({marks})"
            f" AND {LIVE_SKIP}", candidate_ids)
        return {cid for (cid,) in found}
