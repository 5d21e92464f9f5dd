"""The labelq store: one SQLite file, or one PostgreSQL database, holding the pool, the labels and
the derived model state."""

import os
import sqlite3
from collections.abc import Sequence
from contextlib import closing
from pathlib import Path
from types import TracebackType
from typing import TYPE_CHECKING, Optional, Union

from sqlalchemy import Connection, inspect, text

from labelq.store.audits import AuditsMixin
from labelq.store.check import CheckMixin
from labelq.store.disputes import DisputesMixin
from labelq.store.claims import ClaimsMixin
from labelq.store.core import class_names
from labelq.store.engine import make_engine, reading, writing
from labelq.store.errors import (
    InvalidClassesError,
    MissingDirectoryError,
    MissingStoreError,
    NewerStoreError,
    NotAStoreError,
    StoreExistsError,
)
from labelq.store.events import EventsMixin
from labelq.store.fits import FitsMixin
from labelq.store.history import ItemHistoryMixin
from labelq.store.location import store_location
from labelq.store.migrate import current_revision, head_revision, known_revisions, upgrade
from labelq.store.models import APPLICATION, Base
from labelq.store.pool import PoolMixin
from labelq.store.sessions import SessionsMixin

if TYPE_CHECKING:
    from sqlalchemy.engine import URL

_SQLITE_HEADER = b"SQLite format 3\x00"
Location = Union[str, os.PathLike[str], "URL"]
"""A store file's path, or a URL (``postgresql+psycopg://user@host/dbname``, ``sqlite:///PATH``)."""


class Store(PoolMixin, EventsMixin, ItemHistoryMixin, SessionsMixin, FitsMixin, ClaimsMixin, AuditsMixin,
            DisputesMixin, CheckMixin):
    """A labelq store; use :meth:`create` or :meth:`open`, and close it (or use ``with``)."""

    @classmethod
    def create(cls, location: Location, classes: Sequence[str]) -> "Store":
        """Create a store at ``location`` with ``classes`` (at least two distinct non-empty names).

        A path makes a new SQLite file; a PostgreSQL URL makes the store's tables in that
        database, which must exist and hold no labelq store (nor tables of the same names).
        """
        location = store_location(location)
        names = _validate_classes(classes)
        if isinstance(location, Path):
            return cls._create_file(location, names)
        engine = make_engine(location)
        try:
            with writing(engine, lock=None) as connection:
                _refuse_taken_database(connection, location)
                _make_schema(connection, names)
        except BaseException:
            engine.dispose()
            raise
        return cls(location, engine)

    @classmethod
    def _create_file(cls, path: Path, names: list[str]) -> "Store":
        if not path.parent.is_dir():
            raise MissingDirectoryError(
                f"cannot create a store at {path}: directory {path.parent} does not exist"
            )
        try:
            path.open("xb").close()
        except FileExistsError:
            raise StoreExistsError(f"a file already exists at {path}") from None
        engine = make_engine(path)
        try:
            with writing(engine) as connection:
                _make_schema(connection, names)
        except BaseException:
            engine.dispose()
            for leftover in (path, Path(f"{path}-wal"), Path(f"{path}-shm")):
                leftover.unlink(missing_ok=True)
            raise
        return cls(path, engine)

    @classmethod
    def open(cls, location: Location) -> "Store":
        """Open the store at ``location``, upgrading an older schema in place; newer ones are refused."""
        location = store_location(location)
        revision = _inspect(location) if isinstance(location, Path) else None
        engine = make_engine(location)
        try:
            if revision is None:
                with reading(engine) as connection:
                    revision = _inspect_database(connection, location)
            if revision != head_revision():
                with writing(engine) as connection:
                    if current_revision(connection) != head_revision():
                        upgrade(connection)
        except BaseException:
            engine.dispose()
            raise
        return cls(location, engine)

    def close(self) -> None:
        """Release the store's connections."""
        self._engine.dispose()

    def __enter__(self) -> "Store":
        return self

    def __exit__(
        self,
        exc_type: Optional[type[BaseException]],
        exc: Optional[BaseException],
        traceback: Optional[TracebackType],
    ) -> None:
        self.close()

    @property
    def classes(self) -> list[str]:
        """Class names in position order."""
        with self._read() as connection:
            return class_names(connection)


def _validate_classes(classes: Sequence[str]) -> list[str]:
    names = list(classes)
    if (
        len(names) < 2
        or len(set(names)) != len(names)
        or not all(isinstance(name, str) and name.strip() for name in names)
    ):
        raise InvalidClassesError(f"classes must be at least two distinct non-empty names, got {names}")
    return names


def _make_schema(connection: Connection, names: list[str]) -> None:
    """The tables at the head revision, and the classes in order."""
    upgrade(connection)
    connection.execute(
        text("INSERT INTO classes (name, position) VALUES (:name, :position)"),
        [{"name": name, "position": position} for position, name in enumerate(names)],
    )


def _refuse_taken_database(connection: Connection, url: "URL") -> None:
    """StoreExistsError when the database holds a labelq store or a table a store would make."""
    tables = set(inspect(connection).get_table_names())
    if "store_info" in tables:
        raise StoreExistsError(f"a labelq store already exists in {url}")
    taken = sorted(tables & {*Base.metadata.tables, "alembic_version"})
    if taken:
        raise StoreExistsError(f"{url} already has tables named {', '.join(taken)}; "
                               "a labelq store needs a database without them")


def _inspect_database(connection: Connection, url: "URL") -> str:
    """The schema revision of the labelq store in the database at ``url``.

    Raises MissingStoreError (no tables at all), NotAStoreError or NewerStoreError.
    """
    tables = set(inspect(connection).get_table_names())
    if not tables:
        raise MissingStoreError(f"no labelq store in {url} (run `labelq init --db URL` first)")
    if not {"store_info", "alembic_version"} <= tables:
        raise NotAStoreError(f"{url} is a database without the labelq marker")
    application = connection.execute(text("SELECT application FROM store_info WHERE id = 1")).scalar()
    revision = connection.execute(text("SELECT version_num FROM alembic_version")).scalar()
    if application != APPLICATION or revision is None:
        raise NotAStoreError(f"{url} is a database without the labelq marker")
    if revision not in known_revisions():
        raise NewerStoreError(
            f"{url} has schema revision {revision}, unknown to this labelq (written by a newer version?)"
        )
    return revision


def _inspect(path: Path) -> str:
    """The schema revision of the store at ``path``, read without changing the file.

    Raises MissingStoreError, NotAStoreError or NewerStoreError.
    """
    if not path.exists():
        raise MissingStoreError(f"no labelq store at {path} (run `labelq init` first)")
    if path.is_dir():
        raise NotAStoreError(f"{path} is a directory, not a labelq store")
    with path.open("rb") as file:
        if file.read(len(_SQLITE_HEADER)) != _SQLITE_HEADER:
            raise NotAStoreError(f"{path} is not an SQLite database, so not a labelq store")
    try:
        with closing(sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)) as connection:
            application = connection.execute("SELECT application FROM store_info WHERE id = 1").fetchone()
            revision = connection.execute("SELECT version_num FROM alembic_version").fetchone()
    except sqlite3.DatabaseError:
        raise NotAStoreError(f"{path} is an SQLite database without the labelq marker") from None
    if application != (APPLICATION,) or revision is None:
        raise NotAStoreError(f"{path} is an SQLite database without the labelq marker")
    if revision[0] not in known_revisions():
        raise NewerStoreError(
            f"{path} has schema revision {revision[0]}, unknown to this labelq (written by a newer version?)"
        )
    return revision[0]
