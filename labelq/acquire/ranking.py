"""Deterministic queue order from priorities, candidate ids and skips."""

import numpy as np

from labelq.acquire.checks import check_mask


def rank_order(priority, ids, skipped_mask=None):
    """Indices that put the queue in order, shape (n_candidates,) int.

    Unskipped candidates by priority descending, ties broken by ascending candidate id, then the
    skipped candidates after all unskipped ones, ordered the same way (common practice, no
    published source).

    Parameters
    ----------
    priority : array of shape (n_candidates,), finite; higher = ask sooner
    ids : array of shape (n_candidates,) of candidate ids (any sortable dtype)
    skipped_mask : boolean array of shape (n_candidates,), optional
    """
    priority = np.asarray(priority, dtype=float)
    ids = np.asarray(ids)
    if priority.ndim != 1:
        raise ValueError(f"priority must be 1-D, got shape {priority.shape}")
    if ids.shape != priority.shape:
        raise ValueError(f"ids shape {ids.shape} does not match priority shape {priority.shape}")
    if not np.isfinite(priority).all():
        bad = priority[~np.isfinite(priority)][0]
        raise ValueError(f"priority holds a non-finite value: {bad!r}")
    skipped = check_mask(skipped_mask, priority.shape[0])
    # np.lexsort sorts by the last key first: skipped last, then priority down, then id up.
    return np.lexsort((ids, -priority, skipped))
