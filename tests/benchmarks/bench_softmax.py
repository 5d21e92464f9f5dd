"""Multi-class averaged probabilities E[softmax(f)]: the bounded quadrature (the default now)
beside the fixed 2048- and 512-point quasi Monte Carlo rules, timed side by side.

A plain script (not collected by pytest):
    python tests/benchmarks/bench_softmax.py [--rows 100000] [--repeats 5] [--classes 3 4 10]

Pools, each (N, C) latent means and variances:
- "synthetic": means uniform in [-4, 4], variances log-uniform in [0.01, 4] (a model midway
  through labelling);
- "fitted" (C = 3 only): the latent of a three-class GPClassifier fitted on 60 labelled rows of
  scikit-learn's make_classification (a generator of the reference library), over a pool of N
  rows from the same generator.
Timings are medians over the repeats, the three rules run one after another in each repeat;
ratios are the fixed rules' times over the quadrature's. Accuracy: against a brute-force
reference (four independently scrambled Sobol sets of 2^16 points, scipy.stats.qmc) on a seeded
sample of 2,000 rows of each pool. BLAS is capped at one thread (the rules hardly use it).
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from scipy.special import ndtri
from scipy.stats import qmc
from sklearn.datasets import make_classification
from threadpoolctl import threadpool_limits

from labelq.gp import GPClassifier
from labelq.gp.predictive import _one_dim_rules, softmax_average, softmax_quadrature


def synthetic_pool(rows, n_classes, seed=0):
    rng = np.random.default_rng(seed)
    mean = rng.uniform(-4.0, 4.0, size=(rows, n_classes))
    var = np.exp(rng.uniform(np.log(0.01), np.log(4.0), size=(rows, n_classes)))
    return mean, var


def fitted_pool(rows, seed=0):
    X, y = make_classification(n_samples=rows + 60, n_features=8, n_informative=5,
                               n_classes=3, n_clusters_per_class=1, random_state=seed)
    model = GPClassifier(kernel="se", ard=False, random_state=seed).fit(X[:60], y[:60])
    mean, var = model.latent(X[60:])
    return mean, var


def brute_force(mean, var, log2_points=16, replicates=4, seed=1000):
    """Randomised quasi Monte Carlo reference and its standard error, (n, C) each."""
    n, n_classes = mean.shape
    runs = np.empty((replicates, n, n_classes))
    for r in range(replicates):
        z = ndtri(qmc.Sobol(d=n_classes, scramble=True, seed=seed + r).random_base2(log2_points))
        zt = np.ascontiguousarray(z.T)[:, None, :]
        for start in range(0, n, 4):
            rows = slice(start, start + 4)
            f = mean[rows].T[:, :, None] + np.sqrt(var[rows]).T[:, :, None] * zt
            f -= f.max(axis=0)
            np.exp(f, out=f)
            f /= f.sum(axis=0)
            runs[r, rows] = f.mean(axis=2).T
    return runs.mean(axis=0), runs.std(axis=0, ddof=1) / np.sqrt(replicates)


RULES = {
    "quadrature": lambda m, v: softmax_average(m, v),
    "qmc 2048": lambda m, v: softmax_average(m, v, n_points=2048),
    "qmc 512": lambda m, v: softmax_average(m, v, n_points=512),
}


def bench_pool(name, mean, var, repeats):
    times = {rule: [] for rule in RULES}
    for _ in range(repeats):
        for rule, run in RULES.items():
            start = time.perf_counter()
            run(mean, var)
            times[rule].append(time.perf_counter() - start)
    sample = np.random.default_rng(1).choice(len(mean), size=min(2000, len(mean)), replace=False)
    ref, ref_se = brute_force(mean[sample], var[sample])
    quad = softmax_quadrature(mean, var)
    rows, n_classes = mean.shape
    print(f"\n{name} pool, N = {rows:,}, C = {n_classes}; medians of {repeats} "
          f"(reference standard error at most {ref_se.max():.1e})")
    print(f"  {'rule':<11}{'median s':>9}{'per repeat s':>31}{'  slower by':>11}"
          f"{'max |err|':>11}{'mean |err|':>11}")
    base = np.median(times["quadrature"])
    for rule, run in RULES.items():
        err = np.abs(run(mean[sample], var[sample]) - ref)
        per = ", ".join(f"{t:.2f}" for t in times[rule])
        print(f"  {rule:<11}{np.median(times[rule]):9.3f}{per:>31}"
              f"{np.median(times[rule]) / base:10.1f}x{err.max():11.1e}{err.mean():11.1e}")
    ratios = {rule: np.array(times[rule]) / np.array(times["quadrature"]) for rule in RULES}
    for rule in ("qmc 2048", "qmc 512"):
        print(f"  {rule} / quadrature per repeat: "
              f"{', '.join(f'{r:.1f}' for r in ratios[rule])}")
    print(f"  quadrature: bound max {quad.error.max():.1e}; evaluations per row mean "
          f"{quad.evaluations.mean():.0f}, median {np.median(quad.evaluations):.0f}, "
          f"max {quad.evaluations.max():.0f}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=100_000)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--classes", type=int, nargs="+", default=[3])
    args = parser.parse_args()
    start = time.perf_counter()
    _one_dim_rules()
    print(f"one-off rule table: {time.perf_counter() - start:.2f} s (first call per process)")
    with threadpool_limits(limits=1, user_api="blas"):
        for n_classes in args.classes:
            rows = args.rows if n_classes == 3 else args.rows // n_classes * 3 // 2
            softmax_average(*synthetic_pool(64, n_classes), n_points=2048)  # Sobol sets cached
            softmax_average(*synthetic_pool(64, n_classes), n_points=512)
            bench_pool("synthetic", *synthetic_pool(rows, n_classes), args.repeats)
            if n_classes == 3:
                bench_pool("fitted", *fitted_pool(rows), args.repeats)


if __name__ == "__main__":
    main()
