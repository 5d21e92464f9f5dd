"""Greedy batch selection that spreads a batch out by conditioning the latent on each pick."""

import numpy as np

from labelq.acquire.bald import bald_bits
from labelq.acquire.checks import (
    check_count,
    check_latent,
    check_mask,
    check_proba,
    check_strategy,
)
from labelq.acquire.ranking import rank_order
from labelq.acquire.scores import STRATEGIES, priority
from labelq.gp import predictive_probability
from labelq.gp.links import get_link

# Default pick noise relative to the largest latent variance on the shortlist.
_RELATIVE_NOISE = 1e-6


def select_batch(
    strategy,
    proba,
    mean,
    var,
    link,
    n,
    cross_cov,
    ids,
    skipped_mask=None,
    seed=0,
    shortlist=2000,
    noise=None,
    values=None,
):
    """Pick a spread-out batch of ``min(n, n_candidates)`` candidates to label together.

    Taking the top n of the queue piles near-duplicates together: a label on one of them would
    have taught the model most of what the others would. Instead the batch is built greedily:

    1. Shortlist the top ``shortlist`` candidates by :func:`labelq.acquire.priority`
       (unskipped first, order of :func:`labelq.acquire.rank_order`); only these are scored
       again, so the cost does not grow with the pool.
    2. Pick the shortlist candidate with the highest score (ties: smallest id). Skipped
       candidates are eligible only once every unskipped one on the shortlist is picked.
    3. Condition the latent of the remaining shortlist on the pick and rescore; repeat.

    The conditioning is exact Gaussian conditioning of the latent on a pick observed with
    small noise (Rasmussen & Williams 2006, GPML eq. A.6, equation number from memory), done
    as rank-one downdates kept like the columns of a pivoted Cholesky factor. For the t-th
    pick p_t:

        c_t = cov(., p_t) - sum_{s<t} g_s g_s[p_t]
        d_t = c_t[p_t] + noise,   g_t = c_t / sqrt(d_t),   var_t = var_{t-1} - g_t^2

    where cov(., j) is the posterior latent covariance returned by ``cross_cov``. The
    approximations: (a) the posterior covariance of a GP does not depend on label values, but
    a classifier's does through the likelihood curvature; each pick is treated as pinning its
    latent at that point (an almost noiseless observation of f), which overstates what one
    label teaches; (b) the latent mean is not updated, since the label is unknown; (c) for a
    multi-class model each class latent is conditioned on its own (per-class diagonal blocks;
    cross-class covariance is ignored).

    Rescoring after each pick, from the shortlist's latent mean and the updated variance:
    ``bald`` is recomputed from the updated variance (the criterion is variance-aware);
    ``entropy`` and ``margin`` are recomputed from class probabilities
    ``labelq.gp.predictive_probability(mean, var_t, link)`` and then multiplied by the fraction
    of latent variance left, var_t / var_0 (mean over classes for multi-class; 1 where var_0 is
    0), because those criteria otherwise ignore what the batch will already teach (common
    practice, no published source for this weighting). ``random`` is a plain seeded sample
    without replacement: the head of the queue ordered by the random priority.

    Parameters
    ----------
    strategy : {"entropy", "margin", "bald", "random"}
    proba : array of shape (n_candidates, n_classes)
    mean, var : arrays of shape (n_candidates,) binary or (n_candidates, n_classes) softmax
        Latent predictive mean and variance (may be None for "random").
    link : {"probit", "logistic", "softmax"}
    n : int
        Batch size wanted.
    cross_cov : callable ``cross_cov(rows, j)``
        ``rows``: int array of shape (m,), the pool indices of the shortlist (the same array on
        every call); ``j``: the pool index of a pick (an element of ``rows``). Returns the
        posterior latent covariance between the candidates ``rows`` and candidate ``j``: shape
        (m,) binary or (m, n_classes) multi-class (per class), e.g.
        ``lambda rows, j: model.latent_cross_cov(X[rows], X[[j]])[:, 0]``.
    ids : array of shape (n_candidates,)
        Candidate ids, for deterministic tie-breaking.
    skipped_mask : boolean array of shape (n_candidates,), optional
    seed : int
        Seeds "random" and the Monte Carlo of multi-class "bald".
    shortlist : int
        Shortlist size (raised to ``n`` if smaller).
    values : array of shape (n_candidates,), optional
        Priorities already computed by the caller (e.g. EPIG, or any strategy under a mixture of
        models). When given they order the shortlist instead of ``strategy``'s priority, and
        rescoring multiplies them by the fraction of latent variance left (as for entropy and
        margin above), so the first pick is always the highest value.
    noise : float, optional
        Variance of the pick observation; default 1e-6 times the largest latent variance on the
        shortlist (a stand-in for the prior variance scale), small enough to pin the latent and
        large enough to keep d_t positive for exact duplicates.

    Returns
    -------
    int ndarray of shape (min(n, n_candidates),), pool indices in pick order.
    """
    check_strategy(strategy, STRATEGIES)
    proba = check_proba(proba)
    n = min(check_count(n), proba.shape[0])
    shortlist = check_count(shortlist, "shortlist")
    if shortlist == 0:
        raise ValueError("shortlist must be positive, got 0")
    if noise is not None and not (np.isfinite(noise) and noise > 0):
        raise ValueError(f"noise must be a positive finite number, got {noise!r}")
    skipped = check_mask(skipped_mask, proba.shape[0])
    ids = np.asarray(ids)
    if values is None and strategy == "epig":
        raise ValueError("select_batch needs values (the EPIG of each candidate) for 'epig'")
    if values is None:
        values = priority(strategy, proba, mean, var, link, seed)
    elif np.shape(values) != (proba.shape[0],):
        raise ValueError(f"values must have shape ({proba.shape[0]},), got {np.shape(values)}")
    order = rank_order(values, ids, skipped)
    if strategy == "random" or n == 0:
        return order[:n]
    mean, var = check_latent(mean, var, link)
    rows = order[: max(shortlist, n)]
    rescore = (_rescorer(strategy, mean[rows], var[rows], link, seed) if values is None
               else _left_weighted(np.asarray(values, dtype=float)[rows], var[rows]))
    picks = _greedy_picks(
        rescore,
        var[rows],
        n,
        lambda j: _checked_column(cross_cov(rows, rows[j]), var[rows].shape),
        ids[rows],
        skipped[rows],
        noise,
    )
    return rows[picks]


def _rescorer(strategy, mean, var0, link, seed):
    """Score of each shortlist candidate as a function of its updated latent variance."""
    def score(var_t):
        if strategy == "bald":
            return bald_bits(mean, var_t, link, seed)
        value = priority(strategy, _class_proba(mean, var_t, link), mean, var_t, link, seed)
        left = np.divide(var_t, var0, out=np.ones_like(var0), where=var0 > 0)
        return value * (left if left.ndim == 1 else left.mean(axis=1))

    return score


def _left_weighted(values, var0):
    """Given priorities times the fraction of latent variance left (mean over classes)."""
    def score(var_t):
        left = np.divide(var_t, var0, out=np.ones_like(var0), where=var0 > 0)
        return values * (left if left.ndim == 1 else left.mean(axis=1))

    return score


RESCORE_POINTS = 256
"""Quasi-Monte Carlo points for softmax probabilities while rescoring a batch: only the order of
the shortlist matters there, and 256 points keep the error to a few 1e-3 at an eighth the cost."""


def _class_proba(mean, var, link):
    """Class probabilities (m, n_classes) from the latent, via labelq.gp."""
    multi = get_link(link).n_latent is None  # softmax: one latent per class
    p = predictive_probability(mean, var, link, n_points=RESCORE_POINTS if multi else None)
    return p if multi else np.stack([1.0 - p, p], axis=1)


def _checked_column(column, shape):
    """Validate one ``cross_cov`` result."""
    column = np.asarray(column, dtype=float)
    if column.shape != shape:
        raise ValueError(f"cross_cov returned shape {column.shape}, expected {shape}")
    if not np.isfinite(column).all():
        raise ValueError("cross_cov returned a non-finite value")
    return column


def _greedy_picks(score, var0, n, column, ids, skipped, noise):
    """Shortlist positions of n greedy picks with pivoted-Cholesky variance downdates."""
    if noise is None:
        noise = _RELATIVE_NOISE * max(var0.max(), np.finfo(float).tiny)
    factors = np.empty((n - 1,) + var0.shape)
    var_t = var0.copy()
    picked = np.zeros(var0.shape[0], dtype=bool)
    picks = np.empty(n, dtype=int)
    for t in range(n):
        p = _best(score(var_t), ids, skipped, picked)
        picks[t], picked[p] = p, True
        if t + 1 == n:
            break
        # c_t = cov(., p_t) - sum_s g_s g_s[p_t]; d_t = c_t[p_t] + noise; g_t = c_t / sqrt(d_t)
        c = column(p) - np.einsum("tm...,t...->m...", factors[:t], factors[:t, p])
        factors[t] = c / np.sqrt(np.maximum(c[p], 0.0) + noise)
        var_t = np.maximum(var_t - factors[t] ** 2, 0.0)
    return picks


def _best(score, ids, skipped, picked):
    """Highest-scoring unpicked position (unskipped first); ties go to the smallest id."""
    eligible = ~picked & ~skipped
    if not eligible.any():
        eligible = ~picked
    masked = np.where(eligible, score, -np.inf)
    tied = np.flatnonzero(eligible & (masked == masked.max()))
    return tied[np.argmin(ids[tied])]
