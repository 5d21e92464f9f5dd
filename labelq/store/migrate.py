"""Alembic configured in code: the revisions ship inside the package; labelq reads no alembic.ini.

The revisions live in the top-level folder ``migrations/`` of the source tree, which the build maps
to the import package ``labelq.migrations`` (see pyproject.toml), so they are found the same way
from a checkout, an editable install and a wheel. The root ``alembic.ini`` is for running them by
hand from a checkout; labelq never reads it.

``Store.open`` calls :func:`upgrade` so older stores are brought to the head revision in place.
"""

from functools import lru_cache
from pathlib import Path

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Connection

import labelq.migrations

SCRIPT_LOCATION = Path(labelq.migrations.__file__).parent


def alembic_config(connection: Connection | None = None) -> Config:
    """An Alembic config pointing at the packaged revisions; ``connection`` is used by env.py."""
    config = Config()
    config.set_main_option("script_location", str(SCRIPT_LOCATION))
    if connection is not None:
        config.attributes["connection"] = connection
    return config


@lru_cache(maxsize=1)
def _scripts() -> ScriptDirectory:
    return ScriptDirectory.from_config(alembic_config())


def head_revision() -> str:
    """The single head revision this version of labelq writes."""
    return _scripts().get_current_head()


def known_revisions() -> frozenset[str]:
    """Every revision id this version of labelq knows."""
    return frozenset(script.revision for script in _scripts().walk_revisions())


def current_revision(connection: Connection) -> str | None:
    """The revision stamped in the database, or None if it was never stamped."""
    return MigrationContext.configure(connection).get_current_revision()


def upgrade(connection: Connection, revision: str = "head") -> None:
    """Apply the revisions up to ``revision`` inside the caller's open transaction."""
    command.upgrade(alembic_config(connection), revision)
