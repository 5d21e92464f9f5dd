"""Float64 little-endian blobs for feature rows and probability vectors."""

from collections.abc import Iterator, Sequence

import numpy as np

_DTYPE = np.dtype("<f8")


def row_blobs(X: np.ndarray) -> Iterator[bytes]:
    """One blob per row of ``X`` (n, d), each ``8 * d`` bytes, float64 little-endian."""
    rows = np.ascontiguousarray(X, dtype=_DTYPE)
    return (row.tobytes() for row in rows)


def decode_rows(blobs: Sequence[bytes], width: int) -> np.ndarray:
    """Stack blobs of ``width`` float64 values each into a native float64 array (len(blobs), width)."""
    flat = np.frombuffer(b"".join(blobs), dtype=_DTYPE)
    return flat.astype(np.float64).reshape(len(blobs), width)
