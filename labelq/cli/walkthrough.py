"""`labelq demo`: build the orchard store, label a handful from the hidden grades, show the result."""

from __future__ import annotations

import csv
import io
from pathlib import Path

from rich.console import Console

from labelq.cli import render
from labelq.demo import GRADES, write_demo_files
from labelq.errors import LabelqError
from labelq.loop import actions, reports

DEMO_LABELS = 8
"""Labels the demo gives from the hidden grades before handing over."""


class DemoExistsError(LabelqError):
    """The demo folder already holds a demo store."""


class DemoFolderError(LabelqError):
    """The demo folder cannot be created or written."""


def _truth(path: Path) -> dict[str, str]:
    with open(path, newline="", encoding="utf-8") as fh:
        return {row["key"]: row["grade"] for row in csv.DictReader(fh)}


def run_demo(directory: Path, quiet: bool = False) -> dict:
    """Write the invented orchard files into ``directory``, build a store and walk a short
    sitting; print it (unless ``quiet``) and return it as a JSON-ready dict."""
    directory = Path(directory)
    db = directory / "orchard.db"
    if db.exists():
        raise DemoExistsError(f"{db} already exists; pick an empty folder with --dir")
    try:
        directory.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise DemoFolderError(f"cannot use {directory} for the demo: {exc.strerror or exc}") from None
    con = Console(file=io.StringIO()) if quiet else render.console()
    labelled = []
    candidates_csv, truth_csv = write_demo_files(directory)
    con.print(f"Wrote {candidates_csv} (invented sorting-line readings) and {truth_csv} "
              "(their hidden grades, used here to answer for the grader).")
    with actions.create_store(db, list(GRADES)) as store:
        with render.progress_bar("importing") as update:
            result = actions.import_candidates(
                store, candidates_csv, "key",
                progress=lambda rows, done, total: update(done, total))
        con.print(f"Imported {result.candidates:,} apples with features "
                  f"{', '.join(result.features)}.")
        truth = _truth(truth_csv)
        for _ in range(DEMO_LABELS):
            queue = actions.next_queue(store, 1, holder="demo")
            row = queue.rows[0]
            grade = truth[row.key]
            actions.label(store, row.key, grade, "demo", note="demo: hidden grade")
            guess = GRADES[int(row.predicted)]
            how = "cold start" if queue.cold_start else f"model said {guess} (p {render.fmt_p(row.p_top)})"
            con.print(f"  labelled {row.key} as {grade:<6}  ({how})", markup=False)
            labelled.append({"key": row.key, "class": grade, "cold_start": queue.cold_start,
                             "predicted": None if queue.cold_start else guess,
                             "reason": row.reason})
        con.print()
        queue = actions.next_queue(store, 5)
        con.print(render.queue_heading(queue))
        con.print(render.queue_table(queue, store.classes, actions.meta_columns(queue.rows)))
        con.print()
        status = reports.status(store)
        render.print_status(con, status)
        doc = {"dir": str(directory), "candidates_csv": str(candidates_csv),
               "truth_csv": str(truth_csv), "db": str(db), "labelled": labelled,
               "queue": render.queue_rows_json(queue, store.classes), "status": status}
    con.print()
    con.print(f"Carry on by hand:  labelq session --db {db}")
    con.print(f"Or label one:      labelq label KEY CLASS --db {db}")
    return doc
