"""Refit the classifier from the label events, score and rank the pool, record the fit.

A fit is a deterministic function of (the pool, the current labels and skips, the previous fit):
- the same label set as an earlier fit whose model is kept reuses that model unchanged (so `undo`
  gives back exactly the queue before the label, and a skip only re-ranks);
- otherwise the previous model warm-starts the Newton iteration with its hyperparameters held
  fixed; they are learnt afresh on the schedule of labelq.gp.schedule (from 16 labels, at each
  doubling) or when a warm fit's log marginal likelihood per label falls by LML_DROP_PER_LABEL;
- with no labels, or one class only, the head of the queue is a farthest-point spread (cold start).
Everything here is rebuildable from the label events (see `labelq.loop.maintain.rebuild`).
"""

from __future__ import annotations

import hashlib
import time
from contextlib import nullcontext
from dataclasses import dataclass, field
from typing import Callable, Optional

import numpy as np

from labelq.acquire import (bald_bits, cold_start, entropy_bits, margin, priority, rank_order,
                            select_batch)
from labelq.errors import LabelqError
from labelq.gp import GPClassifier
from labelq.gp.hyperparameters import median_distance
from labelq.gp.intervals import probability_interval
from labelq.gp.schedule import LEARN_FROM, ard_due, learning_due
from labelq.loop import settings
from labelq.review import cohen_kappa, snapshot, stop_set
from labelq.review.blas_threads import single_blas_thread

Progress = Optional[Callable[[str, int, int], None]]


@dataclass
class PoolState:
    """What a fit sees: the pool in standardised features, the labels and the skips at one mark."""

    mark: int
    ids: np.ndarray  # (N,) int64, ascending
    X: np.ndarray  # (N, d) standardised
    label_ids: np.ndarray  # (n,) candidate ids with a current label
    label_classes: list  # (n,) class names
    skipped: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))

    def unlabelled(self) -> np.ndarray:
        """(N,) bool: True for candidates without a label."""
        mask = np.ones(len(self.ids), dtype=bool)
        mask[self.positions(self.label_ids)] = False
        return mask

    def positions(self, cand_ids) -> np.ndarray:
        """Row positions in the pool of the given candidate ids."""
        return np.searchsorted(self.ids, np.asarray(cand_ids, dtype=np.int64))


def load_state(store, mark: Optional[int] = None) -> PoolState:
    """The pool, labels and skips of ``store`` now (or as of event ``mark``), standardised."""
    if mark is None:
        mark = store.event_mark()
    mean, scale = store.feature_scaling()
    n_max = store.counts()["candidates"]
    ids = np.empty(n_max, dtype=np.int64)
    X = np.empty((n_max, len(mean)))
    filled = 0
    for chunk_ids, chunk in store.iter_features(max_mark=mark):
        # filled chunk by chunk into one array: no second copy of a large pool
        end = filled + len(chunk_ids)
        ids[filled:end] = chunk_ids
        np.subtract(chunk, mean, out=X[filled:end])
        X[filled:end] /= scale
        filled = end
    ids, X = ids[:filled], X[:filled]
    labels = store.labels_as_of(mark)
    return PoolState(
        mark=mark,
        ids=ids,
        X=X,
        label_ids=np.array([r.candidate_id for r in labels], dtype=np.int64),
        label_classes=[r.class_ for r in labels],
        skipped=np.asarray(store.skipped_ids(max_mark=mark), dtype=np.int64),
    )


def label_fingerprint(label_ids, label_classes) -> str:
    """A short digest of the label set (order-free), identifying fits made on the same labels."""
    pairs = sorted(zip((int(i) for i in label_ids), label_classes))
    text = "\n".join(f"{i}\t{c}" for i, c in pairs)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:32]


def is_current(store, fit) -> bool:
    """True when ``fit`` exists and no label, skip or import came after it."""
    return fit is not None and fit.event_mark == store.event_mark()


def asked_strategy(fit) -> str:
    """The strategy a fit was asked to rank by (its `strategy` column says cold-start instead
    when the queue was a farthest-point spread)."""
    return (fit.info or {}).get("strategy", fit.strategy)


class EmptyPoolError(LabelqError):
    """The store holds no candidates yet, so there is nothing to fit or rank."""


def ensure_fit(store, strategy: Optional[str] = None, session_id=None, progress: Progress = None):
    """The last fit, refitting first when the store changed since it (or the strategy differs)."""
    if store.counts()["candidates"] == 0:
        raise EmptyPoolError(f"{store.path} holds no candidates yet: add some with `labelq import`")
    last = store.last_fit()
    wanted = strategy or (last.strategy if last and last.strategy != "cold-start" else None)
    wanted = wanted or settings.DEFAULT_STRATEGY
    if is_current(store, last) and asked_strategy(last) == wanted:
        return last
    refit(store, load_state(store), wanted, session_id=session_id, progress=progress)
    return store.last_fit()



LAST_FIT = object()
"""Default for refit's ``previous``: the store's last fit."""


def refit(store, state: PoolState, strategy: str, session_id=None, progress: Progress = None,
          previous=LAST_FIT, reuse_after: int = 0, generation: Optional[int] = None) -> int:
    """Fit, score, rank and snapshot ``state``; record it all in one transaction; return the fit id.

    ``previous`` is the fit to warm-start from and to compare predictions with (default: the
    store's last fit; None for none). Models of earlier fits on the same labels are reused only
    from fits with id above ``reuse_after``. ``generation`` numbers rebuilds (default: the
    previous fit's).
    """
    t0 = time.perf_counter()
    classes = store.classes
    previous = store.last_fit() if previous is LAST_FIT else previous
    if generation is None:
        generation = (previous.info or {}).get("generation", 0) if previous is not None else 0
    fingerprint = label_fingerprint(state.label_ids, state.label_classes)
    n_labels = len(state.label_ids)
    observed = set(state.label_classes)

    clf, full, reused, full_at = None, False, False, 0
    if observed:
        clf, full, reused, full_at = _fit_model(store, state, classes, previous, fingerprint,
                                                progress, reuse_after)
    if progress:
        progress("scoring", 0, len(state.ids))
    scores = _score(clf, state, classes, strategy)
    if progress:
        progress("ranking", len(state.ids), len(state.ids))
    cold = len(observed) < 2
    rank = _rank(clf, state, scores, strategy, cold)

    stop_ids = stop_set(state.ids)
    kappa = None
    if previous is not None and not cold and previous.model is not None:
        before = store.predictions_for(stop_ids)
        now = scores["predicted"][state.positions(stop_ids)]
        keep = before >= 0
        if keep.any():
            kappa = float(cohen_kappa(before[keep], now[keep]))
    unlabelled = state.unlabelled()
    if not unlabelled.any():  # every candidate labelled: summarise the whole pool instead
        unlabelled[:] = True
    snap = snapshot(scores["proba"][unlabelled], classes, uncertain_below=settings.UNCERTAIN_BELOW)
    snap["agreement_kappa"] = kappa

    info = {"strategy": strategy, "cold_start": cold, "reused": reused, "full_at": full_at,
            "generation": generation}
    fit = {
        "session_id": session_id,
        "n_labels": n_labels,
        "strategy": "cold-start" if cold else strategy,
        "hyperparameters": dict(clf.hyperparameters_) if clf is not None else {},
        "log_marginal_likelihood": (float(clf.log_marginal_likelihood_)
                                    if clf is not None else None),
        "seconds": time.perf_counter() - t0,
        "event_mark": state.mark,
        "model": clf.to_dict() if clf is not None else None,
        "info": info,
        "warnings": list(getattr(clf, "fit_warnings_", []) or []) if clf is not None else [],
        "full_optimize": bool(full),
        "fingerprint": fingerprint,
    }
    return store.record_fit(
        fit, state.ids, scores["proba"], scores["predicted"], scores["p_top"], scores["p_low"],
        scores["p_high"], scores["entropy"], scores["margin"], scores["bald"], scores["priority"],
        rank, snap, keep_models=settings.KEEP_MODELS,
    )


def new_classifier(lengthscale=None, ard=False) -> GPClassifier:
    """The classifier every fit uses (features arrive standardised with the pool's scaling)."""
    return GPClassifier(kernel=settings.KERNEL, link=settings.LINK, inference=settings.INFERENCE,
                        ard=ard, optimize=True, standardize=False, random_state=0,
                        lengthscale=lengthscale)


def _fit_model(store, state, classes, previous, fingerprint, progress, reuse_after=0):
    """Return (classifier, re-learnt?, reused an earlier model?, labels at the last full fit)."""
    earlier = store.fit_with_fingerprint(fingerprint, after_id=reuse_after)
    if earlier is not None and earlier.model is not None:
        return (GPClassifier.from_dict(earlier.model), False, True,
                (earlier.info or {}).get("full_at", 0))
    pos = state.positions(state.label_ids)
    X, y = state.X[pos], np.asarray(state.label_classes, dtype=object)
    n = len(y)
    full_at = (previous.info or {}).get("full_at", 0) if previous is not None else 0
    full = learning_due(n, full_at)
    warm = previous is not None and previous.model is not None and bool(full_at) and not full
    if warm:
        clf = GPClassifier.from_dict(previous.model)
    else:
        # Not learnt yet, or learning afresh: the data-driven start of the whole pool (median
        # distance between candidates, unit signal variance), not of the few labelled rows;
        # one lengthscale per feature only once there are labels enough for them.
        clf = new_classifier(median_distance(state.X), ard_due(n, state.X.shape[1]))
    if progress:
        progress("fitting", 0, n)
    with small_fit_threads(n):
        # Learning starts afresh from the data-driven start (see labelq.gp.schedule); other fits
        # keep the hyperparameters and warm-start the Newton iteration from the previous mode.
        clf.optimize = full
        clf.fit(X, y, warm_start=warm, classes=classes)
        if (not full and n >= LEARN_FROM and previous is not None
                and previous.log_marginal_likelihood is not None):
            before = previous.log_marginal_likelihood / max(previous.n_labels, 1)
            if clf.log_marginal_likelihood_ / n < before - settings.LML_DROP_PER_LABEL:
                clf = new_classifier(median_distance(state.X), ard_due(n, state.X.shape[1]))
                clf.fit(X, y, classes=classes)
                full = True
    return clf, full, False, (n if full else full_at)


def small_fit_threads(n: int):
    """One BLAS thread for fits on few labels (threads only add overhead there), else unchanged."""
    return single_blas_thread() if n < settings.THREADED_FIT_FROM else nullcontext()


def _score(clf, state: PoolState, classes, strategy):
    """Class probabilities, the three acquisition scores and the strategy's priority per row."""
    n, c = len(state.ids), len(classes)
    if clf is None:
        proba = np.full((n, c), 1.0 / c)
        zeros = np.zeros(n)
        return {"proba": proba, "predicted": np.zeros(n, dtype=np.int64), "p_top": proba[:, 0],
                "p_low": proba[:, 0], "p_high": proba[:, 0], "entropy": entropy_bits(proba),
                "margin": zeros, "bald": zeros, "priority": np.zeros(n), "mean": None, "var": None}
    with single_blas_thread():  # chunks of predict_pool's default size (a 48 MiB budget)
        pred = clf.predict_pool(state.X, n_jobs=settings.POOL_WORKERS)
    proba, mean, var = pred.proba, pred.mean, pred.var
    link = settings.LINK if c == 2 else "softmax"
    predicted = np.argmax(proba, axis=1)
    low, high = probability_interval(mean, var, predicted, link=settings.LINK)
    return {
        "proba": proba,
        "predicted": predicted,
        "p_top": proba[np.arange(n), predicted],
        "p_low": low,
        "p_high": high,
        "entropy": entropy_bits(proba),
        "margin": margin(proba, mean, var) if c == 2 else margin(proba),
        "bald": bald_bits(mean, var, link),
        "priority": priority(strategy, proba, mean, var, link),
        "mean": mean,
        "var": var,
    }


def _rank(clf, state: PoolState, scores, strategy, cold) -> np.ndarray:
    """Rank 1..M for unlabelled candidates (head spread out, skipped last); -1 for labelled ones."""
    rank = np.full(len(state.ids), -1, dtype=np.int64)
    unl = state.unlabelled()
    rows = np.flatnonzero(unl)
    if rows.size == 0:
        return rank
    skipped = np.isin(state.ids[rows], state.skipped)
    order = rows[rank_order(scores["priority"][rows], state.ids[rows], skipped)]
    if cold:
        head = _cold_head(state, rows[~skipped], np.flatnonzero(~unl))
    else:
        head = _spread_head(clf, state, scores, strategy, rows, skipped)
    rest = order[~np.isin(order, head)]
    final = np.concatenate([head, rest])
    rank[final] = np.arange(1, final.size + 1)
    return rank


def _cold_head(state, free, labelled):
    """Farthest-point picks among ``free`` rows, away from the ``labelled`` rows too."""
    if free.size == 0:
        return free
    both = np.concatenate([free, labelled])
    picks = cold_start(state.X[both], min(settings.COLD_START_SIZE, free.size),
                       labelled=np.arange(free.size, both.size) if labelled.size else None)
    return both[np.asarray(picks, dtype=np.int64)]


def _spread_head(clf, state, scores, strategy, rows, skipped):
    """The first HEAD_SIZE picks as a spread-out batch (see acquire.select_batch)."""
    c = scores["proba"].shape[1]
    link = settings.LINK if c == 2 else "softmax"
    mean = scores["mean"][rows]
    var = scores["var"][rows]
    cache = {}

    def cross_cov(shortlist, j):
        # select_batch passes the same shortlist on every call: its posterior covariance is
        # computed once (one kernel block and one product) and read column by column.
        if "cov" not in cache:
            Xs = state.X[rows[shortlist]]
            cache["cov"] = clf.latent_cross_cov(Xs, Xs)
            cache["where"] = {int(r): i for i, r in enumerate(shortlist)}
        return cache["cov"][:, cache["where"][int(j)]]

    picks = select_batch(strategy, scores["proba"][rows], mean, var, link,
                         settings.HEAD_SIZE, cross_cov, state.ids[rows],
                         skipped_mask=skipped)
    return rows[np.asarray(picks, dtype=np.int64)]
