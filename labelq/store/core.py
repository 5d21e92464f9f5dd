"""State and queries shared by the parts of :class:`labelq.store.Store`.

A label event is *live* when it is not itself a retraction and nothing retracts it; a candidate's
current label is its latest live label event. A skip event is live in the same sense; a candidate is
skipped while it has a live skip event (there is at most one).
"""

import json
from collections.abc import Callable, Iterator, Sequence
from contextlib import AbstractContextManager
from pathlib import Path
from typing import TYPE_CHECKING, Any, Optional, Union

from sqlalchemy import Connection, Engine, text

from labelq.store.engine import EVENTS, driver, is_sqlite, reading, writing
from labelq.store.errors import UnknownKeyError
from labelq.store.sql import CURRENT_LABEL_IDS, LIVE_LABEL, LIVE_SKIP  # noqa: F401 (re-exported)

if TYPE_CHECKING:
    from sqlalchemy.engine import URL

_ID_CHUNK = 5000


class StoreCore:
    """The engine, location and transaction helpers each part of the store builds on."""

    def __init__(self, path: Union[Path, "URL"], engine: Engine) -> None:
        self._path = path
        self._engine = engine

    @property
    def path(self) -> Union[Path, "URL"]:
        """The store's file, or for a store on a server its SQLAlchemy URL (``str()`` shows it
        with the password hidden, so messages can show it as they show a path)."""
        return self._path

    def _read(self) -> AbstractContextManager[Connection]:
        return reading(self._engine)

    def _write(self, lock: Optional[str] = EVENTS) -> AbstractContextManager[Connection]:
        """A write transaction; ``lock`` as `labelq.store.engine.writing` (EVENTS or DERIVED)."""
        return writing(self._engine, lock)


def candidate_id(connection: Connection, key: str) -> int:
    """The id of the candidate ``key``; UnknownKeyError if there is none."""
    found = connection.execute(text("SELECT id FROM candidates WHERE key = :key"), {"key": key}).scalar()
    if found is None:
        raise UnknownKeyError(f"no candidate with key {key!r}")
    return found


def class_names(connection: Connection) -> list[str]:
    """The store's classes in position order."""
    return list(connection.execute(text("SELECT name FROM classes ORDER BY position")).scalars())


def feature_names(connection: Connection) -> list[str]:
    """The store's feature names in column order; empty before the first import."""
    return list(connection.execute(text("SELECT name FROM feature_schema ORDER BY position")).scalars())


def json_object(value: Any) -> Any:
    """A JSON column's value read with raw SQL: SQLite returns the text, psycopg decodes it."""
    return json.loads(value) if isinstance(value, (str, bytes)) else value


def rows_by_id(connection: Connection, select_sql: str, ids: Sequence[int]) -> dict[int, tuple[Any, ...]]:
    """Run ``select_sql`` (first column the id, ``IN ({ids})`` where the id list goes) for ``ids``.

    SQLite: the ids are sent in chunks so any number of them stays within its parameter limit.
    PostgreSQL: one array parameter.
    """
    unique = sorted({int(i) for i in ids})
    if not is_sqlite(connection):
        rows = connection.execute(text(select_sql.format(ids="SELECT unnest(CAST(:ids AS BIGINT[]))")),
                                  {"ids": unique})
        return {row[0]: tuple(row) for row in rows}
    cursor = driver(connection).cursor()
    found: dict[int, tuple[Any, ...]] = {}
    for start in range(0, len(unique), _ID_CHUNK):
        chunk = unique[start : start + _ID_CHUNK]
        sql = select_sql.format(ids=",".join("?" * len(chunk)))
        found.update((row[0], row) for row in cursor.execute(sql, chunk))
    cursor.close()
    return found


def in_given_order(
    found: dict[int, tuple[Any, ...]], ids: Sequence[int], missing: Callable[[int], Any]
) -> Iterator[Any]:
    """The rows of ``found`` in the order of ``ids``; ``missing(id)`` for an id without a row."""
    for i in ids:
        row = found.get(int(i))
        yield missing(int(i)) if row is None else row
