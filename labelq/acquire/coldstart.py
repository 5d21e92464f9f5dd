"""Cold start: spread-out first candidates by greedy farthest-point traversal."""

import numpy as np

from labelq.acquire.checks import check_count

# Elements of one (rows, centres, features) distance block: 2**22 doubles = 32 MiB.
_BLOCK_ELEMENTS = 1 << 22


def cold_start(X, n, labelled=None, seed=0):
    """Propose ``min(n, n_unlabelled)`` spread-out candidates before the model can rank any.

    Greedy farthest-point traversal (Gonzalez 1985, "Clustering to minimize the maximum
    intercluster distance", Theoretical Computer Science 38): each pick is the candidate
    farthest (Euclidean) from everything picked or labelled so far, which covers the pool
    within twice the optimal k-center radius. With no labelled rows the first pick is the
    candidate nearest the centroid; otherwise the first pick already is the farthest from the
    labelled rows. Picked and labelled rows are never picked again, so duplicated rows give
    distinct indices (and a copy of a picked row comes only once every distinct row is taken).
    Exact ties are broken by a permutation of the rows seeded with ``seed``, so the result is
    deterministic for a seed and does not favour the pool's import order.

    Memory is O(n_candidates): one running nearest-distance array, updated in row blocks.

    Parameters
    ----------
    X : array of shape (n_candidates, n_features)
        Standardised features.
    n : int
        Number of candidates wanted.
    labelled : int array of shape (n_labelled,), optional
        Row indices of the candidates already labelled.
    seed : int

    Returns
    -------
    int ndarray of shape (min(n, n_candidates - n_labelled),), row indices in pick order.
    """
    X = np.asarray(X, dtype=float)
    if X.ndim != 2 or X.shape[1] == 0:
        raise ValueError(f"X must have shape (n_candidates, n_features >= 1), got {X.shape}")
    if not np.isfinite(X).all():
        raise ValueError(f"X holds a non-finite value: {X[~np.isfinite(X)][0]!r}")
    labelled = _check_labelled(labelled, X.shape[0])
    n = min(check_count(n), X.shape[0] - labelled.size)
    tie_rank = np.empty(X.shape[0], dtype=np.int64)
    tie_rank[np.random.default_rng(seed).permutation(X.shape[0])] = np.arange(X.shape[0])
    picks = np.empty(n, dtype=np.int64)
    if n == 0:
        return picks
    nearest = np.full(X.shape[0], np.inf)
    if labelled.size:
        _update_nearest(X, X[labelled], nearest)
        nearest[labelled] = -np.inf
        picks[0] = _argmax_with_ties(nearest, tie_rank)
    else:
        centroid = X.mean(axis=0, keepdims=True)
        to_centroid = _update_nearest(X, centroid, np.full(X.shape[0], np.inf))
        picks[0] = _argmax_with_ties(-to_centroid, tie_rank)
    for t in range(1, n):
        # Gonzalez 1985: next centre = the row farthest from its nearest centre so far.
        previous = picks[t - 1]
        _update_nearest(X, X[previous : previous + 1], nearest)
        nearest[previous] = -np.inf
        picks[t] = _argmax_with_ties(nearest, tie_rank)
    return picks


def _check_labelled(labelled, n_candidates):
    """Return labelled row indices as a unique int array within range."""
    if labelled is None:
        return np.empty(0, dtype=np.int64)
    labelled = np.asarray(labelled)
    if labelled.ndim != 1 or (labelled.size and not np.issubdtype(labelled.dtype, np.integer)):
        raise ValueError(
            f"labelled must be a 1-D array of row indices, got dtype {labelled.dtype} "
            f"shape {labelled.shape}"
        )
    bad = (labelled < 0) | (labelled >= n_candidates)
    if bad.any():
        raise ValueError(f"labelled index {labelled[bad][0]} is outside 0..{n_candidates - 1}")
    return np.unique(labelled).astype(np.int64)


def _update_nearest(X, centres, nearest):
    """nearest = min(nearest, squared distance from each row of X to its nearest centre)."""
    rows = max(1, _BLOCK_ELEMENTS // (centres.shape[0] * X.shape[1]))
    for start in range(0, X.shape[0], rows):
        block = slice(start, start + rows)
        diff = X[block, None, :] - centres[None, :, :]
        squared = np.einsum("rcd,rcd->rc", diff, diff).min(axis=1)
        np.minimum(nearest[block], squared, out=nearest[block])
    return nearest


def _argmax_with_ties(values, tie_rank):
    """Index of the largest value; among exact ties the one with the smallest tie_rank."""
    tied = np.flatnonzero(values == values.max())
    return tied[np.argmin(tie_rank[tied])]
