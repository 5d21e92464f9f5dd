"""Alembic environment of the labelq store.

Two ways in:

- ``labelq.store.migrate`` (every ``Store.open``) hands over an open connection in
  ``config.attributes["connection"]``; the revisions run inside the caller's transaction.
- The ``alembic`` command run from a checkout reads the root ``alembic.ini``; the store is then
  named as labelq's ``--db`` names it: ``-x db=PATH`` or ``-x db=URL``, else ``$LABELQ_DB``, else
  ``sqlalchemy.url`` from the ini (``sqlite:///labelq.db``). A value without ``://`` is a file
  path; a URL may name a PostgreSQL database (``postgresql+psycopg://user@host/dbname``).

``render_as_batch=True`` because SQLite alters most columns only by copying the table; on
PostgreSQL the same batch operations are plain ALTER TABLE statements.
"""

import os
from logging.config import fileConfig

from alembic import context

from labelq.store.engine import make_engine, writing
from labelq.store.models import Base


def _configure(**options) -> None:
    context.configure(
        target_metadata=Base.metadata,
        render_as_batch=True,
        transactional_ddl=True,
        **options,
    )
    with context.begin_transaction():
        context.run_migrations()


def _store() -> str:
    """The store named by ``-x db=``, ``$LABELQ_DB`` or ``sqlalchemy.url``: a path or a URL."""
    value = (
        context.get_x_argument(as_dictionary=True).get("db")
        or os.environ.get("LABELQ_DB")
        or context.config.get_main_option("sqlalchemy.url")
    )
    if not value:
        raise SystemExit("no store given: pass -x db=PATH, set LABELQ_DB or sqlalchemy.url")
    return value


def _run_on(store: str) -> None:
    engine = make_engine(store)
    try:
        # no store_info lock: the database may hold no store yet; DDL takes its own table locks
        with writing(engine, lock=None) as connection:
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
        _configure(url=make_engine(_store()).url, literal_binds=True)
    else:
        _run_on(_store())
