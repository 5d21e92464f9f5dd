"""Alembic configured in code: the revisions ship inside the package; labelq reads no alembic.ini.

The revisions live in the top-level folder ``migrations/`` of the source tree, which the build maps
to the import package ``labelq.migrations`` (see pyproject.toml), so they are found the same way
from a checkout, an editable install and a wheel. The root ``alembic.ini`` is for running them by
hand from a checkout; labelq never reads it.

``Store.open`` calls :func:`upgrade` so older stores are brought to the head revision in place.
Opening a store that is already at the head never imports Alembic (a tenth of a second of every
command's start-up): the revision ids are read from the revision files' ``revision = "..."`` and
``down_revision = "..."`` lines (tested to agree with Alembic's own view) and the stamp with one
SQL query.
"""

import re
from functools import lru_cache
from pathlib import Path
from typing import TYPE_CHECKING

import labelq.migrations

if TYPE_CHECKING:
    from sqlalchemy import Connection

SCRIPT_LOCATION = Path(labelq.migrations.__file__).parent
_ASSIGNMENT = re.compile(r'^(revision|down_revision)\s*=\s*"([^"]+)"', re.M)


def alembic_config(connection: "Connection | None" = None):
    """An Alembic config pointing at the packaged revisions; ``connection`` is used by env.py."""
    from alembic.config import Config

    config = Config()
    config.set_main_option("script_location", str(SCRIPT_LOCATION))
    if connection is not None:
        config.attributes["connection"] = connection
    return config


@lru_cache(maxsize=1)
def _graph() -> dict:
    """revision id -> down_revision id (None for the first), from the revision files."""
    graph = {}
    for path in sorted((SCRIPT_LOCATION / "versions").glob("*.py")):
        found = dict(_ASSIGNMENT.findall(path.read_text(encoding="utf-8")))
        if "revision" in found:
            graph[found["revision"]] = found.get("down_revision")
    return graph


def head_revision() -> str:
    """The single head revision this version of labelq writes (the one no revision revises)."""
    graph = _graph()
    heads = sorted(set(graph) - set(graph.values()))
    if len(heads) != 1:
        raise RuntimeError(f"the packaged revisions must have one head, found {heads}")
    return heads[0]


def known_revisions() -> frozenset[str]:
    """Every revision id this version of labelq knows."""
    return frozenset(_graph())


def current_revision(connection: "Connection") -> str | None:
    """The revision stamped in the database, or None if it was never stamped."""
    # here, not at the top: `labelq --version` needs no SQLAlchemy
    from sqlalchemy import inspect, text

    if not inspect(connection).has_table("alembic_version"):
        return None
    return connection.execute(text("SELECT version_num FROM alembic_version")).scalar()


def upgrade(connection: "Connection", revision: str = "head") -> None:
    """Apply the revisions up to ``revision`` inside the caller's open transaction."""
    from alembic import command

    command.upgrade(alembic_config(connection), revision)
