"""Audits in the store: a seeded, uniformly random sample of the unlabelled candidates, and for
each item the prediction the model made for it before its first label.

The prediction is copied from the last fit's scores inside the same transaction that records the
label (`record_prediction`, called by `Store.label`), so an item is always scored against a model
that had not seen its label (test-then-train). Whether it was right is read against the item's
current label, so an undo puts the item back among the pending ones and a relabel is scored by
its new class.
"""

from __future__ import annotations

import secrets
from dataclasses import dataclass
from typing import Optional

import numpy as np
from sqlalchemy import Connection, text

from labelq.store.blobs import decode_rows
from labelq.store.sql import OPEN_DISPUTE
from labelq.store.core import CURRENT_LABEL_IDS, LIVE_LABEL, LIVE_SKIP, StoreCore, class_names, json_object
from labelq.store.errors import AuditError
from labelq.store.timestamps import utc_now


@dataclass(frozen=True)
class AuditDraw:
    """What `Store.draw_audit` did."""

    audit_id: int
    n: int
    drawn_from: int
    seed: int


@dataclass(frozen=True)
class AuditItemRecord:
    """One audit item: its candidate, the recorded prediction (None before its first label, or
    when there was no model yet) and its current label (None while pending)."""

    candidate_id: int
    key: str
    audit_id: int
    position: int
    fit_id: Optional[int]
    predicted: Optional[str]
    p_top: Optional[float]
    probabilities: Optional[np.ndarray]
    scored_mark: Optional[int]
    label: Optional[str]


class AuditsMixin(StoreCore):
    """Audit samples and their scoring records."""

    def draw_audit(self, n: int, by: str, seed: Optional[int] = None,
                   double: bool = False) -> AuditDraw:
        """Draw ``n`` candidates uniformly at random, without replacement, from the unlabelled
        candidates that are in no audit yet; seeded (a fresh seed is drawn and recorded when
        ``seed`` is None)."""
        if n < 1:
            raise AuditError(f"an audit needs at least one candidate, got -n {n}")
        seed = secrets.randbelow(2**31) if seed is None else int(seed)
        with self._write() as connection:
            ids = np.fromiter(connection.execute(text(
                "SELECT c.id FROM candidates c WHERE NOT EXISTS (SELECT 1 FROM label_events l"
                f" WHERE l.candidate_id = c.id AND {LIVE_LABEL}) AND NOT EXISTS"
                " (SELECT 1 FROM audit_items a WHERE a.candidate_id = c.id) ORDER BY c.id"
            )).scalars(), dtype=np.int64)
            if len(ids) < n:
                raise AuditError(f"cannot draw {n} audit candidates: only {len(ids)} unlabelled "
                                 "candidates are in no audit yet")
            picks = np.random.default_rng(seed).choice(ids, size=n, replace=False)
            mark = connection.execute(text("SELECT event_mark FROM store_info WHERE id = 1")).scalar_one()
            audit_id = connection.execute(text(
                "INSERT INTO audits (by, at, seed, opened_mark, drawn_from, double)"
                " VALUES (:by, :at, :seed, :mark, :drawn_from, :double) RETURNING id"),
                {"by": by, "at": utc_now(), "seed": seed, "mark": mark, "drawn_from": len(ids),
                 "double": bool(double)},
            ).scalar_one()
            connection.execute(text(
                "INSERT INTO audit_items (candidate_id, audit_id, position)"
                " VALUES (:cid, :audit, :pos)"),
                [{"cid": int(c), "audit": audit_id, "pos": i} for i, c in enumerate(picks)])
        return AuditDraw(audit_id, n, len(ids), seed)

    def audit_items(self) -> list[AuditItemRecord]:
        """Every audit item, by audit and position."""
        with self._read() as connection:
            classes = class_names(connection)
            rows = connection.execute(text(
                "SELECT a.candidate_id, c.key, a.audit_id, a.position, a.fit_id, a.predicted,"
                " a.p_top, a.probabilities, a.scored_mark, (SELECT l.class FROM label_events l"
                f" WHERE l.candidate_id = a.candidate_id AND {LIVE_LABEL} AND NOT EXISTS (SELECT 1"
                f" FROM disputes d WHERE d.candidate_id = a.candidate_id AND {OPEN_DISPUTE})"
                " ORDER BY l.id DESC LIMIT 1)"
                " FROM audit_items a JOIN candidates c ON c.id = a.candidate_id"
                " ORDER BY a.audit_id, a.position")).all()
        out = []
        for cid, key, audit_id, pos, fit_id, predicted, p_top, blob, mark, label in rows:
            proba = None if blob is None else decode_rows([blob], len(classes))[0]
            out.append(AuditItemRecord(cid, key, audit_id, pos, fit_id,
                                       None if predicted is None else classes[predicted],
                                       p_top, proba, mark, label))
        return out

    def pending_audit(self, holder: Optional[str], now: str) -> list[tuple[int, str, dict]]:
        """(candidate id, key, metadata) of the audit items with no label yet, in the order they
        are offered, leaving out those held by someone other than ``holder``."""
        with self._read() as connection:
            rows = connection.execute(text(
                "SELECT a.candidate_id, c.key, c.meta FROM audit_items a"
                " JOIN candidates c ON c.id = a.candidate_id JOIN audits u ON u.id = a.audit_id"
                " WHERE (NOT EXISTS (SELECT 1 FROM label_events l WHERE l.candidate_id ="
                f" a.candidate_id AND {LIVE_LABEL}) OR (u.double AND CAST(:holder AS TEXT) IS NOT NULL"
                " AND NOT EXISTS (SELECT 1 FROM label_events l WHERE l.candidate_id = a.candidate_id"
                f" AND {LIVE_LABEL} AND l.by = :holder) AND (SELECT COUNT(DISTINCT l.by) FROM"
                f" label_events l WHERE l.candidate_id = a.candidate_id AND {LIVE_LABEL}) < 2))"
                " AND NOT EXISTS (SELECT 1 FROM claims k WHERE k.candidate_id = a.candidate_id"
                " AND k.expires_at > :now AND (CAST(:holder AS TEXT) IS NULL OR k.holder <> :holder))"
                " ORDER BY a.audit_id, a.position"), {"now": now, "holder": holder}).all()
        return [(cid, key, json_object(meta)) for cid, key, meta in rows]

    def audit_pace(self) -> tuple[int, int]:
        """(audit items labelled, other candidates labelled) since the oldest audit that still has
        items waiting; (0, 0) when none waits. The queue offers one audit item in five from these."""
        with self._read() as connection:
            since = connection.execute(text(
                "SELECT MIN(u.opened_mark) FROM audits u WHERE EXISTS (SELECT 1 FROM audit_items a"
                " WHERE a.audit_id = u.id AND NOT EXISTS (SELECT 1 FROM label_events l"
                f" WHERE l.candidate_id = a.candidate_id AND {LIVE_LABEL}))")).scalar()
            if since is None:
                return 0, 0
            audit, other = connection.execute(text(
                "SELECT SUM(CASE WHEN a.candidate_id IS NULL THEN 0 ELSE 1 END),"
                " SUM(CASE WHEN a.candidate_id IS NULL THEN 1 ELSE 0 END)"
                " FROM label_events l LEFT JOIN audit_items a ON a.candidate_id = l.candidate_id"
                f" WHERE l.mark > :since AND l.id IN ({CURRENT_LABEL_IDS})"),
                {"since": since}).one()
        return int(audit or 0), int(other or 0)

    def skipped_audit_items(self) -> int:
        """How many pending audit items are skipped (they stay in the audit and are offered)."""
        with self._read() as connection:
            return connection.execute(text(
                f"SELECT COUNT(*) FROM skip_events s JOIN audit_items a ON a.candidate_id = s.candidate_id"
                f" WHERE {LIVE_SKIP}")).scalar_one()


def record_prediction(connection: Connection, cid: int, mark: int) -> None:
    """Inside the label's transaction: when ``cid`` is an audit item labelled for the first time,
    copy the last (non-cold-start) fit's prediction for it. A fit that is older than this label
    never saw it, so the record is the model's prediction before the label."""
    waiting = connection.execute(text(
        "SELECT 1 FROM audit_items WHERE candidate_id = :cid AND scored_mark IS NULL"),
        {"cid": cid}).scalar()
    fit_id = connection.execute(text(
        "SELECT id FROM fits WHERE id = (SELECT MAX(id) FROM fits) AND strategy <> 'cold-start'"
    )).scalar()
    if waiting is None or fit_id is None:
        return
    from labelq.store.blockio import score_records

    n_classes = connection.execute(text("SELECT COUNT(*) FROM classes")).scalar_one()
    records = score_records(connection, fit_id, n_classes, [cid])
    if records is None:
        return
    row = records[0]
    proba = row["probabilities"].astype("<f8")
    predicted = int(row["predicted"])
    connection.execute(text(
        "UPDATE audit_items SET fit_id = :fit, predicted = :predicted, p_top = :p_top,"
        " probabilities = :proba, scored_mark = :mark WHERE candidate_id = :cid"),
        {"fit": fit_id, "predicted": predicted, "p_top": float(proba[predicted]),
         "proba": proba.tobytes(), "mark": mark, "cid": cid})
