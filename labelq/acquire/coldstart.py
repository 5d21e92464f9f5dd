"""Cold start: first candidates to label before the model can rank any.

``cold_start`` spreads them out (greedy farthest-point traversal); ``typical_start`` takes the
most typical member of each of the largest clusters (TypiClust, Hacohen et al. 2022).
"""

import inspect
import warnings
from collections import namedtuple

import numpy as np
from scipy.cluster.vq import kmeans2, vq

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
    X = _check_features(X)
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


def _check_features(X):
    """Return X as a finite float64 array of shape (n_candidates, n_features >= 1)."""
    X = np.asarray(X, dtype=float)
    if X.ndim != 2 or X.shape[1] == 0:
        raise ValueError(f"X must have shape (n_candidates, n_features >= 1), got {X.shape}")
    if not np.isfinite(X).all():
        raise ValueError(f"X holds a non-finite value: {X[~np.isfinite(X)][0]!r}")
    return X


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


# --- representative cold start ------------------------------------------------------------

TypicalPicks = namedtuple("TypicalPicks", ["rows", "cluster_size"])
TypicalPicks.__doc__ = """Result of :func:`typical_start`.

rows : int64 (k,)
    Row indices in pick order.
cluster_size : int64 (k,)
    Number of unlabelled candidates in the k-means cluster each pick was taken from.
"""

# Pools with more rows than this fit the k-means centroids on a seeded subsample of this many
# rows, then assign every row to its nearest centroid (a cost choice, not a published value).
_FIT_SAMPLE = 20_000

# k-means runs from independent k-means++ seedings; the one with the lowest within-cluster
# sum of squares is kept.
_KMEANS_RESTARTS = 3

# scipy >= 1.15 names the k-means generator ``rng``; older releases call it ``seed``.
_KMEANS_RNG = "rng" if "rng" in inspect.signature(kmeans2).parameters else "seed"


def typical_start(X, n, labelled=None, seed=0, n_neighbours=20, density_sample=2000):
    """Typical points of clusters (Hacohen, Dekel & Weinshall 2022, 'Active learning on a
    budget: opposite strategies suit high and low budgets', ICML; TypiClust).

    Hacohen et al. (2022) show that with very few labels the most useful points to label are
    *typical* ones (in dense regions) rather than outliers or boundary points, and propose:

    1. cluster the pool with k-means into ``n_labelled + n`` clusters, so that every label and
       every pick can own a cluster;
    2. repeatedly take the cluster with the fewest labelled-or-picked members, the largest
       among those, and pick its most typical unlabelled member, where

           typicality(x) = 1 / mean(||x - x_i||_2 for x_i among the K nearest neighbours of x)

       (their typicality definition; K = 20 in the paper, recalled from memory), neighbours
       being taken within the cluster.

    Here the cluster order is: fewest labelled-or-picked members first, then most unlabelled
    members, then a seeded shuffle of the cluster indices. Once every cluster holds a label or
    pick the clusters are visited again (largest first), so ``min(n, n_unlabelled)`` distinct
    rows are always returned, duplicated rows included.

    k-means: ``scipy.cluster.vq.kmeans2`` with k-means++ seeding (Arthur & Vassilvitskii 2007)
    and a generator seeded with ``seed``; the number of clusters is capped at the number of
    distinct rows. Pools of more than 20,000 rows fit the centroids on a seeded subsample of
    20,000 rows (the cap then counts the subsample's distinct rows) and assign every row to
    its nearest centroid in row blocks.

    Typicality: ``n_neighbours`` is reduced to (cluster size - 1) in small clusters; the only
    member of a singleton cluster has typicality 0 (an isolated point is not typical). The
    neighbours of a candidate exclude the candidate itself but include its duplicates and the
    labelled members of its cluster. In a cluster of more than ``density_sample`` members the
    neighbours are looked up among a seeded subsample of ``density_sample`` members: the mean
    distance to the K nearest of a subsample is a smoother k-nearest-neighbour density estimate
    of the same cluster, and only the ranking of members matters. Every unlabelled member is
    still scored, in row blocks, so the cost is O(n_candidates * density_sample) and memory
    O(n_candidates) plus a 32 MiB distance block. Exact ties (duplicated rows) are broken by a
    seeded permutation of the rows. Deterministic for a given ``seed``.

    Parameters
    ----------
    X : array of shape (n_candidates, n_features)
        Standardised features.
    n : int
        Number of candidates wanted.
    labelled : int array of shape (n_labelled,), optional
        Row indices of the candidates already labelled; never picked.
    seed : int or numpy Generator seed
    n_neighbours : int >= 1
        K of the typicality (20 in Hacohen et al. 2022).
    density_sample : int >= 2
        Largest number of cluster members the neighbours are looked up among.

    Returns
    -------
    TypicalPicks(rows, cluster_size), both int64 of shape (min(n, n_unlabelled),).
    """
    X = _check_features(X)
    n_candidates = X.shape[0]
    labelled = _check_labelled(labelled, n_candidates)
    n = min(check_count(n), n_candidates - labelled.size)
    n_neighbours = check_count(n_neighbours, "n_neighbours")
    if n_neighbours < 1:
        raise ValueError(f"n_neighbours must be at least 1, got {n_neighbours!r}")
    density_sample = check_count(density_sample, "density_sample")
    if density_sample < 2:
        raise ValueError(f"density_sample must be at least 2, got {density_sample!r}")
    rows = np.empty(n, dtype=np.int64)
    cluster_size = np.empty(n, dtype=np.int64)
    if n == 0:
        return TypicalPicks(rows, cluster_size)

    rng = np.random.default_rng(seed)
    assign, n_clusters = _cluster(X, labelled.size + n, rng)
    free = np.ones(n_candidates, dtype=bool)
    free[labelled] = False
    unlabelled = np.bincount(assign[free], minlength=n_clusters)
    taken = np.bincount(assign[labelled], minlength=n_clusters)  # labelled or picked members
    available = unlabelled.copy()
    cluster_rank = rng.permutation(n_clusters)
    row_rank = np.empty(n_candidates, dtype=np.int64)
    row_rank[rng.permutation(n_candidates)] = np.arange(n_candidates)
    # Members of cluster c: by_cluster[start[c]:start[c + 1]], in increasing row order.
    by_cluster = np.argsort(assign, kind="stable")
    start = np.concatenate([[0], np.cumsum(np.bincount(assign, minlength=n_clusters))])
    # Mean distance to the nearest neighbours (1 / typicality), filled per cluster on its first
    # visit; a cluster is first visited before any pick in it, so all its unlabelled rows are.
    spread = np.full(n_candidates, np.nan)
    scored = np.zeros(n_clusters, dtype=bool)

    for t in range(n):
        # Hacohen et al. 2022: fewest labelled-or-picked members first, then the largest cluster.
        open_clusters = np.flatnonzero(available > 0)
        order = np.lexsort(
            (
                cluster_rank[open_clusters],
                -unlabelled[open_clusters],
                taken[open_clusters],
            )
        )
        c = open_clusters[order[0]]
        members = by_cluster[start[c] : start[c + 1]]
        if not scored[c]:
            reference = members
            if members.size > density_sample:
                reference = np.sort(rng.choice(members, density_sample, replace=False))
            candidates = members[free[members]]
            spread[candidates] = _mean_neighbour_distance(
                X, candidates, reference, min(n_neighbours, reference.size - 1)
            )
            scored[c] = True
        candidates = members[free[members]]
        # Most typical = smallest mean neighbour distance; exact ties by the seeded row order.
        pick = candidates[_argmax_with_ties(-spread[candidates], row_rank[candidates])]
        rows[t], cluster_size[t] = pick, unlabelled[c]
        free[pick] = False
        taken[c] += 1
        available[c] -= 1
    return TypicalPicks(rows, cluster_size)


def _cluster(X, n_clusters, rng):
    """k-means cluster of every row (int64) and the number of clusters actually used."""
    fit = X
    if X.shape[0] > _FIT_SAMPLE:
        fit = X[np.sort(rng.choice(X.shape[0], _FIT_SAMPLE, replace=False))]
    # k-means++ seeding needs a new distinct row for every centre; "+ 0.0" folds -0.0 into 0.0.
    n_clusters = int(min(n_clusters, np.unique(fit + 0.0, axis=0).shape[0]))
    # Lloyd iterations from one k-means++ seeding can stall with two centres in one blob;
    # keeping the lowest within-cluster sum of squares of a few seeded restarts is common
    # practice (Arthur & Vassilvitskii 2007 analyse one seeding; 3 restarts is our choice).
    best = np.inf
    for _ in range(_KMEANS_RESTARTS):
        with warnings.catch_warnings():
            # An emptied cluster keeps its previous centre; it is simply never picked from.
            warnings.filterwarnings("ignore", message="One of the clusters is empty")
            trial, _ = kmeans2(
                fit, n_clusters, minit="++", check_finite=False, **{_KMEANS_RNG: rng}
            )
        within = np.square(vq(fit, trial, check_finite=False)[1]).sum()
        if within < best:
            best, centroids = within, trial
    assign = np.empty(X.shape[0], dtype=np.int64)
    block = max(1, _BLOCK_ELEMENTS // (n_clusters * X.shape[1]))
    for first in range(0, X.shape[0], block):
        rows = slice(first, first + block)
        assign[rows] = vq(X[rows], centroids, check_finite=False)[0]
    return assign, n_clusters


def _mean_neighbour_distance(X, candidates, reference, k):
    """Mean Euclidean distance from each candidate row to its k nearest reference rows.

    ``reference`` is sorted; a candidate that is itself a reference row is not its own
    neighbour. k == 0 (a singleton cluster) gives infinity, i.e. typicality 0.
    """
    out = np.full(candidates.size, np.inf)
    if k == 0 or candidates.size == 0:
        return out
    centre = X[reference].mean(axis=0)
    R = X[reference] - centre  # centred: keeps the expanded squared distance accurate
    # ||q - r||^2 = [q, ||q||^2, 1] . [-2 r, 1, ||r||^2]: one float32 product per block, which
    # is ~10x faster than the float64 broadcast. The rounding error (~1e-7 of the squared
    # distances to the cluster centre) only reorders near-ties, still deterministically.
    right = np.hstack([-2.0 * R, np.ones((R.shape[0], 1)), np.einsum("ij,ij->i", R, R)[:, None]])
    right = np.ascontiguousarray(right.T, dtype=np.float32)
    block = max(1, _BLOCK_ELEMENTS // reference.size)
    for first in range(0, candidates.size, block):
        rows = candidates[first : first + block]
        Q = X[rows] - centre
        left = np.hstack([Q, np.einsum("ij,ij->i", Q, Q)[:, None], np.ones((rows.size, 1))])
        squared = left.astype(np.float32) @ right
        where = np.minimum(np.searchsorted(reference, rows), reference.size - 1)
        own = np.flatnonzero(reference[where] == rows)
        squared[own, where[own]] = np.inf
        squared.partition(k - 1, axis=1)  # in place: the k smallest come first
        nearest = np.maximum(squared[:, :k], 0.0)
        out[first : first + block] = np.sqrt(nearest, dtype=float).mean(axis=1)
    return out


def weighted_spread_order(X, rows, weights, labelled=None, cap=np.inf):
    """Order ``rows`` so that each next row is far from the rows labelled or ordered before it,
    weighted: next = argmax_r weights[r] * min(cap, distance(X[r], nearest of labelled and
    earlier rows)).

    With nothing labelled the heaviest row comes first. A farthest-point traversal (Gonzalez
    1985) weighted by ``weights``, e.g. the square roots of the cluster sizes of typical picks:
    the order covers the pool early (a grader sees other classes soon), and with the distance
    capped (e.g. at the pool's median pairwise distance) a far, small cluster (an outlier) gains
    nothing from being far. Our combination; no published source. Ties go to the earlier row.

    X (n_candidates, n_features) standardised; rows (k,) int; weights (k,) positive; labelled
    (m,) int rows; cap > 0. Returns the (k,) rows reordered.
    """
    X = _check_features(X)
    rows = np.asarray(rows, dtype=np.int64)
    weights = np.asarray(weights, dtype=float)
    if weights.shape != rows.shape or (weights <= 0).any():
        raise ValueError(f"weights must be positive with shape {rows.shape}, got {weights!r}")
    labelled = _check_labelled(labelled, X.shape[0])
    if rows.size == 0:
        return rows
    nearest = np.full(rows.size, np.inf)
    if labelled.size:
        _update_nearest(X[rows], X[labelled], nearest)
    order = np.empty(rows.size, dtype=np.int64)
    left = np.ones(rows.size, dtype=bool)
    for t in range(rows.size):
        reach = np.minimum(np.sqrt(nearest), cap) if np.isfinite(nearest).any() else 1.0
        gain = np.where(left, weights * reach, -np.inf)
        j = int(np.argmax(gain))
        order[t], left[j] = rows[j], False
        _update_nearest(X[rows], X[rows[j]:rows[j] + 1], nearest)
    return order
