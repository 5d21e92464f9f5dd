"""Where a store lives: an SQLite file (a path) or a PostgreSQL database (a SQLAlchemy URL).

Any value holding ``://`` is a URL: ``sqlite:///PATH`` names a file store like PATH itself, and
``postgresql+psycopg://user@host/dbname`` (``postgresql://`` and ``postgres://`` are read as
the same) a server store. A file store is a :class:`pathlib.Path`, a server store a SQLAlchemy
``URL``, whose ``str()`` and ``repr()`` hide the password, so every message that shows a store
shows it without one. A password given as ``?password=`` is moved into the URL's password field
for the same reason. This module imports SQLAlchemy only when it reads a URL: the quick read path
of `labelq next` on a file store needs none of it.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING, Union

from labelq.store.errors import UnsupportedStoreError

if TYPE_CHECKING:
    from sqlalchemy.engine import URL

SERVER_DRIVER = "postgresql+psycopg"
_SQLITE_PREFIX = "sqlite:///"
_POSTGRESQL_NAMES = ("postgresql", "postgres", SERVER_DRIVER)


def is_url(value: object) -> bool:
    """True for a URL (any string holding ``://``, or a SQLAlchemy URL), False for a path."""
    return "://" in value if isinstance(value, str) else not isinstance(value, (os.PathLike, bytes))


def store_location(value: Union[str, os.PathLike[str], "URL"]) -> Union[Path, "URL"]:
    """The store ``value`` names: a Path for an SQLite file, a URL for a PostgreSQL database.

    UnsupportedStoreError for a URL of any other database.
    """
    if not is_url(value):
        return Path(value)
    if isinstance(value, str) and value.startswith(_SQLITE_PREFIX):
        return Path(value.removeprefix(_SQLITE_PREFIX).split("?", 1)[0])
    from sqlalchemy.engine import make_url
    from sqlalchemy.exc import ArgumentError

    try:
        url = make_url(value)
    except ArgumentError:
        raise UnsupportedStoreError(f"{_shown(value)} is not a database URL such as "
                                    f"{SERVER_DRIVER}://user@host/dbname") from None
    if url.drivername not in _POSTGRESQL_NAMES:
        raise UnsupportedStoreError(
            f"labelq stores are SQLite files or PostgreSQL databases ({SERVER_DRIVER}://"
            f"user@host/dbname), not {url.drivername} databases: {url}")
    url = url.set(drivername=SERVER_DRIVER)
    if "password" in url.query:
        url = url.set(password=url.query["password"]).difference_update_query(["password"])
    if not url.database:
        raise UnsupportedStoreError(f"{url} names no database: end the URL with /dbname")
    return url


def _shown(value: object) -> str:
    """A value that is not a URL, shown without what could be a password (user:secret@...)."""
    text = str(value)
    scheme, _, rest = text.partition("://")
    return f"{scheme}://...@{rest.rsplit('@', 1)[1]}" if "@" in rest else text
