"""Tables and lines for reviewing labels: the `labels` list and, for `show`, the current label and
the candidate's label history. No store or model work happens here (see labelq.cli.render)."""

from __future__ import annotations

from typing import Optional

from rich.markup import escape
from rich.table import Table

from labelq.cli.render import fmt_p


def labels_heading(view, disagree: bool, by: Optional[str], shown: int) -> str:
    """One line above the `labels` table: what is listed, in which order, what p model is."""
    kept = "".join([f" of class {view['class']}" if view["class"] is not None else "",
                    f" by {by}" if by is not None else ""])
    count = f"{view['matched']:,} label{'' if view['matched'] == 1 else 's'}{kept}"
    part = f" (the first {shown:,} shown)" if shown < view["matched"] else ""
    if disagree:
        return (f"The labels fit {view['fit']} disagrees with most, for review: {count}{part}, "
                f"least likely first by p model, the fit's probability of the labelled class.")
    return (f"{count}{part}, newest first; p model: fit {view['fit']}'s probability of the "
            f"labelled class.")


def labels_table(rows) -> Table:
    """The labels as an aligned table: key, class, by, at (UTC as stored), p model, note."""
    table = Table(show_edge=False, pad_edge=False, header_style="bold")
    table.add_column("key", overflow="fold")
    table.add_column("class", overflow="fold")
    table.add_column("by", overflow="fold")
    table.add_column("at (UTC)", no_wrap=True)
    table.add_column("p model", justify="right", no_wrap=True)
    table.add_column("note", overflow="fold", min_width=8)
    for r in rows:
        table.add_row(escape(r["key"]), escape(r["class"]), escape(r["by"]), r["at"],
                      fmt_p(r["p_model"]), escape(r["note"] or ""))
    return table


def labeller_line(per_labeller: dict) -> str:
    """'Labels per labeller: ana 5, ben 3' (of the labels the filters kept)."""
    return "Labels per labeller: " + ", ".join(f"{who} {n:,}" for who, n in per_labeller.items())


def current_label_line(view) -> Optional[str]:
    """'Labelled juice by ana at 2026-12-01T22:03:10Z (UTC); note: soft' for `show`, None when
    the candidate has no label."""
    if view["label"] is None:
        return None
    note = f"; note: {view['note']}" if view["note"] else ""
    return f"Labelled {view['label']} by {view['by']} at {view['at']} (UTC){note}"


def history_table(history) -> Table:
    """A candidate's label and skip events, oldest first, for `show`."""
    table = Table(show_edge=False, pad_edge=False, header_style="bold",
                  title="label history", title_justify="left")
    table.add_column("event", no_wrap=True)
    table.add_column("class", overflow="fold")
    table.add_column("by", overflow="fold")
    table.add_column("at (UTC)", no_wrap=True)
    table.add_column("note", overflow="fold", min_width=8)
    for e in history:
        table.add_row(e["kind"], escape(e["class"] or ""), escape(e["by"]), e["at"],
                      escape(e["note"] or ""))
    return table
