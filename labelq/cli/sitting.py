"""`labelq session`: label at the prompt, one candidate at a time. Works with stdin as a pipe."""

from __future__ import annotations

import sys

from rich.console import Console
from rich.markup import escape

from labelq.cli import render
from labelq.errors import LabelqError
from labelq.loop import actions, reports
from labelq.store.classes import resolve_class
from labelq.store.errors import UnknownClassError

HELP = "a class name or number, s skip, u undo, ? details, q quit"


def _card(con: Console, queue, classes) -> None:
    """The candidate on offer: key, metadata, prediction, probabilities, score and why."""
    row = queue.rows[0]
    audit = getattr(row, "audit", False)
    con.rule(f"[bold]{escape(row.key)}[/bold]  ({'audit item' if audit else f'rank {row.rank}'})")
    if row.meta:
        con.print("  ".join(f"{k}: {v}" for k, v in row.meta.items()), markup=False)
    if audit:  # the prediction under test is not shown, so it cannot lead the labeller
        con.print("classes: " + "  ".join(f"{i + 1}) {c}" for i, c in enumerate(classes))
                  + "    (audit: drawn at random; the model's prediction is hidden)",
                  markup=False)
        return
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
    """The class an answer names (exact name, any case, or number: resolve_class), else None."""
    try:
        return resolve_class(answer, classes)
    except UnknownClassError:
        return None


def _why_not(answer: str, classes) -> str:
    """The class resolver's own words for an answer that names no class (with "did you mean"
    when a class is close), else the answer itself."""
    try:
        resolve_class(answer, classes)
    except UnknownClassError as error:
        return str(error)
    return repr(answer)


def run_session(store, by: str, strategy=None, con: Console | None = None) -> dict:
    """The interactive loop; returns the summary it prints at the end. ``con`` receives the
    cards, prompts and closing line (default stdout; `session --json` passes stderr so that
    stdout carries only the JSON summary)."""
    con = con or render.console()
    classes = store.classes
    session_id = store.start_session(by)
    first = before = reports.latest_mean_entropy(store)
    tally = {"labels": 0, "skips": 0, "undos": 0, "labels_undone": 0, "skips_undone": 0}
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
                    if step.event.kind == "label":
                        tally["labels_undone"] += 1
                    else:
                        tally["skips_undone"] += 1
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
                    now = reports.latest_mean_entropy(store)
                    con.print(f"labelled {row.key} as {cls}; "
                              f"{_count(tally['labels'] - tally['labels_undone'], 'label')} "
                              f"this sitting{_entropy_change(before, now)}", markup=False)
                    before = now
                else:
                    con.print(f"not understood: {_why_not(answer, classes)}; type {HELP}",
                              markup=False)
            except LabelqError as exc:
                con.print(f"[bold]note:[/bold] {escape(str(exc))}")
    finally:
        store.end_session(session_id)
    last = reports.latest_mean_entropy(store)
    net_labels = tally["labels"] - tally["labels_undone"]
    net_skips = tally["skips"] - tally["skips_undone"]
    summary = dict(tally, net_labels=net_labels, net_skips=net_skips,
                   mean_entropy_before=first, mean_entropy_after=last)
    change = ("" if first is None or last is None else
              f"; mean entropy of the pool {first:.3f} -> {last:.3f} bits")
    undone = f" ({tally['undos']} undone)" if tally["undos"] else ""
    con.print(f"Session over: {_count(net_labels, 'label')} and {_count(net_skips, 'skip')} "
              f"kept{undone}{change}.", markup=False)
    return summary


def _count(n: int, word: str) -> str:
    """'1 label', '3 labels'."""
    return f"{n} {word}" if n == 1 else f"{n} {word}s"


def _entropy_change(before, now) -> str:
    """'; pool uncertainty fell (1.552 -> 1.548 bits)' or rose, or nothing without figures."""
    if before is None or now is None:
        return ""
    way = "fell" if now < before else "rose" if now > before else "held"
    return f"; pool uncertainty {way} ({before:.3f} -> {now:.3f} bits mean entropy)"
