"""Fixtures for store tests: fresh stores on each back end (an SQLite file in tmp_path, a new
PostgreSQL database; tests/conftest.py) and a plain view of their rows."""

import numpy as np
import pytest
from sqlalchemy import inspect, text

from labelq.store import Store
from tests.conftest import engine_for

FEATURES = ["firmness_kgf", "sugar_brix", "hue_deg"]
CLASSES = ["export", "local", "juice"]


def table_rows(location) -> dict[str, int]:
    """Row count of every table plus the event mark, read through a plain SQLAlchemy engine
    (none of the store's code; common practice). ``location``: a store's path or URL."""
    engine = engine_for(location)
    try:
        with engine.connect() as connection:
            tables = inspect(connection).get_table_names()
            counts = {name: connection.execute(text(f'SELECT COUNT(*) FROM "{name}"')).scalar_one()
                      for name in tables}
            counts["event_mark"] = connection.execute(text("SELECT event_mark FROM store_info")).scalar_one()
    finally:
        engine.dispose()
    return counts


def table_names(location) -> set[str]:
    """The tables of the store at ``location`` (a path or a URL)."""
    engine = engine_for(location)
    try:
        return set(inspect(engine).get_table_names())
    finally:
        engine.dispose()


def execute_sql(location, *statements: str) -> None:
    """Run ``statements`` in one transaction through a plain SQLAlchemy engine, as a person with
    a database shell would (SQLite's foreign-key checks are off there, as in any new connection)."""
    engine = engine_for(location)
    try:
        with engine.begin() as connection:
            for statement in statements:
                connection.execute(text(statement))
    finally:
        engine.dispose()


def orchard(n: int, seed: int = 0) -> tuple[list[str], np.ndarray, list[dict[str, str]]]:
    """``n`` invented apples: keys, features (n, 3) and metadata."""
    rng = np.random.default_rng(seed)
    X = np.column_stack([rng.normal(7.0, 1.0, n), rng.normal(12.0, 2.0, n), rng.uniform(0.0, 120.0, n)])
    keys = [f"apple-{seed}-{i:04d}" for i in range(n)]
    meta = [{"bin": f"B{i % 4}", "picked_on": "2026-09-14"} for i in range(n)]
    return keys, X, meta


@pytest.fixture
def store(store_at):
    """An empty store with the three apple grades (on each back end)."""
    with Store.create(store_at(), CLASSES) as created:
        yield created


@pytest.fixture
def pool(store: Store) -> Store:
    """A store holding six candidates ``apple-0-0000`` .. ``apple-0-0005``."""
    keys, X, meta = orchard(6)
    store.add_candidates(keys, X, meta, FEATURES)
    return store
