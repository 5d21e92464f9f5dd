"""Label efficiency: every strategy against random labelling on several real pools.

Run: python tests/benchmarks/bench_labels.py [--seeds 10] [--budget 60] [--jobs 2]
     [--datasets orchard,breast_cancer,...] [--strategies margin,random,...] [--json out.json]

Each replay starts from no labels and picks exactly as `labelq label` would (labelq.review.simulate
with the label loop's policy), reveals the true class of the candidate at rank 1, refits, and
measures the accuracy over the whole pool after every label. Per data set it prints, for every
strategy, the area under the accuracy curve over labels 1..budget (mean accuracy along the curve)
with its standard error over seeds, the difference from random's area, the labels needed to reach
95% of the accuracy of a reference model fitted on the whole pool (median over seeds; "-" when
not reached), and the largest drop in pool accuracy caused by a hand-over to learnt
hyperparameters. It needs scikit-learn and statsmodels (`pip install '.[bench]'`).

Pools (all shipped inside packages on the registry except the orchard demo, which is labelq's
own invented scenario):
- orchard: labelq's invented demo pool (3,000 apples x 7 readings, 3 grades);
- breast_cancer: scikit-learn's bundled Wisconsin diagnostic breast cancer data (569 x 30);
- iris: scikit-learn's bundled iris data (150 x 4, 3 species);
- digits_3v8: scikit-learn's bundled handwritten digits, 3 against 8 (357 x 64);
- wine: scikit-learn's bundled wine recognition data (178 x 13, 3 cultivars);
- fair: statsmodels' bundled extramarital-affairs survey (Fair 1978, 6,366 x 8; class: any
  affairs reported);
- anes96: statsmodels' bundled 1996 American National Election Study extract (944 x 9; class:
  vote).
"""
import argparse
import json
import time
from concurrent.futures import ProcessPoolExecutor

import numpy as np

from labelq.acquire import STRATEGIES
from labelq.review import simulate


def orchard():
    from labelq.demo.orchard import FEATURES, generate
    rows, truth = generate()
    X = np.array([[float(r[f]) for f in FEATURES] for r in rows])
    return X, np.array([truth[r["key"]] for r in rows])


def breast_cancer():
    from sklearn.datasets import load_breast_cancer
    return load_breast_cancer(return_X_y=True)


def iris():
    from sklearn.datasets import load_iris
    return load_iris(return_X_y=True)


def digits_3v8():
    from sklearn.datasets import load_digits
    X, y = load_digits(return_X_y=True)
    keep = (y == 3) | (y == 8)
    return X[keep], y[keep]


def wine():
    from sklearn.datasets import load_wine
    return load_wine(return_X_y=True)


def fair():
    from statsmodels.datasets import fair as data
    frame = data.load_pandas().data
    return frame.drop(columns="affairs").to_numpy(float), (frame["affairs"] > 0).to_numpy()


def anes96():
    from statsmodels.datasets import anes96 as data
    frame = data.load_pandas().data
    features = ["popul", "TVnews", "selfLR", "ClinLR", "DoleLR", "PID", "age", "educ", "income"]
    return frame[features].to_numpy(float), frame["vote"].to_numpy()


DATASETS = {f.__name__: f for f in (orchard, breast_cancer, iris, digits_3v8, wine, fair, anes96)}


def run(name, strategies, budget, seeds):
    """simulate() on one data set; returns (name, result, seconds)."""
    X, y = DATASETS[name]()
    t0 = time.perf_counter()
    result = simulate(X, np.asarray(y).astype(str), strategies=strategies, budget=budget,
                      seeds=tuple(range(seeds)))
    return name, result, time.perf_counter() - t0


def table(name, result, seconds):
    """Text table for one data set."""
    s = result["strategies"]
    random_auc = s["random"]["auc"] if "random" in s else None
    lines = [f"{name}: full-pool accuracy {result['full_pool_accuracy']:.3f} (reference on "
             f"{result['reference_rows']:,} rows), {len(result['seeds'])} seeds, "
             f"{result['budget']} labels, {seconds:.0f} s",
             f"  {'strategy':<8} {'area':>6} {'se':>6} {'vs random':>10} {'to 95%':>7} "
             f"{'final':>6} {'worst relearn':>14}"]
    for strategy, v in s.items():
        diff = "" if random_auc is None else f"{v['auc'] - random_auc:+.3f}"
        worst = min((d for _, d in v["relearns"]), default=None)
        lines.append(f"  {strategy:<8} {v['auc']:6.3f} {v['auc_se']:6.3f} {diff:>10} "
                     f"{'-' if v['labels_to_95'] is None else v['labels_to_95']:>7} "
                     f"{v['accuracy_mean'][-1]:6.3f} "
                     f"{'-' if worst is None else f'{worst:+.3f}':>14}")
    return "\n".join(lines)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=10)
    parser.add_argument("--budget", type=int, default=60)
    parser.add_argument("--jobs", type=int, default=2, help="data sets replayed at once")
    parser.add_argument("--datasets", default=",".join(DATASETS))
    parser.add_argument("--strategies", default=",".join(STRATEGIES))
    parser.add_argument("--json", help="also write every result to this file")
    args = parser.parse_args()
    names = [n.strip() for n in args.datasets.split(",") if n.strip()]
    strategies = tuple(s.strip() for s in args.strategies.split(",") if s.strip())
    results = {}
    with ProcessPoolExecutor(max_workers=args.jobs) as pool:
        futures = [pool.submit(run, n, strategies, args.budget, args.seeds) for n in names]
        for future in futures:
            name, result, seconds = future.result()
            results[name] = result
            print(table(name, result, seconds), flush=True)
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(results, fh)


if __name__ == "__main__":
    main()
