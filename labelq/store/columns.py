"""Column blocks: the pool's features and each fit's per-candidate scores as arrays in blobs.

What is read and written in bulk (every feature of the pool at each refit, every candidate's
scores at each fit) is kept as NumPy arrays packed into blobs of at most `BLOCK_ROWS` rows, one
table row per block, instead of one table row per candidate: a fit over 100,000 candidates
writes four blobs instead of 100,000 rows through four B-trees (revision 0007).

Each block holds its rows' candidate ids (ascending) beside the values, the first and last id
(so a read of a few candidates touches only their blocks), and a CRC-32 of its bytes, verified on
every read: a damaged block raises `DamagedBlockError` naming it, and `labelq check` lists every
damaged block. Feature blocks are primary data (restore or re-import); score blocks are derived
and `labelq rebuild` remakes them.

Layout (little-endian): a feature block is ``ids`` (n int64) then ``values`` (n x d float64,
row-major); a score block is one NumPy structured array of `score_dtype` (n records).
"""

from __future__ import annotations

import zlib
from dataclasses import dataclass

import numpy as np

from labelq.errors import LabelqError

BLOCK_ROWS = 32_768
"""Rows per block: 8 MiB of features at d = 32, about 2 MiB of scores at three classes; a read
of one candidate decodes one block."""

_IDS = np.dtype("<i8")
_VALUES = np.dtype("<f8")


class DamagedBlockError(LabelqError):
    """A stored block's bytes do not match its checksum or its declared size."""


def checksum(data: bytes) -> int:
    """CRC-32 of ``data`` (zlib), an int in [0, 2^32)."""
    return zlib.crc32(data) & 0xFFFFFFFF


def score_dtype(n_classes: int) -> np.dtype:
    """The record of one candidate's scores under one fit (``n_classes`` probabilities).

    Probabilities and the priority are float64 (exported and ranked); the interval, entropy,
    margin and BALD, which are shown with three or four digits, are float32. ``exact`` is 1 when
    the row's latent variance was computed exactly, 0 when it is an upper bound (see
    labelq.policy.bounded); ``rank`` is -1 for candidates outside the queue.
    """
    return np.dtype([
        ("candidate_id", "<i8"),
        ("probabilities", "<f8", (n_classes,)),
        ("priority", "<f8"),
        ("p_low", "<f4"),
        ("p_high", "<f4"),
        ("entropy", "<f4"),
        ("margin", "<f4"),
        ("bald", "<f4"),
        ("rank", "<i4"),
        ("predicted", "<i2"),
        ("exact", "u1"),
    ])


@dataclass(frozen=True)
class Block:
    """One block as stored: the first and last candidate id, row count, bytes and checksum."""

    first_id: int
    last_id: int
    n_rows: int
    data: bytes
    checksum: int


def pack_features(ids: np.ndarray, X: np.ndarray) -> Block:
    """A feature block of ``ids`` (n,) ascending and their rows ``X`` (n, d)."""
    ids = np.ascontiguousarray(ids, dtype=_IDS)
    data = ids.tobytes() + np.ascontiguousarray(X, dtype=_VALUES).tobytes()
    return Block(int(ids[0]), int(ids[-1]), len(ids), data, checksum(data))


def unpack_features(data: bytes, n_rows: int, width: int, stored_checksum: int,
                    where: str) -> tuple[np.ndarray, np.ndarray]:
    """(ids (n,), X (n, d)) of a feature block; DamagedBlockError naming ``where`` when its size
    or checksum is wrong."""
    _verify(data, n_rows * (8 + 8 * width), stored_checksum, where)
    ids = np.frombuffer(data, dtype=_IDS, count=n_rows).astype(np.int64)
    X = np.frombuffer(data, dtype=_VALUES, offset=8 * n_rows).astype(np.float64)
    return ids, X.reshape(n_rows, width)


def pack_scores(records: np.ndarray) -> Block:
    """A score block of ``records`` (a `score_dtype` array, ascending candidate ids)."""
    data = np.ascontiguousarray(records).tobytes()
    ids = records["candidate_id"]
    return Block(int(ids[0]), int(ids[-1]), len(records), data, checksum(data))


def unpack_scores(data: bytes, n_rows: int, n_classes: int, stored_checksum: int,
                  where: str) -> np.ndarray:
    """The `score_dtype` records of a score block (a writable copy); DamagedBlockError naming
    ``where`` when its size or checksum is wrong."""
    dtype = score_dtype(n_classes)
    _verify(data, n_rows * dtype.itemsize, stored_checksum, where)
    return np.frombuffer(data, dtype=dtype, count=n_rows).copy()


def block_problem(data: bytes, expected_size: int, stored_checksum: int) -> str | None:
    """Why a block is damaged (in words), or None when its size and checksum match."""
    if data is None or len(data) != expected_size:
        size = "no" if data is None else f"{len(data):,}"
        return f"{size} bytes where {expected_size:,} are expected"
    if checksum(bytes(data)) != int(stored_checksum):
        return "its checksum does not match its bytes"
    return None


def _verify(data: bytes, expected_size: int, stored_checksum: int, where: str) -> None:
    problem = block_problem(data, expected_size, stored_checksum)
    if problem is not None:
        raise DamagedBlockError(f"{where} is damaged ({problem}): run `labelq check`, then"
                                " `labelq rebuild` for scores or restore the store from a backup"
                                " for features")


def split_rows(n: int, size: int = BLOCK_ROWS) -> list[slice]:
    """Slices of at most ``size`` rows covering range(n)."""
    return [slice(start, min(start + size, n)) for start in range(0, n, size)]
