"""The SQLite engine behind a store and the transaction helpers every store operation uses.

Each connection runs in WAL mode with a 30 s busy timeout and foreign keys on. The driver's own
transaction handling is switched off so that SQLAlchemy's ``begin`` emits the BEGIN itself: reads
start a deferred transaction, writes ``BEGIN IMMEDIATE``, which takes the write lock up front so
two processes never fail with "database is locked" while upgrading a read lock.
"""

import sqlite3
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Union

from sqlalchemy import Connection, Engine, create_engine, event, text

BUSY_TIMEOUT_SECONDS = 30
_BEGIN_OPTION = "labelq_begin"


def make_engine(path: Union[str, Path]) -> Engine:
    """An engine for the SQLite file at ``path`` with the store's pragmas and explicit BEGINs."""
    engine = create_engine(
        f"sqlite:///{path}",
        connect_args={"timeout": BUSY_TIMEOUT_SECONDS},
    )
    event.listen(engine, "connect", _configure_connection)
    event.listen(engine, "begin", _begin)
    return engine


def _configure_connection(dbapi_connection: sqlite3.Connection, _record: object) -> None:
    dbapi_connection.isolation_level = None
    cursor = dbapi_connection.cursor()
    cursor.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_SECONDS * 1000}")
    cursor.execute("PRAGMA journal_mode = WAL")
    cursor.execute("PRAGMA synchronous = NORMAL")
    cursor.execute("PRAGMA foreign_keys = ON")
    cursor.close()


def _begin(connection: Connection) -> None:
    mode = connection.get_execution_options().get(_BEGIN_OPTION, "DEFERRED")
    connection.exec_driver_sql(f"BEGIN {mode}")


@contextmanager
def reading(engine: Engine) -> Iterator[Connection]:
    """A connection inside a deferred (read) transaction, rolled back on exit."""
    with engine.connect() as connection, connection.begin():
        yield connection


@contextmanager
def writing(engine: Engine) -> Iterator[Connection]:
    """A connection inside ``BEGIN IMMEDIATE``, committed on success and rolled back on error."""
    with engine.connect() as connection:
        connection.execution_options(**{_BEGIN_OPTION: "IMMEDIATE"})
        with connection.begin():
            yield connection


def driver(connection: Connection) -> sqlite3.Connection:
    """The raw sqlite3 connection under ``connection``, sharing its open transaction."""
    return connection.connection.driver_connection


def bump_event_mark(connection: Connection) -> int:
    """Increase the store's event mark by one inside the current transaction; the new mark."""
    return connection.execute(
        text("UPDATE store_info SET event_mark = event_mark + 1 WHERE id = 1 RETURNING event_mark")
    ).scalar_one()
