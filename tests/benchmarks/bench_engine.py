"""Benchmark labelq.gp against scikit-learn's GaussianProcessClassifier, side by side.

Run: python tests/benchmarks/bench_engine.py [--repeats 3] [--threads 1]

1. ARD squared-exponential fit with hyperparameter learning, n = 1,000, d = 16
   (goal: >= 10x faster than scikit-learn, log marginal likelihood no more than 0.5 lower);
2. class probabilities for 100,000 points from the n = 1,000 model (goal: >= 5x faster).

Medians over the repeats, ours and scikit-learn's run alternately. BLAS threads are capped with threadpoolctl (default 1, the same for
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


def paired(ours, theirs, repeats):
    """Time ``ours`` and ``theirs`` alternately ``repeats`` times (so that a machine whose speed
    drifts during the run slows both alike); returns (our times, their times, last results)."""
    t_ours, t_theirs, result = [], [], (None, None)
    for _ in range(repeats):
        start = time.perf_counter()
        mine = ours()
        t_ours.append(time.perf_counter() - start)
        start = time.perf_counter()
        other = theirs()
        t_theirs.append(time.perf_counter() - start)
        result = (mine, other)
    return np.array(t_ours), np.array(t_theirs), result


def report(name, t_ours, t_theirs, goal):
    ratios = t_theirs / t_ours
    print(f"{name}: labelq {np.median(t_ours):6.2f} s  scikit-learn {np.median(t_theirs):7.2f} s"
          f"  speed-up {np.median(t_theirs) / np.median(t_ours):5.1f}x (goal {goal}x); "
          f"per pair {', '.join(f'{r:.1f}' for r in ratios)}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--threads", type=int, default=1)
    args = parser.parse_args()
    X, y, pool = make_data()
    with threadpool_limits(limits=args.threads, user_api="blas"):
        fit_ours, fit_sk, (ours, sk) = paired(
            lambda: GPClassifier(kernel="se", ard=True).fit(X, y),
            lambda: GaussianProcessClassifier(ConstantKernel(1.0) * RBF(np.ones(N_FEATURES)),
                                              random_state=0).fit(X, y),
            args.repeats)
        p_ours, p_sk, (pred, proba_sk) = paired(lambda: ours.predict_pool(pool),
                                                lambda: sk.predict_proba(pool), args.repeats)
    lml_sk = sk.log_marginal_likelihood_value_
    print(f"BLAS threads {args.threads}, medians of {args.repeats} alternating repeats")
    report(f"fit  n={N_TRAIN} d={N_FEATURES} ARD", fit_ours, fit_sk, 10)
    print(f"log marginal likelihood: labelq {ours.log_marginal_likelihood_:.3f}  scikit-learn "
          f"{lml_sk:.3f}  difference {ours.log_marginal_likelihood_ - lml_sk:+.3f} (goal >= -0.5)")
    report(f"proba {N_POOL} points from n={N_TRAIN}", p_ours, p_sk, 5)
    print(f"max |p_labelq - p_sklearn| on the pool: {np.abs(pred.proba - proba_sk).max():.3f} "
          "(different hyperparameters)")


if __name__ == "__main__":
    main()
