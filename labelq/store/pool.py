"""The pool: importing candidates, their features, keys and metadata, and pool-wide feature scaling."""

import json
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass
from itertools import repeat
from typing import Any, NoReturn

import numpy as np
from sqlalchemy import Connection, bindparam, text

from labelq.store.blockio import feature_chunks, features_for, insert_features
from labelq.store.classes import resolve_class
from labelq.store.core import (
    CURRENT_LABEL_IDS,
    LIVE_LABEL,
    LIVE_SKIP,
    StoreCore,
    candidate_id,
    class_names,
    in_given_order,
    json_object,
    rows_by_id,
)
from labelq.store.core import feature_names as stored_feature_names
from labelq.store.engine import (
    ConstraintViolation,
    bulk_insert,
    bump_event_mark,
    fetch_chunks,
    is_sqlite,
)
from labelq.store.errors import (
    DuplicateKeyError,
    FeatureMismatchError,
    UnknownCandidateError,
)
from labelq.store.records import CandidateRecord
from labelq.store.timestamps import utc_now

_CANDIDATE_COLUMNS = ("id", "key", "meta", "added_at", "added_mark")
_LABEL_COLUMNS = ("candidate_id", "class", "by", "at", "mark")


class PoolMixin(StoreCore):
    """Candidates and their features."""

    @property
    def feature_names(self) -> list[str]:
        """Feature names in column order; empty before the first import."""
        with self._read() as connection:
            return stored_feature_names(connection)

    def feature_scaling(self) -> tuple[np.ndarray, np.ndarray]:
        """Pool-wide feature mean (d,) and scale (d,), the population std or 1.0 where it is 0."""
        with self._read() as connection:
            rows = connection.execute(text("SELECT mean, scale FROM feature_schema ORDER BY position")).all()
        table = np.array(rows, dtype=np.float64).reshape(len(rows), 2)
        return table[:, 0].copy(), table[:, 1].copy()

    def add_candidates(
        self,
        keys: Sequence[str],
        X: np.ndarray,
        meta: Sequence[dict[str, Any]],
        feature_names: Sequence[str],
        labels: Sequence[str | None] | None = None,
        by: str = "import",
    ) -> int:
        """Add candidates with features ``X`` (n, d) in one transaction; the number added.

        The first import sets the feature schema; later ones must name the same features in the same
        order. Given labels become label events by ``by``. The feature mean and scale are then
        recomputed over the whole pool.
        """
        X = np.asarray(X, dtype=np.float64)
        _validate_import(keys, X, meta, feature_names, labels)
        if not keys:
            return 0
        part = ImportPart(list(keys), X, list(meta), list(feature_names), labels)
        return self.add_candidate_parts([part], by=by)

    def add_candidate_parts(self, parts: Iterable["ImportPart"], by: str = "import") -> int:
        """Add the candidates of ``parts`` (objects with ``keys``, ``X``, ``meta``,
        ``feature_names`` and ``labels``, such as labelq.ingest.CandidateTable) in one
        transaction, one part at a time, so that a large import is never held whole; the number
        added. An exception from the iterable (a bad row late in a file) rolls everything back.

        Every part must name the same features; the rest is as `add_candidates`. The candidates
        get one event mark, and their features go into feature blocks part by part.
        """
        added = 0
        with self._write() as connection:
            # ids given, contiguous after the largest (the write lock keeps other imports out)
            first_id = (
                1 + connection.execute(text("SELECT COALESCE(MAX(id), 0) FROM candidates")).scalar_one()
            )
            now, mark, names = utc_now(), None, None
            for part in parts:
                X = np.asarray(part.X, dtype=np.float64)
                _validate_import(part.keys, X, part.meta, part.feature_names, part.labels)
                if names is None:
                    names = list(part.feature_names)
                    _ensure_schema(connection, names)
                elif list(part.feature_names) != names:
                    raise ValueError("every part of an import must name the same features")
                if not part.keys:
                    continue
                if mark is None:
                    mark = bump_event_mark(connection)
                start = first_id + added
                _insert_part(connection, part, X, start, now, mark, by)
                added += len(part.keys)
            if not added:
                return 0
            if not is_sqlite(connection):  # the id sequence follows the ids given
                connection.execute(text(
                    "SELECT setval(pg_get_serial_sequence('candidates', 'id'), MAX(id)) FROM candidates"))
            _update_scaling(connection, len(names))
        return added

    def counts(self) -> dict[str, int]:
        """Numbers of candidates, labelled candidates and skipped candidates."""
        with self._read() as connection:
            return {
                "candidates": connection.execute(text("SELECT COUNT(*) FROM candidates")).scalar_one(),
                "labelled": connection.execute(
                    text(f"SELECT COUNT(DISTINCT l.candidate_id) FROM label_events l WHERE {LIVE_LABEL}")
                ).scalar_one(),
                "skipped": connection.execute(
                    text(f"SELECT COUNT(*) FROM skip_events s WHERE {LIVE_SKIP}")
                ).scalar_one(),
            }

    def pool_ids(self) -> np.ndarray:
        """Every candidate id in id order, int64 (n,)."""
        with self._read() as connection:
            chunks = fetch_chunks(connection, "SELECT id FROM candidates ORDER BY id")
            return np.fromiter((row[0] for rows in chunks for row in rows), dtype=np.int64)

    def iter_features(
        self, chunk_size: int = 100_000, max_mark: int | None = None
    ) -> Iterator[tuple[np.ndarray, np.ndarray]]:
        """Yield ``(ids (m,), X (m, d))`` in id order, at most ``chunk_size`` rows at a time (one
        feature block in memory at a time).

        With ``max_mark``, only candidates imported at or before that event mark (the pool as it
        stood then). All chunks come from one read transaction: a consistent view of the pool.
        """
        with self._read() as connection:
            width = len(stored_feature_names(connection))
            for ids, X in feature_chunks(connection, width, max_mark):
                for start in range(0, len(ids), chunk_size):
                    yield ids[start:start + chunk_size], X[start:start + chunk_size]

    def features(self, ids: Sequence[int]) -> np.ndarray:
        """Feature rows (len(ids), d) in the order of ``ids``; UnknownCandidateError for a missing id."""
        with self._read() as connection:
            width = len(stored_feature_names(connection))
            found, X = features_for(connection, width, ids)
        if not found.all():
            _unknown_candidate(int(np.asarray(ids)[~found][0]))
        return X

    def keys(self, ids: Sequence[int]) -> list[str]:
        """Candidate keys in the order of ``ids``."""
        with self._read() as connection:
            found = rows_by_id(connection, "SELECT id, key FROM candidates WHERE id IN ({ids})", ids)
        return [row[1] for row in in_given_order(found, ids, _unknown_candidate)]

    def metas(self, ids: Sequence[int]) -> list[dict[str, Any]]:
        """Candidate metadata in the order of ``ids``."""
        with self._read() as connection:
            found = rows_by_id(connection, "SELECT id, meta FROM candidates WHERE id IN ({ids})", ids)
        return [json_object(row[1]) for row in in_given_order(found, ids, _unknown_candidate)]

    def candidate(self, key: str) -> CandidateRecord:
        """The candidate ``key`` with its features by name, metadata, current label and skip state."""
        with self._read() as connection:
            cid = candidate_id(connection, key)
            names = stored_feature_names(connection)
            meta = connection.execute(
                text("SELECT meta FROM candidates WHERE id = :id"), {"id": cid}
            ).scalar_one()
            values = features_for(connection, len(names), [cid])[1][0]
            label = connection.execute(
                text(
                    f"SELECT class FROM label_events WHERE id IN ({CURRENT_LABEL_IDS}) AND candidate_id = :id"
                ),
                {"id": cid},
            ).scalar()
            skipped = connection.execute(
                text(
                    f"SELECT EXISTS (SELECT 1 FROM skip_events s WHERE s.candidate_id = :id AND {LIVE_SKIP})"
                ),
                {"id": cid},
            ).scalar_one()
        return CandidateRecord(
            id=cid,
            key=key,
            features=dict(zip(names, values.tolist())),
            meta=json_object(meta),
            label=label,
            skipped=bool(skipped),
        )


@dataclass
class ImportPart:
    """Candidates to add: keys (m,), features X (m, d), metadata (m,), feature names (d,) and
    labels (m,) or None; labelq.ingest.CandidateTable has the same fields."""

    keys: list[str]
    X: np.ndarray
    meta: list[dict[str, Any]]
    feature_names: list[str]
    labels: Sequence[str | None] | None = None


def _insert_part(connection: Connection, part, X: np.ndarray, first_id: int, now: str, mark: int,
                 by: str) -> None:
    """Candidate rows, feature blocks and label events of one part, ids from ``first_id``."""
    keys = part.keys
    labels = None if part.labels is None else _resolve_labels(connection, part.labels)
    try:
        bulk_insert(
            connection, "candidates", _CANDIDATE_COLUMNS,
            zip(range(first_id, first_id + len(keys)), keys,
                ("{}" if not m else json.dumps(m) for m in part.meta), repeat(now), repeat(mark)),
        )
    except ConstraintViolation:
        raise DuplicateKeyError(
            f"candidate key {_first_stored_key(connection, keys, first_id)!r} is already in the store"
        ) from None
    insert_features(connection, np.arange(first_id, first_id + len(keys), dtype=np.int64), X, mark)
    if labels is not None:
        bulk_insert(
            connection, "label_events", _LABEL_COLUMNS,
            ((first_id + i, label, by, now, mark) for i, label in enumerate(labels)
             if label is not None),
        )


def _unknown_candidate(cid: int) -> NoReturn:
    raise UnknownCandidateError(f"no candidate with id {cid}")


def _validate_import(
    keys: Sequence[str],
    X: np.ndarray,
    meta: Sequence[dict[str, Any]],
    names: Sequence[str],
    labels: Sequence[str | None] | None,
) -> None:
    """Check shapes and values of an import; DuplicateKeyError for a key repeated in the input."""
    if X.ndim != 2 or X.shape[0] != len(keys):
        raise ValueError(f"X must have shape ({len(keys)}, d) to match the keys, got {X.shape}")
    if len(meta) != len(keys) or (labels is not None and len(labels) != len(keys)):
        raise ValueError(f"meta and labels must have one entry per key ({len(keys)})")
    if len(names) != X.shape[1] or len(set(names)) != len(names) or not all(names):
        raise ValueError(f"feature names must be {X.shape[1]} distinct non-empty names, got {list(names)}")
    if not np.isfinite(X).all():
        raise ValueError("features must be finite numbers")
    seen: set[str] = set()
    for key in keys:
        if key in seen:
            raise DuplicateKeyError(f"candidate key {key!r} appears more than once in the input")
        seen.add(key)


def _resolve_labels(connection: Connection, labels: Sequence[str | None]) -> list[str | None]:
    """Each given label as its stored class name (any case, or the class's number; see
    labelq.store.classes); UnknownClassError with a did-you-mean for the first that names none."""
    classes = class_names(connection)
    found: dict[str, str] = {}
    out = []
    for label in labels:
        if label is not None and label not in found:
            found[label] = resolve_class(label, classes)
        out.append(None if label is None else found[label])
    return out


def _ensure_schema(connection: Connection, names: list[str]) -> None:
    """Write the feature schema on the first import; FeatureMismatchError if it differs later."""
    stored = stored_feature_names(connection)
    if not stored:
        connection.execute(
            text(
                "INSERT INTO feature_schema (name, position, mean, scale) VALUES (:name, :position, 0.0, 1.0)"
            ),
            [{"name": name, "position": position} for position, name in enumerate(names)],
        )
    elif stored != names:
        raise FeatureMismatchError(
            f"features {','.join(names)} do not match the store's features {','.join(stored)}"
        )


def _first_stored_key(connection: Connection, keys: Sequence[str], first_new_id: int) -> str:
    """The first of ``keys`` (input order) held by a candidate stored before this import."""
    query = text("SELECT key FROM candidates WHERE id < :first AND key IN :keys").bindparams(
        bindparam("keys", expanding=True))
    for start in range(0, len(keys), 500):
        chunk = list(keys[start : start + 500])
        stored = set(connection.execute(query, {"first": first_new_id, "keys": chunk}).scalars())
        for key in chunk:
            if key in stored:
                return key
    raise AssertionError("an import failed on a key constraint without a stored duplicate")


def _update_scaling(connection: Connection, width: int) -> None:
    """Recompute each feature's mean and scale over the whole pool and store them."""
    mean, scale = pool_moments(X for _, X in feature_chunks(connection, width))
    connection.execute(
        text("UPDATE feature_schema SET mean = :mean, scale = :scale WHERE position = :position"),
        [
            {"mean": m, "scale": s, "position": position}
            for position, (m, s) in enumerate(zip(mean.tolist(), scale.tolist()))
        ],
    )


def pool_moments(chunks: Iterator[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Column mean (d,) and scale (d,) of row chunks (m, d) streamed once.

    Chunks are merged with the pairwise update of Chan, Golub & LeVeque (1979), "Updating formulae
    and a pairwise algorithm for computing sample variances"; scale is the population standard
    deviation, or 1.0 where it is zero or not finite.
    """
    count = 0
    mean: np.ndarray | None = None
    m2: np.ndarray | None = None
    for X in chunks:
        n_b = X.shape[0]
        mean_b = X.mean(axis=0)
        m2_b = ((X - mean_b) ** 2).sum(axis=0)
        if mean is None or m2 is None:
            count, mean, m2 = n_b, mean_b, m2_b
            continue
        delta = mean_b - mean
        total = count + n_b
        mean = mean + delta * (n_b / total)
        m2 = m2 + m2_b + delta**2 * (count * n_b / total)
        count = total
    if mean is None or m2 is None:
        raise ValueError("pool_moments needs at least one chunk")
    std = np.sqrt(m2 / count)
    scale = np.where(np.isfinite(std) & (std > 0), std, 1.0)
    return mean, scale
