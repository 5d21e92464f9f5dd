"""Pool scoring: score_pool (every row's exact variance) beside score_pool_bounded (exact only
where a row can reach the head), timed side by side.

A plain script (not collected by pytest):
    python tests/benchmarks/bench_bounded.py [--pool 100000] [--labels 1000] [--features 32]
        [--repeats 3] [--strategy margin] [--learn] [--no-reference]

Data: scikit-learn's make_classification (a generator of the reference library), the first
`labels` rows labelled. Model: one GPClassifier (SE kernel, logistic Laplace, one lengthscale)
with fixed hyperparameters, lengthscale 8.8 and signal variance 61 - the values its evidence
maximiser finds on the default problem (`--learn` learns them instead). Both sides run as the
label loop scores (labelq.loop.refit): BLAS on one thread, labelq.loop.settings.POOL_WORKERS
threads over the pool's chunks; the bounded side with head = POLICY.batch_shortlist (the
spread-out batch of rank_pool reads that many rows of highest priority), every unlabelled row
eligible and the labelled rows exact. Timings are medians over the repeats, the two sides
alternating. The head is checked against score_pool with double-precision members (once,
outside the timing; `--no-reference` skips it).
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np
from sklearn.datasets import make_classification

from labelq.acquire import rank_order
from labelq.gp import GPClassifier
from labelq.loop import settings
from labelq.policy import score_pool
from labelq.policy.bounded import score_pool_bounded
from labelq.review.blas_threads import single_blas_thread

LENGTHSCALE, SIGNAL_VARIANCE = 8.8, 61.0


def double_reference(model, X, policy, strategy, unlabelled):
    """score_pool with the model predicting in double precision (the exact figures)."""
    original = model.predict_pool
    model.predict_pool = lambda Z, **kw: original(Z, **{**kw, "precision": "double"})
    try:
        return score_pool(model, X, policy, strategy, unlabelled, n_jobs=settings.POOL_WORKERS)
    finally:
        del model.predict_pool


def head_of(priority, rows, n):
    return rows[rank_order(priority[rows], rows)][:n]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--pool", type=int, default=100_000)
    parser.add_argument("--labels", type=int, default=1_000)
    parser.add_argument("--features", type=int, default=32)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--strategy", default="margin")
    parser.add_argument("--learn", action="store_true")
    parser.add_argument("--no-reference", action="store_true")
    args = parser.parse_args()
    X, y = make_classification(n_samples=args.pool, n_features=args.features,
                               n_informative=8, random_state=0)
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    n = args.labels
    policy = settings.POLICY.with_(strategy=args.strategy)
    head = policy.batch_shortlist
    unlabelled = np.ones(args.pool, dtype=bool)
    unlabelled[:n] = False
    labelled = np.arange(n)
    with single_blas_thread():
        t0 = time.perf_counter()
        model = GPClassifier(ard=False, optimize=args.learn, standardize=False,
                             lengthscale=None if args.learn else LENGTHSCALE,
                             signal_variance=None if args.learn else SIGNAL_VARIANCE,
                             random_state=0).fit(X[:n], y[:n])
        print(f"fit on n = {n:,} labels: {time.perf_counter() - t0:.2f} s, "
              f"hyperparameters {model.hyperparameters_}")
        full_t, bounded_t = [], []
        for _ in range(args.repeats):
            t0 = time.perf_counter()
            full = score_pool(model, X, policy, args.strategy, unlabelled,
                              n_jobs=settings.POOL_WORKERS)
            full_t.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            scores, exact = score_pool_bounded(model, X, policy, args.strategy, unlabelled,
                                               unlabelled, head, exact_rows=labelled,
                                               n_jobs=settings.POOL_WORKERS)
            bounded_t.append(time.perf_counter() - t0)
        reference = (None if args.no_reference else
                     double_reference(model, X, policy, args.strategy, unlabelled))

    a, b = statistics.median(full_t), statistics.median(bounded_t)
    rows = np.flatnonzero(unlabelled)
    print(f"{args.strategy}: N = {args.pool:,} candidates, n = {n:,} labels, "
          f"d = {args.features}, head {head}, {settings.POOL_WORKERS} workers, "
          f"medians of {args.repeats} (alternating)")
    print(f"  score_pool          (exact variance, mixed precision): {a:6.2f} s  "
          f"[{', '.join(f'{t:.2f}' for t in full_t)}]")
    print(f"  score_pool_bounded  (bound, exact near the head):      {b:6.2f} s  "
          f"[{', '.join(f'{t:.2f}' for t in bounded_t)}]")
    print(f"  ratio: {a / b:.1f}x")
    print(f"  rows exact: {exact.sum():,} of {args.pool:,} ({exact.mean():.2%}); "
          f"unlabelled rows exact: {(exact & unlabelled).sum():,} "
          f"({(exact & unlabelled).sum() / unlabelled.sum():.2%}; the head alone is "
          f"{head / unlabelled.sum():.2%})")
    ours = head_of(scores.priority, rows, head)
    print(f"  head of {head} equals score_pool's (mixed precision): "
          f"{np.array_equal(ours, head_of(full.priority, rows, head))}")
    if reference is not None:
        same = np.array_equal(ours, head_of(reference.priority, rows, head))
        worst = np.abs(scores.proba[exact] - reference.proba[exact]).max()
        print(f"  head of {head} equals score_pool's in double precision: {same}; "
              f"largest probability difference on exact rows {worst:.1e}")


if __name__ == "__main__":
    main()
