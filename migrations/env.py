"""Alembic environment of the labelq store.

Two ways in:

- ``labelq.store.migrate`` (every ``Store.open``) hands over an open connection in
  ``config.attributes["connection"]``; the revisions run inside the caller's transaction.
- The ``alembic`` command run from a checkout reads the root ``alembic.ini``; the store is then
  named as labelq's ``--db`` names it: ``-x db=PATH``, else ``$LABELQ_DB``, else ``sqlalchemy.url``
  from the ini (``sqlite:///labelq.db``). A value without ``://`` is a file path.

``render_as_batch=True`` because SQLite alters most columns only by copying the table.
"""

import os
from logging.config import fileConfig

from alembic import context

from labelq.store.engine import make_engine, writing
from labelq.store.models import Base

_SQLITE_PREFIX = "sqlite:///"


def _configure(**options) -> None:
    context.configure(
        target_metadata=Base.metadata,
        render_as_batch=True,
        transactional_ddl=True,
        **options,
    )
    with context.begin_transaction():
        context.run_migrations()


def _database_url() -> str:
    """The store named by ``-x db=``, ``$LABELQ_DB`` or ``sqlalchemy.url``, as a SQLite URL."""
    value = (
        context.get_x_argument(as_dictionary=True).get("db")
        or os.environ.get("LABELQ_DB")
        or context.config.get_main_option("sqlalchemy.url")
    )
    if not value:
        raise SystemExit("no store given: pass -x db=PATH, set LABELQ_DB or sqlalchemy.url")
    if "://" not in value:
        return _SQLITE_PREFIX + value
    if not value.startswith(_SQLITE_PREFIX):
        raise SystemExit(f"labelq stores are SQLite files; cannot migrate {value}")
    return value


def _run_with_url(url: str) -> None:
    engine = make_engine(url.removeprefix(_SQLITE_PREFIX))
    try:
        with writing(engine) as connection:
            _configure(connection=connection)
    finally:
        engine.dispose()


_connection = context.config.attributes.get("connection")
if _connection is not None:
    _configure(connection=_connection)
else:
    if context.config.config_file_name is not None:
        fileConfig(context.config.config_file_name, disable_existing_loggers=False)
    if context.is_offline_mode():
        _configure(url=_database_url(), literal_binds=True)
    else:
        _run_with_url(_database_url())
