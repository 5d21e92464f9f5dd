"""The fixed subset of candidates on which successive fits' predictions are compared."""

import numpy as np

_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_MIX1 = np.uint64(0xBF58476D1CE4E5B9)
_MIX2 = np.uint64(0x94D049BB133111EB)


def _splitmix64(ids: np.ndarray) -> np.ndarray:
    """SplitMix64 finaliser of each id: a bijection on 64-bit integers that scatters nearby ids.

    Source: G. L. Steele, D. Lea & C. H. Flood (2014), "Fast splittable pseudorandom number
    generators", OOPSLA (the ``mix64`` variant with constants as in Java's SplittableRandom).
    """
    z = ids.astype(np.uint64) + _GOLDEN  # uint64 arithmetic wraps modulo 2**64, as intended
    z = (z ^ (z >> np.uint64(30))) * _MIX1
    z = (z ^ (z >> np.uint64(27))) * _MIX2
    return z ^ (z >> np.uint64(31))


def stop_set(ids: np.ndarray, size: int = 2000) -> np.ndarray:
    """Choose up to ``size`` candidate ids, deterministically, as the stop set.

    Every id gets a fixed pseudo-random key (SplitMix64 of the id); the stop set is the ``size``
    ids with the smallest keys (a bottom-k sample: E. Cohen & H. Kaplan (2007), "Summarizing data
    using bottom-k sketches", PODC). Because an id's key never depends on the other ids,
    the set is stable: removing one id (e.g. it got labelled) replaces at most that one member,
    and adding ids only lets a newcomer displace the member with the largest key. Pass every
    candidate id (labelled ones too) to get a set that does not change at all as labels arrive.
    Bloodgood & Vijay-Shanker (2009) use a stop set of 2000 examples, hence the default.

    Parameters
    ----------
    ids : ndarray of int64, shape (n,), strictly increasing
    size : int, positive

    Returns
    -------
    ndarray of int64, shape (min(n, size),), sorted ascending.
    """
    ids = np.asarray(ids)
    if ids.ndim != 1 or (ids.size and not np.issubdtype(ids.dtype, np.integer)):
        raise ValueError(
            f"ids must be a 1-D integer array, got dtype {ids.dtype} shape {ids.shape}"
        )
    if np.any(np.diff(ids) <= 0):
        raise ValueError("ids must be sorted ascending without repeats")
    if size < 1:
        raise ValueError(f"size must be positive, got {size}")
    ids = ids.astype(np.int64)
    if ids.size <= size:
        return ids.copy()
    keep = np.argpartition(_splitmix64(ids), size - 1)[:size]
    return np.sort(ids[keep])
