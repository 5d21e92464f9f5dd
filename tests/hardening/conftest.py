"""Shared fixtures for the hardening tests: stores built from data bundled with scikit-learn.

Data: scikit-learn's bundled breast-cancer (Wisconsin diagnostic), digits and iris data sets,
written to CSV files in a temporary folder; keys are row numbers ("c0000"). Helpers are handed out
as fixtures because tests run with --import-mode=importlib and cannot import this module.
"""

from __future__ import annotations

import csv
import json
import os
import sqlite3
import subprocess
import sys
from contextlib import closing
from pathlib import Path

import pytest
from sklearn.datasets import load_breast_cancer, load_digits, load_iris
from typer.testing import CliRunner

from labelq.cli.app import app

TABLES = ("candidates", "feature_schema", "classes", "label_events", "skip_events", "sessions",
          "fits", "scores", "snapshots", "claims", "feature_blocks", "score_blocks")


def write_dataset_csv(path: Path, data, rows=None, labels_for=None, class_names=None) -> Path:
    """Rows of a scikit-learn data set as CSV: key, features..., truth[, label].

    ``labels_for`` (row indices) adds a ``label`` column holding the true class on those rows and
    empty cells elsewhere (for `import --labels label`). ``class_names`` maps a target to a name.
    """
    X, y = data.data, data.target
    rows = range(len(y)) if rows is None else rows
    names = class_names or [str(n) for n in data.target_names]
    header = ["key"] + [f"f{j:02d}" for j in range(X.shape[1])] + ["truth"]
    wanted = set(labels_for) if labels_for is not None else None
    if wanted is not None:
        header.append("label")
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        for i in rows:
            row = [f"c{i:04d}"] + [repr(float(v)) for v in X[i]] + [names[y[i]]]
            if wanted is not None:
                row.append(names[y[i]] if i in wanted else "")
            w.writerow(row)
    return path


def subprocess_env() -> dict:
    """The environment for child processes: one BLAS thread each (two cores are shared)."""
    env = dict(os.environ)
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        env[var] = "1"
    env["NO_COLOR"] = "1"
    env["COLUMNS"] = "200"
    return env


def run_labelq(*args, db: Path, timeout: float = 300) -> subprocess.CompletedProcess:
    """`python -m labelq ARGS --db DB` in a fresh process."""
    return subprocess.run([sys.executable, "-m", "labelq", *map(str, args), "--db", str(db)],
                          capture_output=True, text=True, env=subprocess_env(), timeout=timeout)


class Cli:
    """Invoke `labelq` in-process on one store and inspect the file."""

    def __init__(self, db: Path):
        self.db = db
        self.runner = CliRunner()

    def __call__(self, *args, input=None):
        return self.runner.invoke(app, [*map(str, args), "--db", str(self.db)], input=input,
                                  env={"COLUMNS": "200", "NO_COLOR": "1"})

    def json(self, *args):
        result = self(*args, "--json")
        assert result.exit_code == 0, result.output
        return json.loads(result.stdout)

    def counts(self) -> dict:
        with closing(sqlite3.connect(self.db)) as con:
            return {t: con.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0] for t in TABLES}


def query(db: Path, sql: str, params=()) -> list:
    """Rows of ``sql`` read from the file read-only (no write lock, no WAL checkpoint)."""
    with closing(sqlite3.connect(f"{Path(db).resolve().as_uri()}?mode=ro", uri=True,
                                 timeout=30)) as con:
        return con.execute(sql, params).fetchall()


def execute(db: Path, sql: str, params=()) -> None:
    """Run one write statement on the file (to damage derived data on purpose)."""
    with closing(sqlite3.connect(db, timeout=30)) as con:
        con.execute(sql, params)
        con.commit()


@pytest.fixture(scope="session")
def cancer():
    """scikit-learn's breast-cancer data (569 x 30; classes malignant, benign)."""
    return load_breast_cancer()


@pytest.fixture(scope="session")
def digits():
    """scikit-learn's digits data (1797 x 64; classes 0-9)."""
    return load_digits()


@pytest.fixture(scope="session")
def iris():
    """scikit-learn's iris data (150 x 4; setosa, versicolor, virginica)."""
    return load_iris()


@pytest.fixture
def dataset_csv():
    return write_dataset_csv


@pytest.fixture
def labelq_process():
    """`python -m labelq ...` in a child process."""
    return run_labelq


@pytest.fixture
def child_env():
    return subprocess_env


@pytest.fixture
def sql():
    """(query, execute) on a store file with the sqlite3 module."""
    return query, execute


@pytest.fixture
def cli(tmp_path) -> Cli:
    return Cli(tmp_path / "store.db")


@pytest.fixture
def cancer_cli(cli, cancer, tmp_path) -> Cli:
    """A store holding the 569 breast-cancer rows (truth kept as metadata), nothing labelled."""
    path = write_dataset_csv(tmp_path / "cancer.csv", cancer)
    assert cli("init", "--classes", "malignant,benign").exit_code == 0
    result = cli("import", path, "--id", "key")
    assert result.exit_code == 0, result.output
    cli.truth = {f"c{i:04d}": str(cancer.target_names[t]) for i, t in enumerate(cancer.target)}
    return cli
