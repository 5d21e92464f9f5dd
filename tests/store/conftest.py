"""Fixtures for store tests: fresh stores in tmp_path and a raw view of their rows."""

import sqlite3
from contextlib import closing
from pathlib import Path

import numpy as np
import pytest

from labelq.store import Store

FEATURES = ["firmness_kgf", "sugar_brix", "hue_deg"]
CLASSES = ["export", "local", "juice"]


def table_rows(path: Path) -> dict[str, int]:
    """Row count of every table plus the event mark, read with plain sqlite3 (common practice)."""
    with closing(sqlite3.connect(path)) as connection:
        tables = [
            name for (name,) in connection.execute("SELECT name FROM sqlite_master WHERE type = 'table'")
        ]
        counts = {name: connection.execute(f'SELECT COUNT(*) FROM "{name}"').fetchone()[0] for name in tables}
        counts["event_mark"] = connection.execute("SELECT event_mark FROM store_info").fetchone()[0]
    return counts


def orchard(n: int, seed: int = 0) -> tuple[list[str], np.ndarray, list[dict[str, str]]]:
    """``n`` invented apples: keys, features (n, 3) and metadata."""
    rng = np.random.default_rng(seed)
    X = np.column_stack([rng.normal(7.0, 1.0, n), rng.normal(12.0, 2.0, n), rng.uniform(0.0, 120.0, n)])
    keys = [f"apple-{seed}-{i:04d}" for i in range(n)]
    meta = [{"bin": f"B{i % 4}", "picked_on": "2026-09-14"} for i in range(n)]
    return keys, X, meta


@pytest.fixture
def store(tmp_path: Path):
    """An empty store with the three apple grades."""
    with Store.create(tmp_path / "labelq.db", CLASSES) as created:
        yield created


@pytest.fixture
def pool(store: Store) -> Store:
    """A store holding six candidates ``apple-0-0000`` .. ``apple-0-0005``."""
    keys, X, meta = orchard(6)
    store.add_candidates(keys, X, meta, FEATURES)
    return store
