"""Shared fixtures for CLI tests: temporary stores built from data bundled with scikit-learn, on
each back end (an SQLite file in tmp_path, a new PostgreSQL database; tests/conftest.py).

Data: scikit-learn's bundled breast-cancer (Wisconsin diagnostic) and iris data sets, written to
CSV files in a temporary folder; keys are made up as row numbers ("c000").
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from sklearn.datasets import load_breast_cancer, load_iris
from sqlalchemy import inspect, text
from typer.testing import CliRunner

from labelq.cli.app import app
from tests.conftest import db_argument, engine_for

TABLES = ("candidates", "feature_schema", "classes", "label_events", "skip_events", "sessions",
          "fits", "scores", "snapshots", "claims", "audits", "audit_items", "disputes",
          "feature_blocks", "score_blocks")


def write_csv(path: Path, header, rows) -> Path:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
    return path


def dataset_csv(path: Path, data, n=None, truth=True, meta=True) -> Path:
    """Rows of a scikit-learn data set as a CSV: key, [site], features..., [truth]."""
    X, y = data.data, data.target
    n = len(y) if n is None else n
    names = [f.replace(" ", "_") for f in data.feature_names]
    header = ["key"] + (["site"] if meta else []) + names + (["truth"] if truth else [])
    rows = []
    for i in range(n):
        row = [f"c{i:03d}"] + ([f"s{i % 4}"] if meta else []) + [repr(float(v)) for v in X[i]]
        if truth:
            row.append(str(data.target_names[y[i]]))
        rows.append(row)
    return write_csv(path, header, rows)


@pytest.fixture
def cancer_csv(tmp_path) -> Path:
    """The first 200 rows of scikit-learn's breast-cancer data (classes malignant, benign)."""
    return dataset_csv(tmp_path / "cancer.csv", load_breast_cancer(), n=200)


@pytest.fixture
def full_cancer_csv(tmp_path) -> Path:
    """All 569 rows of scikit-learn's breast-cancer data, with the true class as `truth`."""
    return dataset_csv(tmp_path / "cancer_all.csv", load_breast_cancer())


@pytest.fixture
def iris_csv(tmp_path) -> Path:
    """scikit-learn's iris data (three classes)."""
    return dataset_csv(tmp_path / "iris.csv", load_iris())


class Cli:
    """Invoke `labelq` on one temporary store and inspect it.

    ``location`` is the store's path or URL; ``db`` the text given to ``--db`` (a URL with its
    password, which ``str()`` of a URL hides)."""

    def __init__(self, location):
        self.location = location
        self.db = db_argument(location)
        self.runner = CliRunner()

    def __call__(self, *args, input=None):
        return self.runner.invoke(app, [*map(str, args), "--db", self.db], input=input)

    def json(self, *args):
        result = self(*args, "--json")
        assert result.exit_code == 0, result.output
        return json.loads(result.stdout)

    def query(self, sql: str, params=None) -> list[tuple]:
        """The rows of ``sql``, read through a plain SQLAlchemy engine (none of the store's code)."""
        engine = engine_for(self.location)
        try:
            with engine.connect() as connection:
                return [tuple(row) for row in connection.execute(text(sql), params or {})]
        finally:
            engine.dispose()

    def counts(self) -> dict:
        """Row counts of every table."""
        return {t: self.query(f"SELECT COUNT(*) FROM {t}")[0][0] for t in TABLES}

    def dump(self) -> dict:
        """Every row of every table, sorted (the store is unchanged <=> equal dumps); {} when
        there is no store (no file, or a database without the store's tables)."""
        if isinstance(self.location, Path) and not self.location.exists():
            return {}
        engine = engine_for(self.location)
        try:
            if "store_info" not in inspect(engine).get_table_names():
                return {}
        finally:
            engine.dispose()
        return {t: sorted(self.query(f"SELECT * FROM {t}"), key=repr) for t in TABLES}

    def truth(self, csv_path: Path) -> dict:
        with open(csv_path, newline="") as fh:
            return {r["key"]: r["truth"] for r in csv.DictReader(fh)}


@pytest.fixture
def cli(store_at) -> Cli:
    """The command line on a new store location of this test's back end (nothing made yet)."""
    return Cli(store_at("store.db"))


@pytest.fixture
def new_cli(store_at):
    """``new_cli(name)``: another Cli on a further new store location of the same back end."""
    return lambda name: Cli(store_at(name))


@pytest.fixture
def cancer_store(cli, cancer_csv) -> Cli:
    """An initialised store holding the cancer rows (truth column kept as metadata)."""
    assert cli("init", "--classes", "malignant,benign").exit_code == 0
    result = cli("import", cancer_csv, "--id", "key")
    assert result.exit_code == 0, result.output
    return cli


def assert_user_error(result, *fragments):
    """Exit code 2, one line on stderr containing every fragment, no traceback."""
    assert result.exit_code == 2, (result.exit_code, result.output)
    err = result.stderr.strip()
    assert "Traceback" not in result.output + err
    assert len(err.splitlines()) == 1, err
    for f in fragments:
        assert f in err, (f, err)


@pytest.fixture
def user_error():
    """The assertion for a user error (tests cannot import conftest under importlib mode)."""
    return assert_user_error


@pytest.fixture
def csv_file():
    """The CSV writer helper as a fixture."""
    return write_csv
