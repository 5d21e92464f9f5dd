"""Options shared by every command, and the edge where named errors become one-line messages."""

from __future__ import annotations

import functools
import os
from enum import Enum
from typing import Annotated, Optional

import typer
from typer.core import TyperGroup
from typer.exceptions import TyperException

from labelq.acquire.names import STRATEGIES
from labelq.errors import LabelqError

Strategy = Enum("Strategy", {name: name for name in STRATEGIES}, type=str)
"""The acquisition strategies as a Typer choice."""


class ExportKind(str, Enum):
    """What `export` writes."""

    labels = "labels"
    predictions = "predictions"
    model = "model"


DbOption = Annotated[Optional[str], typer.Option(
    "--db", metavar="PATH|URL", help="The store: a file, or a PostgreSQL database as "
    "postgresql+psycopg://user@host/dbname (default: $LABELQ_DB, else ./labelq.db).",
    show_default=False)]
JsonOption = Annotated[bool, typer.Option("--json", help="Print one JSON document instead of tables.")]
ByOption = Annotated[Optional[str], typer.Option(
    "--by", help="Who is labelling (default: $LABELQ_BY, else your login name).",
    show_default=False)]
StrategyOption = Annotated[Optional[Strategy], typer.Option(
    "--strategy", "-s", help="How to rank the queue (default: the store's last strategy, else "
    "the policy's default).", show_default=False)]

EXIT_USER_ERROR = 2


def db_path(db: Optional[str]):
    """The store from --db, $LABELQ_DB or ./labelq.db: a Path for a file, a SQLAlchemy URL for a
    database on a server (see labelq.store.location; SQLAlchemy is imported only for a URL)."""
    from labelq.store.location import store_location

    return store_location(db or os.environ.get("LABELQ_DB") or "labelq.db")


def open_store(db: Optional[str]):
    """Open the store named by --db (upgrading it in place when it is older)."""
    from labelq.store import Store

    return Store.open(db_path(db))


def fail(message: str) -> None:
    """Print one line on stderr and stop with the user-error exit code."""
    typer.echo(f"labelq: {message}", err=True)
    raise typer.Exit(EXIT_USER_ERROR)


def strategy_name(strategy) -> Optional[str]:
    """The plain name of a --strategy choice (None when not given)."""
    return None if strategy is None else Strategy(strategy).value


def user_errors(command):
    """Turn named user errors (LabelqError) into one line on stderr and exit code 2. Anything
    else is a bug and shows as one (a traceback), never as a user error."""

    @functools.wraps(command)
    def wrapper(*args, **kwargs):
        try:
            return command(*args, **kwargs)
        except LabelqError as exc:
            fail(str(exc).splitlines()[0] if str(exc) else type(exc).__name__)
    return wrapper


class OneLineErrors(TyperGroup):
    """The command group: usage errors (an unknown option, a --strategy or export kind that is
    not a choice) are one line on stderr with exit code 2, like every other user error."""

    def main(self, *args, standalone_mode: bool = True, **kwargs):
        try:
            result = super().main(*args, standalone_mode=False, **kwargs)
        except TyperException as exc:  # usage errors (exit code 2) and other command-line errors
            if not standalone_mode:
                raise
            if type(exc).__name__ == "NoArgsIsHelpError":  # `labelq` alone: the help, exit 0
                typer.echo(exc.format_message())
                raise SystemExit(0) from None
            ctx = getattr(exc, "ctx", None)
            command = ctx.command_path if ctx is not None else "labelq"
            message = exc.format_message().replace("Value error, ", "")
            typer.echo(f"{command}: {message}", err=True)
            raise SystemExit(getattr(exc, "exit_code", EXIT_USER_ERROR)) from None
        except typer.Abort:
            if not standalone_mode:
                raise
            typer.echo("Aborted.", err=True)
            raise SystemExit(1) from None
        if standalone_mode:
            raise SystemExit(result if isinstance(result, int) else 0)
        return result
