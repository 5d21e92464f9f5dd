"""Derived model state: fits, the scores of the last fit (the queue) and pool snapshots."""

from collections.abc import Iterator, Sequence
from itertools import repeat
from typing import Any, Optional

import numpy as np
from sqlalchemy import Connection, Row, bindparam, insert, select, text

from labelq.store.blobs import decode_rows, row_blobs
from labelq.store.core import StoreCore, class_names, in_given_order, json_object, rows_by_id
from labelq.store.engine import DERIVED, bulk_insert, fetch_chunks
from labelq.store.errors import UnknownSessionError
from labelq.store.models import Fit, Snapshot
from labelq.store.records import FitRecord, ScoreChunk, ScoreRow
from labelq.store.sql import LAST_FIT, queue_sql
from labelq.store.timestamps import utc_now

_INSERT_COLUMNS = ("candidate_id", "fit_id", "probabilities", "predicted", "p_top", "p_low", "p_high",
                   "entropy", "margin", "bald", "priority", "rank", "reason")
_SCORE_COLUMNS = (
    "candidate_id, probabilities, predicted, p_top, p_low, p_high, entropy, margin, bald, priority, rank"
)
_WRITE_CHUNK = 50_000
"""Score rows handed to one bulk insert."""
_LAST_FIT = LAST_FIT
_LAST_FIT_SCORES = f"FROM scores WHERE fit_id = {_LAST_FIT} AND candidate_id IN ({{ids}})"


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
        rank: Sequence[Optional[int]],
        snapshot: dict[str, Any],
        keep_models: Optional[int] = None,
        reasons: Optional[Sequence[Optional[str]]] = None,
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
        settings, hyper_mode and learnt_at (how the fit was made).
        """
        n = len(candidate_ids)
        probabilities = np.asarray(probabilities, dtype=np.float64)
        columns = [np.asarray(a) for a in (predicted, p_top, p_low, p_high, entropy, margin, bald, priority)]
        if probabilities.ndim != 2 or probabilities.shape[0] != n or any(a.shape != (n,) for a in columns):
            raise ValueError(f"scores must have {n} rows, one per candidate id")
        if len(rank) != n:
            raise ValueError(f"rank must have {n} entries, got {len(rank)}")
        reasons = [None] * n if reasons is None else list(reasons)
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
            if keep_models is not None:
                # the newest fits by id (ids of a server's sequence may have gaps)
                connection.execute(
                    text("UPDATE fits SET model = NULL WHERE model IS NOT NULL AND id NOT IN"
                         " (SELECT id FROM fits ORDER BY id DESC LIMIT :keep)"),
                    {"keep": keep_models},
                )
            rank = np.asarray(rank, dtype=object)
            ids = np.asarray(candidate_ids, dtype=np.int64)
            for start in range(0, n, _WRITE_CHUNK):
                # chunked so that the Python rows built for the bulk insert stay small on big pools
                part = slice(start, start + _WRITE_CHUNK)
                bulk_insert(
                    connection, "scores", _INSERT_COLUMNS,
                    zip(
                        ids[part].tolist(),
                        repeat(fit_id),
                        row_blobs(probabilities[part]),
                        columns[0][part].astype(np.int64).tolist(),
                        *(column[part].astype(np.float64).tolist() for column in columns[1:]),
                        [None if r is None or r < 0 else int(r) for r in rank[part].tolist()],
                        reasons[part],
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

    def last_fit(self) -> Optional[FitRecord]:
        """The latest fit with its model, or None before the first fit."""
        with self._read() as connection:
            row = connection.execute(select(Fit.__table__).order_by(Fit.id.desc()).limit(1)).first()
        return None if row is None else _fit_record(row)

    def fit_with_fingerprint(self, fingerprint: str, after_id: int = 0) -> Optional[FitRecord]:
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
        self, limit: int, offset: int = 0, exclude_claimed: bool = True, holder: Optional[str] = None
    ) -> list[ScoreRow]:
        """Unlabelled candidates of the last fit by rank ascending, ``limit`` of them from ``offset``.

        Candidates labelled since the fit are left out; with ``exclude_claimed``, so are candidates
        whose unexpired claim belongs to someone other than ``holder``.
        """
        sql = queue_sql(exclude_claimed)
        with self._read() as connection:
            n_classes = len(class_names(connection))
            rows = connection.execute(
                text(sql), {"now": utc_now(), "holder": holder, "limit": limit, "offset": offset}
            ).all()
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

    def scores(self, ids: Optional[Sequence[int]] = None, chunk_size: int = 100_000) -> Iterator[ScoreChunk]:
        """The last fit's scores as ScoreChunk arrays of at most ``chunk_size`` rows, by candidate id.

        With ``ids``, only those candidates (ids without a score are left out). All chunks come from
        one read transaction.
        """
        with self._read() as connection:
            n_classes = len(class_names(connection))
            if ids is None:
                for rows in fetch_chunks(
                    connection,
                    f"SELECT {_SCORE_COLUMNS} FROM scores WHERE +fit_id = {_LAST_FIT} ORDER BY candidate_id",
                    None,
                    chunk_size,
                ):
                    yield _score_chunk(rows, n_classes)
                return
            unique = np.unique(np.asarray(ids, dtype=np.int64))
            for start in range(0, len(unique), chunk_size):
                found = rows_by_id(
                    connection,
                    f"SELECT {_SCORE_COLUMNS} {_LAST_FIT_SCORES}",
                    unique[start : start + chunk_size].tolist(),
                )
                if found:
                    yield _score_chunk([found[cid] for cid in sorted(found)], n_classes)

    def predictions_for(self, ids: Sequence[int]) -> np.ndarray:
        """The last fit's predicted class position for each of ``ids`` (int64), -1 where it has none."""
        with self._read() as connection:
            found = rows_by_id(
                connection,
                f"SELECT candidate_id, predicted {_LAST_FIT_SCORES}",
                ids,
            )
        return np.fromiter(
            (row[1] for row in in_given_order(found, ids, lambda _: (None, -1))),
            dtype=np.int64,
            count=len(ids),
        )

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
                            "DELETE FROM fits WHERE id IN :ids"):
                    connection.execute(text(sql).bindparams(bindparam("ids", expanding=True)), chunk)

    def clear_derived(self) -> None:
        """Delete every fit, score and snapshot in one transaction (labels are kept)."""
        with self._write(DERIVED) as connection:
            for table in ("snapshots", "scores", "fits"):
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


def _check_session(connection: Connection, session_id: Optional[int]) -> None:
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


def _score_chunk(rows: Sequence[tuple[Any, ...]], n_classes: int) -> ScoreChunk:
    cid, blobs, predicted, p_top, p_low, p_high, entropy, margin, bald, priority, rank = zip(*rows)
    floats = [
        np.array(values, dtype=np.float64)
        for values in (p_top, p_low, p_high, entropy, margin, bald, priority)
    ]
    return ScoreChunk(
        np.array(cid, dtype=np.int64),
        decode_rows(blobs, n_classes),
        np.array(predicted, dtype=np.int64),
        *floats,
        rank=np.array([-1 if r is None else r for r in rank], dtype=np.int64),
    )
