"""Derived model state: fits, the scores of the last fit (the queue) and pool snapshots."""

from collections.abc import Iterator, Sequence
from itertools import repeat
from typing import Any

import numpy as np
from sqlalchemy import Connection, Row, bindparam, insert, select, text

from labelq.store.blobs import decode_rows, row_blobs
from labelq.store.blockio import (
    delete_scores,
    insert_scores,
    score_chunks,
    score_records,
)
from labelq.store.columns import score_dtype
from labelq.store.core import StoreCore, class_names, json_object, rows_by_id
from labelq.store.engine import DERIVED, bulk_insert
from labelq.store.errors import UnknownSessionError
from labelq.store.models import Fit, Snapshot
from labelq.store.records import FitRecord, ScoreChunk, ScoreRow
from labelq.store.sql import HEAD_COUNT, LAST_FIT, LIVE_LABEL, QUEUE_HEAD_ROWS, queue_sql
from labelq.store.timestamps import utc_now

_INSERT_COLUMNS = ("candidate_id", "fit_id", "probabilities", "predicted", "p_top", "p_low", "p_high",
                   "entropy", "margin", "bald", "priority", "rank", "reason")
_LAST_FIT = LAST_FIT


class FitsMixin(StoreCore):
    """Record fits with their scores and snapshot; read the queue and the history."""

    def record_fit(
        self,
        fit: dict[str, Any],
        candidate_ids: Sequence[int],
        probabilities: np.ndarray,
        predicted: np.ndarray,
        p_top: np.ndarray,
        p_low: np.ndarray,
        p_high: np.ndarray,
        entropy: np.ndarray,
        margin: np.ndarray,
        bald: np.ndarray,
        priority: np.ndarray,
        rank: Sequence[int | None],
        snapshot: dict[str, Any],
        keep_models: int | None = None,
        reasons: Sequence[str | None] | None = None,
        exact: np.ndarray | None = None,
    ) -> int:
        """Store a fit, replace all scores by this fit's (N candidates) and add its snapshot; the fit id.

        ``probabilities`` is (N, C) in class order; ``predicted`` (N,) class positions; ``rank`` (N,)
        with -1 or None for candidates that are not in the queue (labelled ones). ``fit`` has the keys
        session_id, n_labels, strategy, hyperparameters, log_marginal_likelihood, seconds,
        event_mark, model, warnings, full_optimize and optionally fingerprint and info;
        ``snapshot`` the keys mean_entropy, n_uncertain, expected_accuracy, class_counts and
        optionally agreement_kappa. With ``keep_models``, only the newest that many fits keep their
        model (the rest are derived data and can be remade by a rebuild). ``reasons`` (N,) says why
        each row of the head of the queue is there (None elsewhere). ``fit`` may also hold
        settings, hyper_mode and learnt_at (how the fit was made). ``exact`` (N,) bool marks the
        rows whose latent variance was computed exactly (default all; labelq.policy.bounded).

        Every candidate's scores go into the fit's score blocks (labelq.store.columns; ids must
        be ascending); ranks 1 to QUEUE_HEAD_ROWS also go into the `scores` table, which `next`
        reads.
        """
        n = len(candidate_ids)
        probabilities = np.asarray(probabilities, dtype=np.float64)
        columns = [np.asarray(a) for a in (predicted, p_top, p_low, p_high, entropy, margin, bald, priority)]
        if probabilities.ndim != 2 or probabilities.shape[0] != n or any(a.shape != (n,) for a in columns):
            raise ValueError(f"scores must have {n} rows, one per candidate id")
        if len(rank) != n:
            raise ValueError(f"rank must have {n} entries, got {len(rank)}")
        reasons = np.full(n, None, dtype=object) if reasons is None else np.asarray(reasons, dtype=object)
        if len(reasons) != n:
            raise ValueError(f"reasons must have {n} entries, got {len(reasons)}")
        # the DERIVED lock: one refit writes at a time, label writes go on meanwhile (engine.py)
        with self._write(DERIVED) as connection:
            n_classes = len(class_names(connection))
            if probabilities.shape[1] != n_classes:
                raise ValueError(f"probabilities must have {n_classes} columns, got {probabilities.shape[1]}")
            _check_session(connection, fit.get("session_id"))
            fit_id = connection.execute(
                insert(Fit)
                .values(**{name: fit.get(name) for name in _FIT_FIELDS}, at=utc_now())
                .returning(Fit.id)
            ).scalar_one()
            connection.execute(text("DELETE FROM scores"))
            delete_scores(connection)
            if keep_models is not None:
                # the newest fits by id (ids of a server's sequence may have gaps)
                connection.execute(
                    text("UPDATE fits SET model = NULL WHERE model IS NOT NULL AND id NOT IN"
                         " (SELECT id FROM fits ORDER BY id DESC LIMIT :keep)"),
                    {"keep": keep_models},
                )
            ids = np.asarray(candidate_ids, dtype=np.int64)
            rank = _rank_array(rank)
            records = np.zeros(n, dtype=score_dtype(n_classes))
            records["candidate_id"] = ids
            records["probabilities"] = probabilities
            for name, column in zip(("predicted", "p_low", "p_high", "entropy", "margin", "bald",
                                     "priority"), (columns[0], *columns[2:])):
                records[name] = column
            records["rank"] = rank
            records["exact"] = 1 if exact is None else np.asarray(exact, dtype=bool)
            if n:
                if not (np.diff(ids) > 0).all():  # blocks hold ascending ids
                    order = np.argsort(ids, kind="stable")
                    if (np.diff(ids[order]) == 0).any():
                        raise ValueError("candidate ids must be distinct")
                    records = records[order]
                insert_scores(connection, fit_id, records)
            head = np.flatnonzero((rank >= 1) & (rank <= QUEUE_HEAD_ROWS))
            head = head[np.argsort(rank[head], kind="stable")]
            p_top = columns[1]
            bulk_insert(
                connection, "scores", _INSERT_COLUMNS,
                zip(
                    ids[head].tolist(),
                    repeat(fit_id),
                    row_blobs(probabilities[head]),
                    columns[0][head].astype(np.int64).tolist(),
                    np.asarray(p_top, dtype=np.float64)[head].tolist(),
                    *(column[head].astype(np.float64).tolist() for column in columns[2:]),
                    rank[head].tolist(),
                    reasons[head].tolist(),
                ),
            )
            connection.execute(
                insert(Snapshot).values(
                    fit_id=fit_id,
                    mean_entropy=snapshot["mean_entropy"],
                    n_uncertain=snapshot["n_uncertain"],
                    expected_accuracy=snapshot["expected_accuracy"],
                    agreement_kappa=snapshot.get("agreement_kappa"),
                    class_counts=snapshot["class_counts"],
                )
            )
        return fit_id

    def last_fit(self) -> FitRecord | None:
        """The latest fit with its model, or None before the first fit."""
        with self._read() as connection:
            row = connection.execute(select(Fit.__table__).order_by(Fit.id.desc()).limit(1)).first()
        return None if row is None else _fit_record(row)

    def fit_with_fingerprint(self, fingerprint: str, after_id: int = 0) -> FitRecord | None:
        """The newest fit (with id above ``after_id``) made on the label set ``fingerprint`` that
        still has its model, or None."""
        with self._read() as connection:
            row = connection.execute(
                select(Fit.__table__)
                .where(Fit.fingerprint == fingerprint, Fit.id > after_id, text("model IS NOT NULL"))
                .order_by(Fit.id.desc())
                .limit(1)
            ).first()
        return None if row is None else _fit_record(row)

    def fits(self, with_model: bool = False) -> list[FitRecord]:
        """Every fit, oldest first; models are decoded only when ``with_model``."""
        columns = [c for c in Fit.__table__.c if with_model or c.name != "model"]
        with self._read() as connection:
            rows = connection.execute(select(*columns).order_by(Fit.id)).all()
        return [_fit_record(row) for row in rows]

    def snapshots(self) -> list[dict[str, Any]]:
        """Every snapshot, oldest first, with its fit's id, session, strategy, label count and time.

        Keys: fit_id, session_id, strategy, n_labels, at, mean_entropy, n_uncertain,
        expected_accuracy, agreement_kappa, class_counts.
        """
        with self._read() as connection:
            rows = connection.execute(
                select(
                    Fit.id.label("fit_id"),
                    Fit.session_id,
                    Fit.strategy,
                    Fit.n_labels,
                    Fit.at,
                    Snapshot.mean_entropy,
                    Snapshot.n_uncertain,
                    Snapshot.expected_accuracy,
                    Snapshot.agreement_kappa,
                    Snapshot.class_counts,
                )
                .join(Fit, Fit.id == Snapshot.fit_id)
                .order_by(Fit.id)
            )
            return [dict(row._mapping) for row in rows]

    def queue(
        self, limit: int, offset: int = 0, exclude_claimed: bool = True, holder: str | None = None
    ) -> list[ScoreRow]:
        """Unlabelled candidates of the last fit by rank ascending, ``limit`` of them from ``offset``.

        Candidates labelled since the fit are left out; with ``exclude_claimed``, so are candidates
        whose unexpired claim belongs to someone other than ``holder``.
        """
        sql = queue_sql(exclude_claimed)
        with self._read() as connection:
            n_classes = len(class_names(connection))
            now = utc_now()
            rows = connection.execute(
                text(sql), {"now": now, "holder": holder, "limit": limit, "offset": offset}
            ).all()
            if len(rows) < limit and connection.execute(text(HEAD_COUNT)).scalar_one() >= QUEUE_HEAD_ROWS:
                # past the rows kept in `scores`: the queue goes on in the score blocks
                return _queue_from_blocks(connection, n_classes, limit, offset,
                                          exclude_claimed, holder, now)
        return [
            ScoreRow(
                candidate_id=cid,
                key=key,
                meta=json_object(meta),
                probabilities=decode_rows([blob], n_classes)[0],
                predicted=predicted,
                p_top=p_top,
                entropy=entropy_,
                margin=margin_,
                bald=bald_,
                priority=priority_,
                rank=rank_,
                reason=reason_,
            )
            for (cid, key, meta, blob, predicted, p_top, entropy_, margin_, bald_, priority_, rank_,
                 reason_) in rows
        ]

    def scores(self, ids: Sequence[int] | None = None, chunk_size: int = 100_000) -> Iterator[ScoreChunk]:
        """The last fit's scores as ScoreChunk arrays of at most ``chunk_size`` rows, by candidate id.

        With ``ids``, only those candidates (ids without a score are left out). All chunks come from
        one read transaction.
        """
        with self._read() as connection:
            n_classes = len(class_names(connection))
            fit_id = connection.execute(text(f"SELECT {_LAST_FIT}")).scalar()
            if fit_id is None:
                return
            pending: list[np.ndarray] = []
            held = 0
            for records in score_chunks(connection, fit_id, n_classes, ids):
                pending.append(records)
                held += len(records)
                while held >= chunk_size:
                    joined = np.concatenate(pending)
                    yield _score_chunk(joined[:chunk_size])
                    pending, held = [joined[chunk_size:]], held - chunk_size
            if held:
                yield _score_chunk(np.concatenate(pending))

    def predictions_for(self, ids: Sequence[int]) -> np.ndarray:
        """The last fit's predicted class position for each of ``ids`` (int64), -1 where it has none."""
        ids = np.asarray(ids, dtype=np.int64)
        out = np.full(len(ids), -1, dtype=np.int64)
        with self._read() as connection:
            n_classes = len(class_names(connection))
            fit_id = connection.execute(text(f"SELECT {_LAST_FIT}")).scalar()
            records = (None if fit_id is None
                       else score_records(connection, fit_id, n_classes, ids))
        if records is not None:
            pos = np.searchsorted(records["candidate_id"], ids)
            ok = pos < len(records)
            ok[ok] = records["candidate_id"][pos[ok]] == ids[ok]
            out[ok] = records["predicted"][pos[ok]]
        return out

    def drop_fits(self, ids: Sequence[int]) -> None:
        """Delete the fits ``ids`` with their snapshots (and scores) in one transaction."""
        ids = [int(i) for i in ids]
        if not ids:
            return
        with self._write(DERIVED) as connection:
            for start in range(0, len(ids), 500):
                chunk = {"ids": ids[start : start + 500]}
                for sql in ("DELETE FROM snapshots WHERE fit_id IN :ids",
                            "DELETE FROM scores WHERE fit_id IN :ids",
                            "DELETE FROM score_blocks WHERE fit_id IN :ids",
                            "DELETE FROM fits WHERE id IN :ids"):
                    connection.execute(text(sql).bindparams(bindparam("ids", expanding=True)), chunk)

    def clear_derived(self) -> None:
        """Delete every fit, score and snapshot in one transaction (labels are kept)."""
        with self._write(DERIVED) as connection:
            for table in ("snapshots", "scores", "score_blocks", "fits"):
                connection.execute(text(f"DELETE FROM {table}"))


_FIT_FIELDS = (
    "session_id",
    "n_labels",
    "strategy",
    "hyperparameters",
    "log_marginal_likelihood",
    "seconds",
    "event_mark",
    "model",
    "warnings",
    "full_optimize",
    "fingerprint",
    "info",
    "settings",
    "hyper_mode",
    "learnt_at",
)


def _check_session(connection: Connection, session_id: int | None) -> None:
    if session_id is None:
        return
    found = connection.execute(text("SELECT 1 FROM sessions WHERE id = :id"), {"id": session_id}).scalar()
    if found is None:
        raise UnknownSessionError(f"no session with id {session_id}")


def _fit_record(row: Row[Any]) -> FitRecord:
    values = dict(row._mapping)
    values.setdefault("model", None)
    values["full_optimize"] = bool(values["full_optimize"])
    return FitRecord(**values)


def _queue_from_blocks(connection: Connection, n_classes: int, limit: int, offset: int,
                       exclude_claimed: bool, holder: str | None, now: str) -> list[ScoreRow]:
    """`FitsMixin.queue` read from the last fit's score blocks (ranks past the `scores` table)."""
    fit_id = connection.execute(text(f"SELECT {_LAST_FIT}")).scalar_one()
    records = score_records(connection, fit_id, n_classes)
    if records is None:
        return []
    records = records[records["rank"] > 0]
    records = records[np.argsort(records["rank"], kind="stable")]
    labelled = np.fromiter(connection.execute(text(
        f"SELECT DISTINCT l.candidate_id FROM label_events l WHERE {LIVE_LABEL}")).scalars(),
        dtype=np.int64)
    keep = ~np.isin(records["candidate_id"], labelled)
    if exclude_claimed:
        held = np.fromiter(connection.execute(text(
            "SELECT candidate_id FROM claims WHERE expires_at > :now"
            " AND (CAST(:holder AS TEXT) IS NULL OR holder <> :holder)"),
            {"now": now, "holder": holder}).scalars(), dtype=np.int64)
        keep &= ~np.isin(records["candidate_id"], held)
    records = records[keep][offset:offset + limit]
    ids = records["candidate_id"].tolist()
    found = rows_by_id(connection, "SELECT id, key, meta FROM candidates WHERE id IN ({ids})", ids)
    reasons = dict(connection.execute(text(
        f"SELECT candidate_id, reason FROM scores WHERE +fit_id = {_LAST_FIT}")).all())
    chunk = _score_chunk(records)
    return [
        ScoreRow(candidate_id=cid, key=found[cid][1], meta=json_object(found[cid][2]),
                 probabilities=chunk.probabilities[i], predicted=int(chunk.predicted[i]),
                 p_top=float(chunk.p_top[i]), entropy=float(chunk.entropy[i]),
                 margin=float(chunk.margin[i]), bald=float(chunk.bald[i]),
                 priority=float(chunk.priority[i]), rank=int(chunk.rank[i]),
                 reason=reasons.get(cid))
        for i, cid in enumerate(ids)
    ]


def _rank_array(rank) -> np.ndarray:
    """Ranks as int64 with -1 for candidates outside the queue (given as None or negative)."""
    values = np.asarray(rank)
    if values.dtype == object:
        values = np.array([-1 if r is None else int(r) for r in values.tolist()], dtype=np.int64)
    values = values.astype(np.int64)
    values[values < 0] = -1
    return values


def _score_chunk(records: np.ndarray) -> ScoreChunk:
    probabilities = records["probabilities"].astype(np.float64)
    predicted = records["predicted"].astype(np.int64)
    return ScoreChunk(
        records["candidate_id"].astype(np.int64),
        probabilities,
        predicted,
        probabilities[np.arange(len(records)), predicted],
        *(records[name].astype(np.float64)
          for name in ("p_low", "p_high", "entropy", "margin", "bald", "priority")),
        rank=records["rank"].astype(np.int64),
        exact=records["exact"].astype(bool),
    )
