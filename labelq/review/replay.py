"""Strategy replay: how fast each acquisition strategy learns a fully labelled pool.

A replay runs the label loop's own policy (labelq.policy: the same fits, scores, cold start and
head of the queue as `labelq label`) from zero labels: it takes the candidate at rank 1 of the
queue, reveals its true class, refits, and records the accuracy over the whole pool, until the
budget is spent. Comparing the learning curves of the strategies with that of ``random`` is the
usual way to judge active learning (B. Settles (2009), "Active learning literature survey",
Univ. of Wisconsin-Madison CS Tech. Rep. 1648, sec. 7 on evaluating with learning curves).
"""

import os
import threading
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Callable, Optional, Sequence

import numpy as np

from labelq.acquire import STRATEGIES
from labelq.gp import GPClassifier
from labelq.gp.hyperparameters import median_distance
from labelq.policy import PolicySettings, fit_labels, rank_pool, score_pool, uniform_scores
from labelq.review.blas_threads import single_blas_thread
from labelq.review.defaults import POOL_FRACTION, REFERENCE_ROWS
from labelq.review.learning_curve import curve_summary



def standardise(X: np.ndarray) -> np.ndarray:
    """Z-score each feature with the population standard deviation (constant features are only
    centred), as the store does at import."""
    scale = X.std(axis=0)
    return (X - X.mean(axis=0)) / np.where(scale > 0.0, scale, 1.0)


@dataclass
class ReplayRun:
    """One strategy from zero labels under one seed."""

    labels: np.ndarray  # (budget,) label counts 1..budget
    accuracy: np.ndarray  # (budget,) accuracy over the pool after each label
    entropy: np.ndarray  # (budget,) mean entropy (bits) of the unlabelled candidates
    picks: list  # row indices in the order they were labelled
    relearns: list  # (n_labels, accuracy change) at each gradient-based learning


def replay_run(X, y, classes, settings: PolicySettings, budget: int,
               tick: Optional[Callable[[], None]] = None, median: Optional[float] = None):
    """Replay ``settings`` (its strategy and seed) on standardised X (N, d) with truth y (N,)."""
    median = median_distance(X) if median is None else median
    ids = np.arange(len(y))
    unlabelled = np.ones(len(y), dtype=bool)
    picks, counts, accuracy, entropy, relearns = [], [], [], [], []
    outcome, scores, last_accuracy = None, uniform_scores(len(y), len(classes)), None
    names = np.asarray(classes)
    while True:
        n = len(picks)
        if n:
            outcome = fit_labels(settings, X[picks], y[picks], classes, outcome, median)
            scores = score_pool(outcome.model, X, settings, settings.strategy, unlabelled,
                                full=False)
            acc = float(np.mean(names[scores.predicted] == y))
            if outcome.relearnt and last_accuracy is not None:
                relearns.append((n, acc - last_accuracy))
            last_accuracy = acc
            counts.append(n)
            accuracy.append(acc)
            entropy.append(float(scores.entropy[unlabelled].mean()) if unlabelled.any() else 0.0)
            if tick is not None:
                tick()
        if n >= budget:
            break
        seen = len(set(y[picks].tolist()))
        queue = rank_pool(outcome.model if outcome else None, X, ids, scores, settings,
                          settings.strategy, unlabelled, [], seen, classes, batch_size=1)
        row = queue.first()
        picks.append(row)
        unlabelled[row] = False
    return ReplayRun(np.array(counts), np.array(accuracy), np.array(entropy), picks, relearns)


def reference_accuracy(X, y, classes, settings: PolicySettings, rows: Optional[int]):
    """Accuracy over the pool of a model with learnt hyperparameters fitted on the true classes of
    ``rows`` seeded rows (all rows when None); (accuracy, rows used)."""
    use = np.arange(len(y))
    if rows is not None and rows < len(y):
        use = np.sort(np.random.default_rng(0).choice(len(y), rows, replace=False))
    model = GPClassifier(kernel=settings.kernel, link=settings.link, ard=False, optimize=True,
                         standardize=False, random_state=0,
                         softmax_points=settings.softmax_points)
    model.fit(X[use], y[use], classes=classes)
    proba = model.predict_pool(X).proba
    return float(np.mean(np.asarray(classes)[proba.argmax(axis=1)] == y)), int(use.size)


def seed_rows(n: int, fraction: float, seed: int) -> np.ndarray:
    """Sorted row indices of the seeded random ``fraction`` of ``n`` rows replayed under ``seed``."""
    if fraction >= 1.0:
        return np.arange(n)
    size = max(2, int(round(fraction * n)))
    return np.sort(np.random.default_rng(seed).choice(n, size, replace=False))


def simulate(
    X,
    y,
    strategies: Sequence[str] = ("margin", "random"),
    budget: int = 60,
    seeds: Sequence[int] = (0, 1, 2),
    settings: Optional[PolicySettings] = None,
    reference_rows: Optional[int] = REFERENCE_ROWS,
    pool_fraction: float = POOL_FRACTION,
    progress: Optional[Callable[[int, int], None]] = None,
    jobs: Optional[int] = None,
) -> dict:
    """Replay each strategy on a fully labelled pool and summarise its learning curve.

    Every run starts from zero labels and follows the label loop's policy (``settings``, default
    `PolicySettings()`, with its strategy and seed replaced per run) on the seed's own random
    ``pool_fraction`` of the rows (see `seed_rows`; 1.0 replays the whole pool under every seed),
    and measures the accuracy over those rows. Each seed's rows are standardised as a store would
    standardise them at import; BLAS runs on one thread (see labelq.review.blas_threads).

    Parameters
    ----------
    X : array of shape (n_candidates, n_features); standardised here
    y : array of shape (n_candidates,), the true class of every candidate
    strategies : names from ``labelq.acquire.STRATEGIES``
    budget : labels per run
    seeds : one run per seed and strategy
    settings : the policy replayed (default: the label loop's defaults)
    reference_rows : rows of the seeded sample the reference model is fitted on (None: all;
        0: no reference model, and no labels_to_95/99)
    pool_fraction : share of the rows each seed replays on, in (0, 1]
    jobs : runs replayed at once in threads (default: the machine's cores, at most 4); the
        results do not depend on it (each run is computed on its own). NumPy's element-wise
        passes release the GIL: the orchard demo's replay with the CLI defaults took 105 s with
        two threads against 129 s with one on the 2-core benchmark machine (same results).
    progress : optional callable(done_fits, total_fits), called after every fit

    Returns
    -------
    dict (JSON-ready): ``{"strategies": {name: {"labels", "accuracy_mean", "accuracy_sd",
    "entropy_mean", "labels_to_95", "labels_to_99", "auc", "auc_se", "relearns"}},
    "full_pool_accuracy", "reference_rows", "budget", "seeds", "pool_fraction", "settings"}``; see
    :func:`labelq.review.learning_curve.curve_summary`.
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y)
    if X.ndim != 2 or y.shape != (X.shape[0],):
        raise ValueError(f"X must be (n, d) and y (n,), got {X.shape} and {y.shape}")
    classes = np.unique(y).tolist()
    if len(classes) < 2:
        raise ValueError(f"simulate needs at least two classes in y, got {classes}")
    for s in strategies:
        if s not in STRATEGIES:
            raise ValueError(f"unknown strategy {s!r}; choose from {STRATEGIES}")
    if budget < 2 or budget > y.size:
        raise ValueError(f"need 2 <= budget <= {y.size}, got budget={budget}")
    if not seeds:
        raise ValueError("simulate needs at least one seed")
    if not 0.0 < pool_fraction <= 1.0:
        raise ValueError(f"pool_fraction must be in (0, 1], got {pool_fraction!r}")
    if budget > len(seed_rows(y.size, pool_fraction, 0)):
        raise ValueError(f"a budget of {budget} exceeds the rows replayed per seed")
    settings = settings or PolicySettings()
    total = len(strategies) * len(seeds) * budget + (1 if reference_rows != 0 else 0)
    done = 0
    lock = threading.Lock()

    def tick():
        nonlocal done
        with lock:
            done += 1
            if progress is not None:
                progress(done, total)

    def run(strategy, seed):
        # the seed's pool standardised on its own, as the store would import it
        rows = seed_rows(y.size, pool_fraction, int(seed))
        return replay_run(standardise(X[rows]), y[rows], classes,
                          settings.with_(strategy=strategy, seed=int(seed)), budget, tick)

    Xs = standardise(X)
    if progress is not None:
        progress(0, total)
    jobs = jobs or min(4, os.cpu_count() or 1)
    tasks = [(strategy, seed) for strategy in strategies for seed in seeds]
    with single_blas_thread():
        with ThreadPoolExecutor(max_workers=max(1, min(jobs, len(tasks)))) as pool:
            done_runs = dict(zip(tasks, pool.map(lambda task: run(*task), tasks)))
        result = {strategy: {"runs": [done_runs[strategy, seed] for seed in seeds]}
                  for strategy in strategies}
        full_accuracy, used = None, 0
        if reference_rows != 0:
            full_accuracy, used = reference_accuracy(Xs, y, classes, settings, reference_rows)
            tick()
    summary = {}
    for strategy, entry in result.items():
        runs = entry["runs"]
        accuracy = np.stack([r.accuracy for r in runs])
        summary[strategy] = curve_summary(runs[0].labels, accuracy,
                                          np.stack([r.entropy for r in runs]), full_accuracy)
        summary[strategy]["relearns"] = [[int(n), float(d)] for r in runs for n, d in r.relearns]
    return {
        "strategies": summary,
        "full_pool_accuracy": full_accuracy,
        "reference_rows": used,
        "budget": int(budget),
        "seeds": [int(s) for s in seeds],
        "pool_fraction": float(pool_fraction),
        "settings": settings.to_dict(),
    }
