"""Refit the classifier from the label events, score and rank the pool, record the fit.

A fit is a deterministic function of (the pool, the current labels and skips, the previous fit):
- the same label set as an earlier fit whose model is kept reuses that model unchanged (so `undo`
  gives back exactly the queue before the label, and a skip only re-ranks);
- otherwise the fit policy (labelq.policy, the same code `labelq simulate` replays) fits the
  model from the previous one: a grid average of hyperparameters while labels are few, learnt
  hyperparameters once the evidence concentrates;
- with no labels, or one class only, the head of the queue is a cold start (typical points).
Everything here is rebuildable from the label events (see `labelq.loop.maintain.rebuild`).
"""

from __future__ import annotations

import hashlib
import time
from contextlib import nullcontext
from dataclasses import dataclass, field
from typing import Callable, Optional

import numpy as np

from labelq.errors import LabelqError
from labelq.loop import settings

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
    # `last` is the store's last fit (nothing was written since): refit need not decode its
    # model again
    refit(store, load_state(store), wanted, session_id=session_id, progress=progress,
          previous=last)
    return store.last_fit()



LAST_FIT = object()
"""Default for refit's ``previous``: the store's last fit."""


def refit(store, state: PoolState, strategy: str, session_id=None, progress: Progress = None,
          previous=LAST_FIT, reuse_after: int = 0, generation: Optional[int] = None) -> int:
    """Fit, score, rank and snapshot ``state``; record it all in one transaction; return the fit id.

    ``previous`` is the fit to warm-start from and to compare predictions with (default: the
    store's last fit; None for none). Models of earlier fits on the same labels are reused only
    from fits with id above ``reuse_after``. ``generation`` numbers rebuilds (default: the
    previous fit's). How the model is fitted and the pool ranked is labelq.policy's, with
    `settings.POLICY` and the asked strategy; those settings are recorded with the fit.
    """
    # the engine is imported here, when a refit is due, not when a command starts: `next` on
    # current scores never loads SciPy
    from labelq.policy import rank_pool, score_pool, uniform_scores
    from labelq.review import cohen_kappa, stop_set
    from labelq.review.snapshot import sampled_snapshot, snapshot
    from labelq.review.blas_threads import single_blas_thread

    t0 = time.perf_counter()
    classes = store.classes
    policy = settings.POLICY.with_(strategy=strategy)
    previous = store.last_fit() if previous is LAST_FIT else previous
    if generation is None:
        generation = (previous.info or {}).get("generation", 0) if previous is not None else 0
    fingerprint = label_fingerprint(state.label_ids, state.label_classes)
    n_labels = len(state.label_ids)
    observed = set(state.label_classes)
    unlabelled = state.unlabelled()

    outcome, reused = None, False
    if observed:
        outcome, reused = _fit_model(store, state, classes, previous, fingerprint, policy,
                                     progress, reuse_after)
    if progress:
        progress("scoring", 0, len(state.ids))
    exact = None
    summary_ids = summary_rows = None
    if outcome is None:
        scores = uniform_scores(len(state.ids), len(classes))
    elif _bounded(state, classes, strategy, unlabelled, policy):
        # exact only where it can reach the head, plus the rows read elsewhere (labelled,
        # audit items, the stop set inside the summary sample): labelq.policy.bounded
        from labelq.policy.bounded import score_pool_bounded

        summary_ids = stop_set(state.ids, size=settings.SUMMARY_SAMPLE)
        summary_rows = state.positions(summary_ids)
        must = np.concatenate([summary_rows, np.flatnonzero(~unlabelled),
                               state.positions(_audit_ids(store, state))])
        eligible = unlabelled & ~np.isin(state.ids, state.skipped)
        with single_blas_thread():
            scores, exact = score_pool_bounded(
                outcome.model, state.X, policy, strategy, unlabelled, eligible,
                # the spread batch reads the batch_shortlist rows of highest priority
                head=max(settings.EXACT_HEAD, policy.batch_shortlist, policy.head_size),
                exact_rows=np.unique(must), full=False,  # BALD only where it ranks
                n_jobs=settings.POOL_WORKERS)
    else:
        with single_blas_thread():  # chunks of predict_pool's default size (a 48 MiB budget)
            # a large pool stores BALD only when it ranks by it (or EPIG, whose shortlist it is):
            # multi-class BALD is a Monte Carlo estimate per row, about 2 s per 100,000 rows
            scores = score_pool(outcome.model, state.X, policy, strategy, unlabelled,
                                full=len(state.ids) <= settings.EXACT_POOL_UP_TO,
                                n_jobs=settings.POOL_WORKERS)
    if progress:
        progress("ranking", len(state.ids), len(state.ids))
    queue = rank_pool(outcome.model if outcome else None, state.X, state.ids, scores, policy,
                      strategy, unlabelled, state.skipped, len(observed), classes)
    predicted = scores.predicted
    p_low, p_high = _intervals(scores, queue, len(state.ids) > settings.EXACT_POOL_UP_TO)

    stop_ids = (summary_ids if summary_rows is not None and settings.SUMMARY_SAMPLE == STOP_SIZE
                else stop_set(state.ids, size=STOP_SIZE))  # the same bottom-k sample
    now = predicted[state.positions(stop_ids)]
    kappa = None
    if previous is not None and not queue.cold and previous.model is not None:
        before = _stop_predictions(store, previous, stop_ids)
        keep = before >= 0
        if keep.any():
            kappa = float(cohen_kappa(before[keep], now[keep]))
    summarised = unlabelled.copy()
    if not summarised.any():  # every candidate labelled: summarise the whole pool instead
        summarised[:] = True
    sample = None
    if exact is not None and not exact[summarised].all():
        # the rest of the pool holds bounds: estimate from the seeded sample, with its errors
        rows = summary_rows[summarised[summary_rows]]
        snap, sample = sampled_snapshot(scores.proba[rows], classes, int(summarised.sum()),
                                        uncertain_below=settings.UNCERTAIN_BELOW)
    else:
        snap = snapshot(scores.proba[summarised], classes,
                        uncertain_below=settings.UNCERTAIN_BELOW)
    snap["agreement_kappa"] = kappa

    model = outcome.model if outcome else None
    info = {"strategy": strategy, "cold_start": queue.cold, "reused": reused,
            "generation": generation}
    if exact is not None:  # bounded: exact rows in double precision, the rest bounds
        info["exact_rows"], info["double"] = int(exact.sum()), True
    if sample is not None:
        info["summary"] = sample
    info["stop_set"] = _stop_record(stop_ids, now)
    fit = {
        "session_id": session_id,
        "n_labels": n_labels,
        "strategy": "cold-start" if queue.cold else strategy,
        "hyperparameters": dict(model.hyperparameters_) if model is not None else {},
        "log_marginal_likelihood": (float(model.log_marginal_likelihood_)
                                    if model is not None else None),
        "seconds": time.perf_counter() - t0,
        "event_mark": state.mark,
        "model": model.to_dict() if model is not None else None,
        "info": info,
        "warnings": list(getattr(model, "fit_warnings_", []) or []) if model is not None else [],
        "full_optimize": bool(outcome is not None and outcome.relearnt and not reused),
        "fingerprint": fingerprint,
        "settings": policy.to_dict(),
        "hyper_mode": outcome.mode if outcome else None,
        "learnt_at": outcome.learnt_at if outcome else 0,
    }
    bald = scores.bald if scores.bald is not None else np.zeros(len(state.ids))
    return store.record_fit(
        fit, state.ids, scores.proba, predicted, scores.p_top, p_low, p_high, scores.entropy,
        scores.margin, bald, scores.priority, queue.rank, snap, keep_models=settings.KEEP_MODELS,
        reasons=queue.reasons, exact=exact,
    )


STOP_SIZE = 2000
"""Candidates in the stop set on which successive fits' predictions are compared (Cohen's kappa;
labelq.review.stop_set's default)."""


def _stop_record(stop_ids, predicted) -> dict:
    """The stop set's predicted classes, kept in the fit's info (about 2.7 KB) so the next fit
    compares with them without reading the whole pool's score blocks back (0.12 s at 1,000,000
    candidates): a digest of the ids and the class positions as base64 bytes."""
    import base64

    return {"ids": _digest(stop_ids),
            "predicted": base64.b64encode(np.asarray(predicted, dtype=np.uint8)).decode("ascii")}


def _digest(ids) -> str:
    return hashlib.sha256(np.asarray(ids, dtype=np.int64).tobytes()).hexdigest()[:32]


def _stop_predictions(store, previous, stop_ids) -> np.ndarray:
    """The previous fit's predicted class position for each stop-set id (-1 where it has none):
    from its info when it kept them for the same stop set, else from its score blocks."""
    import base64

    kept = (previous.info or {}).get("stop_set")
    if kept and kept.get("ids") == _digest(stop_ids):
        values = np.frombuffer(base64.b64decode(kept["predicted"]), dtype=np.uint8)
        if values.size == len(stop_ids):
            return values.astype(np.int64)
    return store.predictions_for(stop_ids)


def _intervals(scores, queue, large: bool):
    """(p_low, p_high) of the predicted class's probability (N,): every row for a pool up to
    settings.EXACT_POOL_UP_TO; for a larger one only the rows kept at the head of the queue
    (ranks 1 to QUEUE_HEAD_ROWS, which `next` and `show` read), NaN elsewhere, which
    `export predictions` computes when asked (reports.ExactScores): the multi-class interval is
    a Monte Carlo quantile per row, about 5 s per 100,000 rows."""
    if not large or scores.mean is None:
        return scores.interval()
    from labelq.gp.links import probability_interval
    from labelq.store.sql import QUEUE_HEAD_ROWS

    keep = np.flatnonzero((queue.rank >= 1) & (queue.rank <= QUEUE_HEAD_ROWS))
    low = np.full(len(queue.rank), np.nan)
    high = low.copy()
    low[keep], high[keep] = probability_interval(scores.mean[keep], scores.var[keep],
                                                 scores.predicted[keep], scores.likelihood)
    return low, high


def _bounded(state, classes, strategy, unlabelled, policy) -> bool:
    """Whether this fit scores the pool with bounds (labelq.policy.bounded): a pool above
    settings.EXACT_POOL_UP_TO, a strategy whose priority the variance bounds bound (margin,
    entropy, random; BALD and EPIG would be scored exactly everywhere, in double precision,
    slower than score_pool), for a softmax model the bounded quadrature (`softmax_points`
    None: the fixed Sobol rule has no error bound), and more unskipped unlabelled candidates
    than the exact head (else the head would reach into the skipped ones)."""
    from labelq.policy.bounded import BOUNDED_STRATEGIES

    if len(state.ids) <= settings.EXACT_POOL_UP_TO:
        return False
    if strategy not in BOUNDED_STRATEGIES:
        return False
    if len(classes) > 2 and policy.softmax_points is not None:
        return False
    unskipped = unlabelled & ~np.isin(state.ids, state.skipped)
    return int(unskipped.sum()) > settings.EXACT_HEAD


def _audit_ids(store, state) -> np.ndarray:
    """Candidate ids of the audit items in the pool (their predictions are recorded from the
    stored scores, so they are scored exactly)."""
    ids = np.asarray([item.candidate_id for item in store.audit_items()], dtype=np.int64)
    return ids[np.isin(ids, state.ids)]


def previous_outcome(fit):
    """The policy's view of a recorded fit, a FitOutcome (None when it has no stored model)."""
    from labelq.gp.averaging import load_model
    from labelq.policy import FitOutcome

    if fit is None or fit.model is None:
        return None
    return FitOutcome(load_model(fit.model), fit.hyper_mode or "average", fit.learnt_at or 0,
                      fit.n_labels)


def _fit_model(store, state, classes, previous, fingerprint, policy, progress, reuse_after=0):
    """Return (FitOutcome, reused an earlier model?)."""
    from labelq.gp.hyperparameters import median_distance
    from labelq.policy import fit_labels

    earlier = store.fit_with_fingerprint(fingerprint, after_id=reuse_after)
    if earlier is not None and earlier.model is not None:
        return previous_outcome(earlier), True
    pos = state.positions(state.label_ids)
    X, y = state.X[pos], np.asarray(state.label_classes, dtype=object)
    if progress:
        progress("fitting", 0, len(y))
    with small_fit_threads(len(y)):
        outcome = fit_labels(policy, X, y, classes, previous_outcome(previous),
                             median_distance(state.X))
    return outcome, False


def small_fit_threads(n: int):
    """One BLAS thread for fits on few labels (threads only add overhead there), else unchanged."""
    from labelq.review.blas_threads import single_blas_thread

    return single_blas_thread() if n < settings.THREADED_FIT_FROM else nullcontext()
