"""Strategy replay: how fast each acquisition strategy learns a fully labelled pool.

Each run starts from a few seeded labels, then repeatedly asks the strategy for the candidate it
would label next, reveals that candidate's true class, refits, and records the accuracy over the
whole pool. Comparing the learning curves of the strategies with that of ``random`` is the usual
way to judge active learning (B. Settles (2009), "Active learning literature survey", Univ. of
Wisconsin-Madison CS Tech. Rep. 1648, sec. 7 on evaluating with learning curves).
"""

from dataclasses import dataclass
from typing import Callable, Optional, Sequence

import numpy as np

from labelq.acquire import STRATEGIES, entropy_bits, priority, rank_order
from labelq.gp import GPClassifier
from labelq.gp.schedule import ard_due, learning_due
from labelq.review.blas_threads import single_blas_thread
from labelq.review.learning_curve import curve_summary



def _standardise(X: np.ndarray) -> np.ndarray:
    """Z-score each feature once for the whole replay (constant features are only centred)."""
    scale = X.std(axis=0)
    return (X - X.mean(axis=0)) / np.where(scale > 0.0, scale, 1.0)


def initial_labels(y: np.ndarray, n_initial: int, seed: int) -> np.ndarray:
    """Seeded starting labels: one candidate from each of two different classes, the rest at random.

    The two classes are drawn at random among those present, so every strategy replayed with the
    same seed starts from the same labels. Returns (n_initial,) row indices.
    """
    rng = np.random.default_rng(seed)
    classes = np.unique(y)
    pair = rng.choice(classes, size=2, replace=False)
    first = np.array([rng.choice(np.flatnonzero(y == c)) for c in pair])
    rest = np.setdiff1d(np.arange(y.size), first)
    more = rng.choice(rest, size=n_initial - first.size, replace=False)
    return np.concatenate([first, more])


@dataclass(frozen=True)
class _Replay:
    """What every run of a replay shares: the standardised pool, its truth, the model settings."""

    Xs: np.ndarray
    y: np.ndarray
    classes: list
    kernel: str
    link: str
    ard: Optional[bool]
    budget: int
    refit_every: int
    tick: Callable[[], None]

    def model(self, seed: int, optimize: bool = False, n_labels: int = 0) -> GPClassifier:
        # Features were standardised once by the replay, so the estimator need not redo it per fit.
        return GPClassifier(kernel=self.kernel, link=self.link, ard=self.use_ard(n_labels),
                            optimize=optimize, standardize=False, random_state=seed)

    def use_ard(self, n_labels: int) -> bool:
        """ARD as asked, or (ard=None) as the label loop does: labelq.gp.schedule.ard_due."""
        return ard_due(n_labels, self.Xs.shape[1]) if self.ard is None else bool(self.ard)

    def accuracy(self, proba: np.ndarray, model: GPClassifier) -> float:
        """Fraction of the pool whose most probable class is the true one."""
        return float(np.mean(np.asarray(model.classes_)[proba.argmax(axis=1)] == self.y))


def _replay_run(replay: _Replay, strategy: str, start: np.ndarray, seed: int):
    """One strategy from one start: accuracy over the pool and mean unlabelled entropy per fit.

    Until there are ``labelq.gp.schedule.LEARN_FROM`` labels the model keeps the estimator's
    default hyperparameters;
    from then on they are learnt from scratch whenever the label count has doubled since they were
    last learnt. In between, fits warm-start (previous mode) with the hyperparameters held fixed.
    Returns (label_counts, accuracy, mean_entropy), each of shape (n_fits,).
    """
    y, Xs = replay.y, replay.Xs
    labelled = np.zeros(y.size, dtype=bool)
    labelled[start] = True
    order = list(start)
    model = replay.model(seed)
    learnt_at = None
    acquire_link = replay.link if len(replay.classes) == 2 else "softmax"
    counts, accuracy, entropy = [], [], []
    while True:
        n = len(order)
        model.optimize = learning_due(n, learnt_at)
        if model.optimize:
            learnt_at = n
            model.ard = replay.use_ard(n)
        idx = np.asarray(order)
        # Learning starts the optimiser afresh: started from the previous hyperparameters it can
        # stay in the flat region where a tiny signal variance calls every label noise.
        model.fit(Xs[idx], y[idx], warm_start=n > len(start) and not model.optimize,
                  classes=replay.classes)
        pred = model.predict_pool(Xs)
        pool = ~labelled
        counts.append(n)
        accuracy.append(replay.accuracy(pred.proba, model))
        entropy.append(float(entropy_bits(pred.proba[pool]).mean()) if pool.any() else 0.0)
        replay.tick()
        if n >= len(start) + replay.budget:
            break
        rows = np.flatnonzero(pool)
        scores = priority(strategy, pred.proba[rows], pred.mean[rows], pred.var[rows],
                          acquire_link, seed=seed * 100_003 + n)
        step = min(replay.refit_every, len(start) + replay.budget - n)
        chosen = rows[rank_order(scores, rows)[:step]]
        labelled[chosen] = True
        order.extend(chosen.tolist())
    return np.array(counts), np.array(accuracy), np.array(entropy)


def simulate(
    X,
    y,
    strategies: Sequence[str] = STRATEGIES,
    budget: int = 60,
    seeds: Sequence[int] = (0, 1, 2, 3, 4),
    n_initial: int = 4,
    kernel: str = "se",
    link: str = "logistic",
    ard: Optional[bool] = None,
    refit_every: int = 1,
    progress: Optional[Callable[[int, int], None]] = None,
) -> dict:
    """Replay each strategy on a fully labelled pool and summarise its learning curve.

    For every seed the run starts from the same ``n_initial`` labels for all strategies (see
    :func:`initial_labels`), then adds ``refit_every`` labels at a time, taken in the strategy's
    priority order over the unlabelled candidates, refitting after each addition, until
    ``n_initial + budget`` labels. After every fit it records the accuracy over the whole pool
    (every row predicted, compared with ``y``) and the mean entropy (bits) of the unlabelled
    candidates. Features are standardised once; hyperparameters follow the schedule described in
    :mod:`labelq.gp.schedule` and :func:`_replay_run`; BLAS runs on one thread (see
    :func:`labelq.review.blas_threads.single_blas_thread`). Scikit-learn's breast-cancer data
    (569 x 30) with 4 strategies x 5 seeds x 60 labels took about 4 s when measured.

    Parameters
    ----------
    X : array of shape (n_candidates, n_features); standardised once here
    y : array of shape (n_candidates,), the true class of every candidate
    strategies : names from ``labelq.acquire.STRATEGIES``
    budget : labels added after the initial ones
    seeds : one run per seed and strategy
    n_initial : starting labels, at least 2
    kernel, link : passed to GPClassifier
    ard : one lengthscale per feature; None (default) follows labelq.gp.schedule.ard_due,
        as the label loop does
    refit_every : labels added between fits (1 = refit after every label)
    progress : optional callable(done_steps, total_steps), called after every fit

    Returns
    -------
    dict (JSON-ready): ``{"strategies": {name: {"labels", "accuracy_mean", "accuracy_sd",
    "entropy_mean", "labels_to_95", "labels_to_99", "auc"}}, "full_pool_accuracy", "budget",
    "seeds", "n_initial"}``; see :func:`labelq.review.learning_curve.curve_summary` for the
    per-strategy figures. ``full_pool_accuracy`` is the accuracy on the pool of a model fitted
    to the whole pool with learnt hyperparameters.
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y)
    if X.ndim != 2 or y.shape != (X.shape[0],):
        raise ValueError(f"X must be (n, d) and y (n,), got {X.shape} and {y.shape}")
    classes = np.unique(y)
    if classes.size < 2:
        raise ValueError(f"simulate needs at least two classes in y, got {classes.tolist()}")
    for s in strategies:
        if s not in STRATEGIES:
            raise ValueError(f"unknown strategy {s!r}; choose from {STRATEGIES}")
    if n_initial < 2 or budget < 0 or n_initial + budget > y.size:
        raise ValueError(f"need 2 <= n_initial and n_initial + budget <= {y.size}, "
                         f"got n_initial={n_initial}, budget={budget}")
    if refit_every < 1:
        raise ValueError(f"refit_every must be at least 1, got {refit_every}")
    if not seeds:
        raise ValueError("simulate needs at least one seed")

    fits_per_run = 1 + -(-budget // refit_every)
    total = len(strategies) * len(seeds) * fits_per_run + 1
    done = 0

    def tick():
        nonlocal done
        done += 1
        if progress is not None:
            progress(done, total)

    replay = _Replay(_standardise(X), y, classes.tolist(), kernel, link, ard, budget,
                     refit_every, tick)
    with single_blas_thread():
        full = replay.model(0, optimize=True, n_labels=len(y))
        full.fit(replay.Xs, y, classes=replay.classes)
        full_accuracy = replay.accuracy(full.predict_pool(replay.Xs).proba, full)
        tick()

        starts = {seed: initial_labels(y, n_initial, seed) for seed in seeds}
        result = {}
        for strategy in strategies:
            runs = [_replay_run(replay, strategy, starts[seed], seed) for seed in seeds]
            result[strategy] = curve_summary(runs[0][0], np.stack([r[1] for r in runs]),
                                             np.stack([r[2] for r in runs]), full_accuracy)
    return {
        "strategies": result,
        "full_pool_accuracy": full_accuracy,
        "budget": int(budget),
        "seeds": [int(s) for s in seeds],
        "n_initial": int(n_initial),
    }
