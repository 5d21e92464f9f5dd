"""BLAS threads inside the engine: `GPClassifier().fit` as a user calls it (default threads)
against the same fit forced onto one thread and onto BLAS's own thread count.

A plain script (not collected by pytest):  python tests/benchmarks/bench_threads.py

Data: scikit-learn's make_classification, d = 16, seeded. For each n, runs alternate between
three settings - "engine" (labelq's default: one BLAS thread below
labelq.gp.threads.BLAS_THREAD_THRESHOLD rows), "one" (threadpoolctl limit 1 around the fit) and
"blas" (the engine's rule switched off: BLAS's own thread count) - and the medians and the
engine/one ratio are printed beside issue 13's goal (default no slower than one thread).
"""

from __future__ import annotations

import argparse
import statistics
import time

from sklearn.datasets import make_classification
from threadpoolctl import threadpool_info, threadpool_limits

import labelq.gp.threads as threads
from labelq.gp import GPClassifier


def fit_once(X, y) -> float:
    t = time.perf_counter()
    GPClassifier(random_state=0).fit(X, y)
    return time.perf_counter() - t


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[300, 500, 1000])
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    blas = [(i["internal_api"], i["num_threads"]) for i in threadpool_info()
            if i["user_api"] == "blas"]
    print(f"BLAS libraries and their default threads: {blas}")
    print(f"{'n':>6} {'engine':>9} {'one':>9} {'blas':>9} {'engine/one':>11}  goal: engine/one <= 1")
    default_threshold = threads.BLAS_THREAD_THRESHOLD
    for n in args.sizes:
        X, y = make_classification(n_samples=n, n_features=16, n_informative=8, random_state=1)
        times = {"engine": [], "one": [], "blas": []}
        def engine():
            threads.BLAS_THREAD_THRESHOLD = default_threshold
            return fit_once(X, y)

        def one():
            threads.BLAS_THREAD_THRESHOLD = default_threshold
            with threadpool_limits(limits=1, user_api="blas"):
                return fit_once(X, y)

        def blas():
            threads.BLAS_THREAD_THRESHOLD = 0
            return fit_once(X, y)

        sides = [("engine", engine), ("one", one), ("blas", blas)]
        for r in range(args.repeats):
            # the order turns each repeat: OpenBLAS's idle threads spin for a while after a
            # threaded call, which slows whichever run comes next on a 2-core machine
            for name, run in sides[r % 3:] + sides[:r % 3]:
                times[name].append(run())
        threads.BLAS_THREAD_THRESHOLD = default_threshold
        med = {k: statistics.median(v) for k, v in times.items()}
        print(f"{n:>6} {med['engine']:>8.2f}s {med['one']:>8.2f}s {med['blas']:>8.2f}s "
              f"{med['engine'] / med['one']:>10.2f}x")


if __name__ == "__main__":
    main()
