"""Reading and writing column blocks (labelq.store.columns) inside a store transaction."""

from __future__ import annotations

from collections.abc import Iterator, Sequence

import numpy as np
from sqlalchemy import Connection, bindparam, text

from labelq.store.columns import (
    pack_features,
    pack_scores,
    split_rows,
    unpack_features,
    unpack_scores,
)

_INSERT_FEATURES = text(
    "INSERT INTO feature_blocks (first_id, last_id, n_rows, mark, data, checksum)"
    " VALUES (:first, :last, :n, :mark, :data, :crc)")
_INSERT_SCORES = text(
    "INSERT INTO score_blocks (fit_id, block, first_id, last_id, n_rows, data, checksum)"
    " VALUES (:fit, :block, :first, :last, :n, :data, :crc)")


def insert_features(connection: Connection, ids: np.ndarray, X: np.ndarray, mark: int) -> None:
    """Store candidates ``ids`` (ascending, new) with feature rows ``X`` as feature blocks of the
    import at event ``mark``."""
    for part in split_rows(len(ids)):
        block = pack_features(ids[part], X[part])
        connection.execute(_INSERT_FEATURES, {
            "first": block.first_id, "last": block.last_id, "n": block.n_rows, "mark": mark,
            "data": block.data, "crc": block.checksum})


def feature_chunks(connection: Connection, width: int,
                   max_mark: int | None = None) -> Iterator[tuple[np.ndarray, np.ndarray]]:
    """(ids, X) of every feature block in id order (with ``max_mark``, of imports at or before it)."""
    where = "" if max_mark is None else " WHERE mark <= :mark"
    index = connection.execute(text(f"SELECT id FROM feature_blocks{where} ORDER BY first_id"),
                               {"mark": max_mark}).scalars().all()
    for block_id in index:  # one block in memory at a time
        yield _feature_block(connection, block_id, width)


def _feature_block(connection: Connection, block_id: int, width: int):
    n_rows, data, crc = connection.execute(
        text("SELECT n_rows, data, checksum FROM feature_blocks WHERE id = :id"),
        {"id": block_id}).one()
    return unpack_features(bytes(data), n_rows, width, crc, f"feature block {block_id}")


def features_for(connection: Connection, width: int,
                 ids: Sequence[int]) -> tuple[np.ndarray, np.ndarray]:
    """(found (m,) bool, X (m, d)) for ``ids`` in the given order; rows not found are zero."""
    wanted = np.asarray(ids, dtype=np.int64)
    X = np.zeros((len(wanted), width))
    found = np.zeros(len(wanted), dtype=bool)
    if not len(wanted):
        return found, X
    index = connection.execute(
        text("SELECT id, first_id, last_id FROM feature_blocks ORDER BY first_id")).all()
    for block_id in _blocks_holding(index, wanted):
        block_ids, block_X = _feature_block(connection, block_id, width)
        _gather(block_ids, block_X, wanted, found, X)
    return found, X


def insert_scores(connection: Connection, fit_id: int, records: np.ndarray) -> None:
    """Store one fit's score records (ascending candidate ids) as score blocks."""
    for block_no, part in enumerate(split_rows(len(records))):
        block = pack_scores(records[part])
        connection.execute(_INSERT_SCORES, {
            "fit": fit_id, "block": block_no, "first": block.first_id, "last": block.last_id,
            "n": block.n_rows, "data": block.data, "crc": block.checksum})


def score_chunks(connection: Connection, fit_id: int, n_classes: int,
                 ids: Sequence[int] | None = None) -> Iterator[np.ndarray]:
    """The fit's score records block by block in id order; with ``ids``, only the blocks holding
    them, each cut to the records of ``ids`` (ids without a record are left out)."""
    index = connection.execute(
        text("SELECT block, first_id, last_id FROM score_blocks WHERE fit_id = :fit"
             " ORDER BY block"), {"fit": fit_id}).all()
    wanted = None if ids is None else np.unique(np.asarray(ids, dtype=np.int64))
    blocks = [b for b, _, _ in index] if wanted is None else _blocks_holding(index, wanted)
    for block_no in blocks:
        n_rows, data, crc = connection.execute(
            text("SELECT n_rows, data, checksum FROM score_blocks WHERE fit_id = :fit"
                 " AND block = :block"), {"fit": fit_id, "block": block_no}).one()
        records = unpack_scores(bytes(data), n_rows, n_classes, crc,
                                f"score block {block_no} of fit {fit_id}")
        if wanted is not None:
            records = records[np.isin(records["candidate_id"], wanted)]
        if len(records):
            yield records


def score_records(connection: Connection, fit_id: int, n_classes: int,
                  ids: Sequence[int] | None = None) -> np.ndarray | None:
    """All records of `score_chunks` in one array (None when there are none)."""
    parts = list(score_chunks(connection, fit_id, n_classes, ids))
    return np.concatenate(parts) if parts else None


def delete_scores(connection: Connection, fit_ids: Sequence[int] | None = None) -> None:
    """Drop the score blocks of ``fit_ids`` (all of them when None)."""
    if fit_ids is None:
        connection.execute(text("DELETE FROM score_blocks"))
        return
    connection.execute(text("DELETE FROM score_blocks WHERE fit_id IN :ids").bindparams(
        bindparam("ids", expanding=True)), {"ids": [int(i) for i in fit_ids]})


def _blocks_holding(index: Sequence[tuple[int, int, int]], wanted: np.ndarray) -> list[int]:
    """Block keys (first column of ``index``, rows ordered by first id) whose id range holds any
    of ``wanted``."""
    if not index:
        return []
    keys, first, last = (np.asarray(c) for c in zip(*index))
    unique = np.unique(wanted)
    slot = np.searchsorted(first, unique, side="right") - 1
    ok = slot >= 0
    slot, unique = slot[ok], unique[ok]
    inside = unique <= last[slot]
    return [int(k) for k in keys[np.unique(slot[inside])]]


def _gather(block_ids, block_X, wanted, found, X) -> None:
    pos = np.searchsorted(block_ids, wanted)
    pos_ok = pos < len(block_ids)
    hit = np.zeros(len(wanted), dtype=bool)
    hit[pos_ok] = block_ids[pos[pos_ok]] == wanted[pos_ok]
    X[hit] = block_X[pos[hit]]
    found |= hit
