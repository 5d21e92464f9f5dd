"""Order the queue: the head (a spread-out batch, or the cold start's picks), then the rest by
priority, skipped candidates last; and say in words why each row of the head is there."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from labelq.acquire import cold_start, rank_order, select_batch, typical_start
from labelq.acquire.coldstart import weighted_spread_order
from labelq.gp.hyperparameters import median_distance
from labelq.policy.reasons import FARTHEST, RANDOM, SPREAD, cluster_reason, strategy_reason
from labelq.policy.scoring import PoolScores
from labelq.policy.settings import PolicySettings


@dataclass
class Queue:
    """rank (N,) int: 1.. for unlabelled rows, -1 for labelled ones; reasons (N,) object: why a
    row of the head is there (None below the head); cold: the head is a cold start."""

    rank: np.ndarray
    reasons: np.ndarray
    cold: bool

    def first(self) -> int:
        """Row of rank 1 (the next candidate to label); -1 when nothing is unlabelled."""
        top = np.flatnonzero(self.rank == 1)
        return int(top[0]) if top.size else -1


def rank_pool(model, X, ids, scores: PoolScores, settings: PolicySettings, strategy: str,
              unlabelled: np.ndarray, skipped_ids, n_classes_seen: int, classes,
              batch_size: int | None = None) -> Queue:
    """The queue for one fit.

    X (N, d) standardised; ids (N,) candidate ids ascending; ``skipped_ids`` candidate ids
    skipped; ``n_classes_seen`` classes with at least one label (fewer than two: cold start);
    ``batch_size``: rows of the spread-out batch, default the settings' head_size (a replay asks
    for 1: the greedy batch's first pick does not depend on the batch size, whereas the cold
    start's clusters do, so the cold start always takes head_size).
    """
    head_size = settings.head_size
    batch_size = head_size if batch_size is None else batch_size
    n = len(ids)
    rank = np.full(n, -1, dtype=np.int64)
    reasons = np.full(n, None, dtype=object)
    rows = np.flatnonzero(unlabelled)
    cold = n_classes_seen < 2
    if rows.size == 0:
        return Queue(rank, reasons, cold)
    skipped = np.isin(ids[rows], np.asarray(skipped_ids, dtype=np.int64))
    order = rows[rank_order(scores.priority[rows], ids[rows], skipped)]
    if strategy == "random":
        head = order[:head_size]
        reasons[head] = RANDOM
    elif cold:
        head = _cold_head(X, rows[~skipped], np.flatnonzero(~unlabelled), settings, head_size,
                          reasons)
    else:
        # the batch reads only the shortlist: pass those rows, in queue order (select_batch's
        # own ranking of them is the same order), not the whole pool
        top = order[:max(settings.batch_shortlist, batch_size)]
        skipped_rows = np.zeros(n, dtype=bool)
        skipped_rows[rows[skipped]] = True
        head = _spread_head(model, X, ids, scores, strategy, top, skipped_rows[top], batch_size,
                            settings.batch_shortlist)
        for t, r in enumerate(head):
            why = strategy_reason(strategy, scores.proba[r], classes)
            reasons[r] = why if t == 0 else why + SPREAD
    rest = order[~np.isin(order, head)]
    final = np.concatenate([head, rest])
    rank[final] = np.arange(1, final.size + 1)
    return Queue(rank, reasons, cold)


def _cold_head(X, free, labelled, settings, head_size, reasons):
    """Cold-start picks among ``free`` rows: typical points of clusters, or farthest points."""
    if free.size == 0:
        return free
    both = np.concatenate([free, labelled])
    known = np.arange(free.size, both.size) if labelled.size else None
    n = min(head_size, free.size)
    if settings.cold_start == "typical":
        # typical points of clusters (Hacohen et al. 2022), visited far from the labels first,
        # weighted by the square root of the cluster size, distances capped at the median
        # pairwise distance: other classes come up within a few labels (orchard demo: 2-3
        # labels to see two grades against 3-12 in plain size order, seeds 0-7)
        picks = typical_start(X[both], n, labelled=known, seed=settings.seed)
        size = dict(zip(picks.rows.tolist(), picks.cluster_size.tolist()))
        order = weighted_spread_order(X[both], picks.rows, np.sqrt(picks.cluster_size),
                                      labelled=known, cap=median_distance(X[both]))
        head = both[order]
        for r, local in zip(head, order):
            reasons[r] = cluster_reason(size[int(local)])
        return head
    head = both[np.asarray(cold_start(X[both], n, labelled=known, seed=settings.seed))]
    reasons[head] = FARTHEST
    return head


def _spread_head(model, X, ids, scores, strategy, rows, skipped, head_size, shortlist):
    """The first ``head_size`` picks as a spread-out batch (see labelq.acquire.select_batch)."""
    cache = {}

    def cross_cov(shortlist, j):
        # select_batch passes the same shortlist on every call: its posterior covariance is
        # computed once (one kernel block and one product) and read column by column.
        if "cov" not in cache:
            Xs = X[rows[shortlist]]
            cache["cov"] = model.latent_cross_cov(Xs, Xs)
            cache["where"] = {int(r): i for i, r in enumerate(shortlist)}
        return cache["cov"][:, cache["where"][int(j)]]

    picks = select_batch(strategy, scores.proba[rows], scores.mean[rows], scores.var[rows],
                         scores.likelihood, head_size, cross_cov, ids[rows], skipped_mask=skipped,
                         values=scores.priority[rows], shortlist=shortlist)
    return rows[np.asarray(picks, dtype=np.int64)]
