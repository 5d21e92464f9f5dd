"""One `label` step at scale, ours beside the same step done with scikit-learn.

A plain script (not collected by pytest):  python tests/benchmarks/bench_step.py [--pool N]

Our step: commit the label + warm refit (mode and hyperparameters) + score and re-rank the whole
pool + persist scores, fit record and snapshot (labelq.loop.actions.label). The reference step:
scikit-learn's GaussianProcessClassifier refitted with the same fixed kernel (no hyperparameter
search) on the same labels, then predict_proba over the pool. Data: scikit-learn's
make_classification (a generator of the reference library) with n labels from a pool of N
candidates and d features. Timings are medians over repeats, the two sides alternating.
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np
from sklearn.datasets import make_classification
from sklearn.gaussian_process import GaussianProcessClassifier
from sklearn.gaussian_process.kernels import RBF, ConstantKernel

from labelq.loop import actions
from labelq.loop.refit import ensure_fit
from labelq.store import Store


CLASS_NAMES = ("no", "yes", "maybe", "other")


def build_store(path: Path, X, y, n_labels):
    names = list(CLASS_NAMES[: max(2, int(y.max()) + 1)])
    store = Store.create(path, names)
    keys = [f"k{i:07d}" for i in range(len(X))]
    labels = [names[int(y[i])] if i < n_labels else None for i in range(len(X))]
    store.add_candidates(keys, X, [{} for _ in keys], [f"x{j}" for j in range(X.shape[1])],
                         labels=labels, by="bench")
    return store, keys


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--pool", type=int, default=100_000)
    parser.add_argument("--labels", type=int, default=1_000)
    parser.add_argument("--features", type=int, default=32)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--classes", type=int, default=2)
    args = parser.parse_args()
    X, y = make_classification(n_samples=args.pool, n_features=args.features,
                               n_informative=8, n_classes=args.classes, random_state=0)
    names = CLASS_NAMES[: args.classes]
    with tempfile.TemporaryDirectory() as tmp:
        store, keys = build_store(Path(tmp) / "bench.db", X, y, args.labels - 1)
        t0 = time.perf_counter()
        fit = ensure_fit(store)
        print(f"first fit (full hyperparameter learning) at n = {args.labels - 1}: "
              f"{time.perf_counter() - t0:.2f} s")
        hp = store.last_fit().hyperparameters
        ls = np.asarray(hp.get("lengthscale", 1.0), dtype=float)
        kernel = ConstantKernel(hp.get("signal_variance", 1.0), "fixed") * RBF(ls, "fixed")
        Xs = (X - X.mean(axis=0)) / X.std(axis=0)
        n = args.labels
        ours, ref = [], []
        for r in range(args.repeats):
            # alternate the two sides so that a machine whose speed drifts slows both alike
            i = args.labels - 1 + r
            t0 = time.perf_counter()
            actions.label(store, keys[i], names[int(y[i])], "bench")
            ours.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            gpc = GaussianProcessClassifier(kernel=kernel, optimizer=None)
            gpc.fit(Xs[:n], y[:n])
            gpc.predict_proba(Xs)
            ref.append(time.perf_counter() - t0)
        store.close()

    a, b = statistics.median(ours), statistics.median(ref)
    kind = "binary" if args.classes == 2 else f"{args.classes} classes"
    print(f"label step ({kind}), n = {n} labels, N = {args.pool:,} candidates, d = {args.features}")
    print(f"  labelq       (commit + warm refit + re-rank + persist): median {a:.2f} s "
          f"over {args.repeats} ({', '.join(f'{t:.2f}' for t in ours)})")
    print(f"  scikit-learn (fixed-kernel refit + predict_proba):      median {b:.2f} s "
          f"over {args.repeats} ({', '.join(f'{t:.2f}' for t in ref)})")
    print(f"  ratio scikit-learn / labelq: {b / a:.1f}x")
    # issue 13's goals, beside the figures (default BLAS threads, as a user runs it)
    if args.classes == 2:
        print(f"  goal (binary, N = 100,000, n = 1,000, d = 32): labelq <= 0.8 s -> "
              f"{'met' if a <= 0.8 else 'not met'} ({a:.2f} s); ratio >= 10x -> "
              f"{'met' if b / a >= 10 else 'not met'} ({b / a:.1f}x)")
    else:
        print(f"  goal (three classes, N = 100,000, n = 1,000, d = 32): labelq <= 1.5 s -> "
              f"{'met' if a <= 1.5 else 'not met'} ({a:.2f} s)")


if __name__ == "__main__":
    main()
