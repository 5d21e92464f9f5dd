"""Alembic environment: runs the revisions on the connection handed over by ``labelq.store.migrate``.

Developers creating a revision without a store connection may set ``sqlalchemy.url`` on the config.
"""

from alembic import context

from labelq.store.engine import make_engine, writing
from labelq.store.models import Base


def _run(connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=Base.metadata,
        render_as_batch=True,
        transactional_ddl=True,
    )
    with context.begin_transaction():
        context.run_migrations()


def _run_with_url(url: str) -> None:
    engine = make_engine(url.removeprefix("sqlite:///"))
    try:
        with writing(engine) as connection:
            _run(connection)
    finally:
        engine.dispose()


_connection = context.config.attributes.get("connection")
if _connection is not None:
    _run(_connection)
else:
    _run_with_url(context.config.get_main_option("sqlalchemy.url"))
