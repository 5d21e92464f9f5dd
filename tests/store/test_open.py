"""Creating and opening stores: named errors, the marker, connection settings."""

import sqlite3
from contextlib import closing
from pathlib import Path

import pytest
from sqlalchemy import text

from labelq.errors import LabelqError
from labelq.store import (
    InvalidClassesError,
    MissingDirectoryError,
    MissingStoreError,
    NotAStoreError,
    Store,
    StoreExistsError,
)
from labelq.store.engine import reading, writing

from .conftest import CLASSES, table_rows


def test_create_writes_classes_in_order_and_an_empty_pool(tmp_path: Path) -> None:
    with Store.create(tmp_path / "s.db", ["b", "a"]) as store:
        assert store.classes == ["b", "a"]
        assert store.feature_names == []
        assert store.path == tmp_path / "s.db"
        assert store.counts() == {"candidates": 0, "labelled": 0, "skipped": 0}
        assert store.event_mark() == 0
        assert store.check() == []
        mean, scale = store.feature_scaling()
        assert mean.shape == scale.shape == (0,)


def test_open_reads_what_create_wrote(tmp_path: Path) -> None:
    Store.create(tmp_path / "s.db", CLASSES).close()
    with Store.open(str(tmp_path / "s.db")) as store:
        assert store.classes == CLASSES


@pytest.mark.parametrize("classes", [[], ["only"], ["a", "a"], ["a", ""], ["a", "  "]])
def test_create_refuses_bad_classes_and_leaves_no_file(tmp_path: Path, classes: list[str]) -> None:
    with pytest.raises(InvalidClassesError, match="at least two distinct"):
        Store.create(tmp_path / "s.db", classes)
    assert not (tmp_path / "s.db").exists()


def test_create_refuses_an_existing_file(tmp_path: Path) -> None:
    path = tmp_path / "s.db"
    path.write_text("keep me")
    with pytest.raises(StoreExistsError, match=str(path)):
        Store.create(path, CLASSES)
    assert path.read_text() == "keep me"


def test_create_refuses_a_missing_directory(tmp_path: Path) -> None:
    with pytest.raises(MissingDirectoryError, match="does not exist"):
        Store.create(tmp_path / "nowhere" / "s.db", CLASSES)


def test_open_missing_store_says_how_to_make_one(tmp_path: Path) -> None:
    path = tmp_path / "absent.db"
    with pytest.raises(MissingStoreError) as raised:
        Store.open(path)
    assert str(raised.value) == f"no labelq store at {path} (run `labelq init` first)"
    assert not path.exists()


def test_open_refuses_a_directory(tmp_path: Path) -> None:
    with pytest.raises(NotAStoreError, match="is a directory"):
        Store.open(tmp_path)


@pytest.mark.parametrize("content", [b"", b"key,firmness\nx,1\n"])
def test_open_refuses_a_file_that_is_not_sqlite(tmp_path: Path, content: bytes) -> None:
    path = tmp_path / "pool.csv"
    path.write_bytes(content)
    with pytest.raises(NotAStoreError, match="not an SQLite database"):
        Store.open(path)
    assert path.read_bytes() == content


def test_open_refuses_an_sqlite_file_without_the_marker_and_leaves_it_alone(tmp_path: Path) -> None:
    path = tmp_path / "other.db"
    with closing(sqlite3.connect(path)) as connection:
        connection.execute("CREATE TABLE t (x)")
        connection.commit()
    with pytest.raises(NotAStoreError, match="without the labelq marker"):
        Store.open(path)
    with closing(sqlite3.connect(path)) as connection:
        assert connection.execute("PRAGMA journal_mode").fetchone() == ("delete",)


def test_errors_are_labelq_errors_with_one_line_messages(tmp_path: Path) -> None:
    with pytest.raises(LabelqError) as raised:
        Store.open(tmp_path / "x.db")
    assert "\n" not in str(raised.value)


def test_connections_use_wal_busy_timeout_and_foreign_keys(store: Store) -> None:
    with reading(store._engine) as connection:
        assert connection.execute(text("PRAGMA journal_mode")).scalar() == "wal"
        assert connection.execute(text("PRAGMA busy_timeout")).scalar() >= 30_000
        assert connection.execute(text("PRAGMA foreign_keys")).scalar() == 1


def test_a_failed_write_rolls_back_the_whole_transaction(store: Store) -> None:
    before = table_rows(store.path)
    with pytest.raises(RuntimeError), writing(store._engine) as connection:
        connection.execute(text("INSERT INTO sessions (started_at, by) VALUES ('t', 'x')"))
        raise RuntimeError("abort")
    assert table_rows(store.path) == before
