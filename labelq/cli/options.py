"""Options shared by every command, and the edge where named errors become one-line messages."""

from __future__ import annotations

import functools
import os
from pathlib import Path
from typing import Annotated, Optional

import typer

from labelq.errors import LabelqError
from labelq.store import Store

DbOption = Annotated[Optional[Path], typer.Option(
    "--db", help="The store file (default: $LABELQ_DB, else ./labelq.db).", show_default=False)]
JsonOption = Annotated[bool, typer.Option("--json", help="Print one JSON document instead of tables.")]
ByOption = Annotated[Optional[str], typer.Option(
    "--by", help="Who is labelling (default: $LABELQ_BY, else your login name).",
    show_default=False)]
StrategyOption = Annotated[Optional[str], typer.Option(
    "--strategy", "-s", help="entropy, margin, bald or random (default: the store's last, else margin).",
    show_default=False)]

EXIT_USER_ERROR = 2


def db_path(db: Optional[Path]) -> Path:
    """The store path from --db, $LABELQ_DB or ./labelq.db."""
    if db is not None:
        return db
    env = os.environ.get("LABELQ_DB")
    return Path(env) if env else Path("labelq.db")


def open_store(db: Optional[Path]) -> Store:
    """Open the store named by --db (upgrading it in place when it is older)."""
    return Store.open(db_path(db))


def fail(message: str) -> None:
    """Print one line on stderr and stop with the user-error exit code."""
    typer.echo(f"labelq: {message}", err=True)
    raise typer.Exit(EXIT_USER_ERROR)


def user_errors(command):
    """Turn named errors (LabelqError, ValueError from argument checks, OSError on a file the user
    named) into one line on stderr and exit code 2."""

    @functools.wraps(command)
    def wrapper(*args, **kwargs):
        try:
            return command(*args, **kwargs)
        except (LabelqError, ValueError) as exc:
            fail(str(exc).splitlines()[0] if str(exc) else type(exc).__name__)
        except OSError as exc:  # a file the user named cannot be read or written
            fail(f"{exc.filename or ''}: {exc.strerror or exc}".lstrip(": "))
    return wrapper
