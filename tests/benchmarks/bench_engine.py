"""Benchmark labelq.gp against scikit-learn's GaussianProcessClassifier, side by side.

Run: python tests/benchmarks/bench_engine.py [--repeats 3] [--threads 1]

1. ARD squared-exponential fit with hyperparameter learning, n = 1,000, d = 16
   (goal: >= 10x faster than scikit-learn, log marginal likelihood no more than 0.5 lower);
2. class probabilities for 100,000 points from the n = 1,000 model (goal: >= 5x faster).

Medians over the repeats. BLAS threads are capped with threadpoolctl (default 1, the same for
both libraries) because multi-threaded OpenBLAS on a shared, oversubscribed machine makes small
factorisations erratic.
"""
import argparse
import time

import numpy as np
from sklearn.gaussian_process import GaussianProcessClassifier
from sklearn.gaussian_process.kernels import RBF, ConstantKernel
from threadpoolctl import threadpool_limits

from labelq.gp import GPClassifier

N_TRAIN, N_FEATURES, N_POOL = 1000, 16, 100_000


def make_data(seed=0):
    """Synthetic binary problem: 4 informative features out of 16, label noise."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(N_TRAIN, N_FEATURES))
    score = np.sin(2 * X[:, 0]) + X[:, 1] * X[:, 2] - 0.5 * X[:, 3] + 0.3 * rng.normal(size=N_TRAIN)
    y = (score > 0).astype(int)
    pool = rng.normal(size=(N_POOL, N_FEATURES))
    return X, y, pool


def timed(fn, repeats):
    times, result = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - start)
    return float(np.median(times)), result


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--threads", type=int, default=1)
    args = parser.parse_args()
    X, y, pool = make_data()
    with threadpool_limits(limits=args.threads, user_api="blas"):
        t_ours, ours = timed(lambda: GPClassifier(kernel="se", ard=True).fit(X, y), args.repeats)
        t_sk, sk = timed(lambda: GaussianProcessClassifier(
            ConstantKernel(1.0) * RBF(np.ones(N_FEATURES)), random_state=0).fit(X, y),
            args.repeats)
        p_ours, pred = timed(lambda: ours.predict_pool(pool), args.repeats)
        p_sk, proba_sk = timed(lambda: sk.predict_proba(pool), args.repeats)
    lml_sk = sk.log_marginal_likelihood_value_
    print(f"BLAS threads {args.threads}, median of {args.repeats} repeats")
    print(f"fit  n={N_TRAIN} d={N_FEATURES} ARD: labelq {t_ours:8.2f} s  scikit-learn {t_sk:8.2f} s"
          f"  speed-up {t_sk / t_ours:6.1f}x (goal 10x)")
    print(f"log marginal likelihood: labelq {ours.log_marginal_likelihood_:.3f}  scikit-learn "
          f"{lml_sk:.3f}  difference {ours.log_marginal_likelihood_ - lml_sk:+.3f} (goal >= -0.5)")
    print(f"proba {N_POOL} points from n={N_TRAIN}: labelq {p_ours:6.2f} s  scikit-learn "
          f"{p_sk:6.2f} s  speed-up {p_sk / p_ours:6.1f}x (goal 5x)")
    print(f"max |p_labelq - p_sklearn| on the pool: {np.abs(pred.proba - proba_sk).max():.3f} "
          "(different hyperparameters)")


if __name__ == "__main__":
    main()
