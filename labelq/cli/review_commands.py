"""`labelq labels`: review the current labels. The command is added to the app by :func:`register`
(called at the end of labelq.cli.app), so this module never imports the app."""

from __future__ import annotations

from typing import Annotated, Optional

import typer

from labelq.cli import label_tables, render
from labelq.cli.options import DbOption, JsonOption, open_store, user_errors
from labelq.lazy import LazyModule

label_review = LazyModule("labelq.loop.label_review")


def register(app: typer.Typer) -> None:
    """Add the review commands to ``app``."""
    app.command("labels")(labels)
    app.command("disputes")(disputes)


@user_errors
def labels(
    class_: Annotated[Optional[str], typer.Option(
        "--class", metavar="CLASS", help="Only labels of this class (its name, any case, or its "
        "number in the order given to init).", show_default=False)] = None,
    by: Annotated[Optional[str], typer.Option(
        "--by", metavar="NAME", help="Only labels given by this labeller.",
        show_default=False)] = None,
    disagree: Annotated[bool, typer.Option(
        "--disagree", help="Order by the current model's probability of the labelled class, "
        "least likely first: the labels the model disagrees with most, for review.")] = False,
    n: Annotated[Optional[int], typer.Option(
        "-n", help="Show at most this many labels (default: all).", min=1,
        show_default=False)] = None,
    db: DbOption = None,
    json: JsonOption = False,
):
    """List the current labels (newest first): key, class, who gave it and when, the note, and
    p model, the current fit's probability of the labelled class."""
    with open_store(db) as store, render.progress_bar("refitting") as update:
        view = label_review.label_list(store, class_, by, disagree, n,
                                       progress=lambda stage, d, t: update(d, t, stage))
    if json:
        render.print_json(view["rows"])
        return
    con = render.console()
    if not view["rows"]:
        con.print("No labels yet." if class_ is None and by is None else
                  "No labels match the filters.")
        return
    con.print(label_tables.labels_heading(view, disagree, by, len(view["rows"])), markup=False)
    con.print(label_tables.labels_table(view["rows"]))
    con.print(label_tables.labeller_line(view["per_labeller"]), style="dim", markup=False)


@user_errors
def disputes(db: DbOption = None, json: JsonOption = False):
    """Candidates two labellers gave different classes; out of training until settled."""
    with open_store(db) as store:
        rows = store.disputes()
    if json:
        render.print_json(rows)
        return
    con = render.console()
    if not rows:
        con.print("No open disputes.")
        return
    from rich.table import Table

    table = Table(show_edge=False, pad_edge=False, header_style="bold")
    for name in ("key", "first", "second", "opened (UTC)"):
        table.add_column(name, overflow="fold")
    for r in rows:
        table.add_row(r["key"], f"{r['first']['class']} ({r['first']['by']})",
                      f"{r['second']['class']} ({r['second']['by']})", r["opened_at"])
    con.print(f"{len(rows)} disputed {'candidate' if len(rows) == 1 else 'candidates'}, left "
              "out of training until settled with `labelq label KEY CLASS --resolve`:",
              markup=False)
    con.print(table)

