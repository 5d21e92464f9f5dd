"""`labelq session`: label at the prompt, one candidate at a time. Works with stdin as a pipe."""

from __future__ import annotations

import sys

from rich.console import Console
from rich.markup import escape

from labelq.cli import render
from labelq.errors import LabelqError
from labelq.loop import actions, reports

HELP = "a class name or number, s skip, u undo, ? details, q quit"


def _card(con: Console, queue, classes) -> None:
    """The candidate on offer: key, metadata, prediction, probabilities, score and why."""
    row = queue.rows[0]
    con.rule(f"[bold]{escape(row.key)}[/bold]  (rank {row.rank})")
    if row.meta:
        con.print("  ".join(f"{k}: {v}" for k, v in row.meta.items()), markup=False)
    if queue.cold_start:
        con.print("classes: " + "  ".join(f"{i + 1}) {c}" for i, c in enumerate(classes))
                  + "    (no prediction yet: cold start)", markup=False)
    else:
        probs = "  ".join(f"{i + 1}) {c} {render.fmt_p(p)}" for i, (c, p)
                          in enumerate(zip(classes, row.probabilities)))
        con.print(f"predicted {classes[int(row.predicted)]}    {probs}", markup=False)
    why = row.reason or f"ranked by {queue.strategy}"
    score = "" if queue.cold_start else f" ({queue.strategy} score {row.score:.3f})"
    con.print(f"why: {why}{score}", markup=False)


def _answer(con: Console) -> str:
    """One answer from the prompt; 'q' at end of input."""
    con.print(f"[bold]class?[/bold] ({HELP}) ", end="")
    line = sys.stdin.readline()
    if not line:
        con.print()
        return "q"
    return line.strip()


def _as_class(answer: str, classes) -> str | None:
    if answer in classes:
        return answer
    if answer.isdigit() and 1 <= int(answer) <= len(classes):
        return classes[int(answer) - 1]
    return None


def run_session(store, by: str, strategy=None, con: Console | None = None) -> dict:
    """The interactive loop; returns the summary it prints at the end. ``con`` receives the
    cards, prompts and closing line (default stdout; `session --json` passes stderr so that
    stdout carries only the JSON summary)."""
    con = con or render.console()
    classes = store.classes
    session_id = store.start_session(by)
    first = reports.latest_mean_entropy(store)
    tally = {"labels": 0, "skips": 0, "undos": 0}
    try:
        while True:
            queue = actions.next_queue(store, 1, strategy, holder=by, session_id=session_id)
            if not queue.rows:
                con.print("Every candidate is labelled.")
                break
            row = queue.rows[0]
            _card(con, queue, classes)
            answer = _answer(con)
            if answer == "q":
                break
            try:
                if answer == "s":
                    actions.skip(store, row.key, by, strategy, session_id=session_id)
                    tally["skips"] += 1
                elif answer == "u":
                    step = actions.undo(store, by, strategy, session_id=session_id)
                    tally["undos"] += 1
                    con.print(f"took back the {step.event.kind} on {step.event.key}",
                              markup=False)
                elif answer == "?":
                    view = reports.candidate_view(store, row.key)
                    con.print(render.key_value_table(
                        [(k, render.fmt_value(v)) for k, v in view["features"].items()]))
                    if view["nearest"]:
                        con.print(render.nearest_table(view["nearest"]))
                elif (cls := _as_class(answer, classes)) is not None:
                    actions.label(store, row.key, cls, by, strategy=strategy,
                                  session_id=session_id)
                    tally["labels"] += 1
                    con.print(f"labelled {row.key} as {cls}", markup=False)
                else:
                    con.print(f"not understood: {answer!r}; type {HELP}", markup=False)
            except LabelqError as exc:
                con.print(f"[bold]note:[/bold] {escape(str(exc))}")
    finally:
        store.end_session(session_id)
    last = reports.latest_mean_entropy(store)
    summary = dict(tally, mean_entropy_before=first, mean_entropy_after=last)
    change = ("" if first is None or last is None else
              f"; mean entropy of the pool {first:.3f} -> {last:.3f} bits")
    con.print(f"Session over: {tally['labels']} labels, {tally['skips']} skips, "
              f"{tally['undos']} undos{change}.")
    return summary
