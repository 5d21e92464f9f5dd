"""A pool of a million candidates: import, first fit, `label` steps, `next`, peak memory.

A plain script (not collected by pytest):

    python tests/benchmarks/bench_scale.py               # 1,000,000 x 32 (many minutes)
    python tests/benchmarks/bench_scale.py --rows 100000 # a quick check

Data: scikit-learn's make_classification (a generator of the reference library) with a fixed
seed, written as a CSV with a key column, 32 feature columns and a labels column filled for the
first --labels rows (the rest empty). The CSV goes through the CLI code path
(`labelq import --labels`, run as its own process like every command). Then the first fit
(ensure_fit), a few single `label` steps (labelq.loop.actions.label: commit + warm refit + re-rank
+ persist) and `next` on persisted scores (labelq.loop.actions.next_queue). Times are medians;
peak resident memory is resource.getrusage(RUSAGE_SELF).ru_maxrss (KiB on Linux); the data
are generated and written by a child process (its peak is reported as RUSAGE_CHILDREN).

Goals of issue 13 (reported beside each figure, never asserted), at 1,000,000 x 32, n = 500:
`import` <= 15 s, a `label` step <= 3 s, `next` <= 50 ms (the command's own work after start-up:
the quick read path `labelq next` takes on a current store; the full path and the whole process
are printed beside it), peak resident memory <= 1.5 GB. Default BLAS threads, as a user runs it.
"""

from __future__ import annotations

import argparse
import csv
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from sklearn.datasets import make_classification

from labelq.loop import actions
from labelq.loop.quick import quick_next_queue
from labelq.loop.refit import ensure_fit
from labelq.store import Store

CLASSES = ("no", "yes")


def peak_rss_mib(who=resource.RUSAGE_SELF) -> float:
    """Peak resident set size in MiB (ru_maxrss is in KiB on Linux)."""
    return resource.getrusage(who).ru_maxrss / 1024.0


def write_csv(path: Path, X: np.ndarray, y: np.ndarray, n_labels: int, chunk: int = 50_000) -> None:
    """key, x00..x31, truth (class name for the first n_labels rows, else empty)."""
    d = X.shape[1]
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["key", *[f"x{j:02d}" for j in range(d)], "truth"])
        for start in range(0, len(X), chunk):
            block = X[start:start + chunk]
            rows = []
            for i, row in enumerate(block, start=start):
                label = CLASSES[int(y[i])] if i < n_labels else ""
                rows.append([f"k{i:07d}", *(repr(float(v)) for v in row), label])
            w.writerows(rows)


def goal(met: bool) -> str:
    return "met" if met else "NOT met"


def say(line: str) -> None:
    print(line, flush=True)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--features", type=int, default=32)
    parser.add_argument("--labels", type=int, default=500)
    parser.add_argument("--steps", type=int, default=3, help="single label steps to time")
    parser.add_argument("--next-repeats", type=int, default=7)
    parser.add_argument("--dir", type=Path, default=None, help="work folder (default: a temp dir)")
    parser.add_argument("--write-csv", type=Path, default=None, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.write_csv is not None:  # child mode: make the data, so the parent's RSS is labelq's
        X, y = make_classification(n_samples=args.rows, n_features=args.features,
                                   n_informative=8, random_state=0)
        write_csv(args.write_csv, X, y, args.labels)
        np.save(args.write_csv.with_suffix(".truth.npy"), y)
        return

    say(f"bench_scale: N = {args.rows:,} candidates x d = {args.features}, "
        f"n = {args.labels} labels (python {sys.version.split()[0]})")
    with tempfile.TemporaryDirectory(dir=args.dir) as tmp:
        tmp = Path(tmp)
        csv_path, db = tmp / "pool.csv", tmp / "pool.db"
        t0 = time.perf_counter()
        subprocess.run([sys.executable, __file__, "--rows", str(args.rows), "--features",
                        str(args.features), "--labels", str(args.labels), "--write-csv",
                        str(csv_path)], check=True)
        y = np.load(csv_path.with_suffix(".truth.npy"))
        say(f"wrote CSV ({csv_path.stat().st_size / 2**20:,.0f} MiB) in "
            f"{time.perf_counter() - t0:.1f} s")
        # init and import run as the commands a user types, each in its own process (as in
        # real use); the model work below runs in this process, whose peak RSS is reported.
        labelq = [sys.executable, "-m", "labelq"]
        subprocess.run([*labelq, "init", "--classes", ",".join(CLASSES), "--db", str(db)],
                       check=True, stdout=subprocess.DEVNULL)
        t0 = time.perf_counter()
        subprocess.run([*labelq, "import", str(csv_path), "--id", "key", "--labels", "truth",
                        "--db", str(db)], check=True, stdout=subprocess.DEVNULL)
        t_import = time.perf_counter() - t0
        say(f"import (`labelq import`, its own process): {args.rows:,} candidates, "
            f"{args.labels} labels in {t_import:.1f} s -> goal <= 15 s {goal(t_import <= 15)}; "
            f"peak RSS of the children so far {peak_rss_mib(resource.RUSAGE_CHILDREN):,.0f} MiB")
        store = Store.open(db)
        try:
            t0 = time.perf_counter()
            fit = ensure_fit(store)
            say(f"first fit (n = {fit.n_labels}, hyperparameters learnt: {fit.full_optimize}) in "
                f"{time.perf_counter() - t0:.1f} s; peak RSS so far {peak_rss_mib():,.0f} MiB")

            steps = []
            for r in range(args.steps):
                i = args.labels + r
                t0 = time.perf_counter()
                actions.label(store, f"k{i:07d}", CLASSES[int(y[i])], "bench")
                steps.append(time.perf_counter() - t0)
            step = statistics.median(steps)
            say(f"label step (commit + warm refit + re-rank + persist): median "
                f"{step:.2f} s over {len(steps)} ({', '.join(f'{s:.2f}' for s in steps)}) "
                f"-> goal <= 3 s {goal(step <= 3)}")

            nexts = []
            for r in range(args.next_repeats):
                t0 = time.perf_counter()
                queue = actions.next_queue(store, 10, holder=f"bench{r}")
                nexts.append(time.perf_counter() - t0)
            assert len(queue.rows) == 10
            quick = []
            for r in range(args.next_repeats):
                t0 = time.perf_counter()
                found = quick_next_queue(db, 10, None, f"quick{r}")
                quick.append(time.perf_counter() - t0)
            assert found is not None and len(found[1].rows) == 10
            process = []
            for r in range(3):
                t0 = time.perf_counter()
                subprocess.run([sys.executable, "-m", "labelq", "next", "--db", str(db)],
                               check=True, stdout=subprocess.DEVNULL)
                process.append(time.perf_counter() - t0)
            q = statistics.median(quick) * 1000
            say(f"next (10 rows, current scores): quick path median {q:.0f} ms over {len(quick)} "
                f"-> goal <= 50 ms {goal(q <= 50)}; full path "
                f"{statistics.median(nexts) * 1000:.0f} ms; whole `labelq next` process "
                f"{statistics.median(process):.2f} s (start-up included)")
        finally:
            store.close()
        say(f"store file {db.stat().st_size / 2**20:,.0f} MiB")
    self_mib = peak_rss_mib()
    children = peak_rss_mib(resource.RUSAGE_CHILDREN)
    say(f"peak RSS: {self_mib:,.0f} MiB (fits, label steps and next, this process), "
        f"{children:,.0f} MiB (largest child: data writer or import) -> goal <= 1,536 MiB "
        f"{goal(max(self_mib, children) <= 1536)}")


if __name__ == "__main__":
    main()
