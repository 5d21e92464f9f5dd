"""The `labelq` command line: each command parses, calls one library function, renders."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer
from rich.markup import escape

from labelq import __version__
from labelq.acquire.names import STRATEGIES
from labelq.cli import render, review_commands
from labelq.cli.options import (ByOption, DbOption, ExportKind, JsonOption, OneLineErrors,
                                StrategyOption, db_path, open_store, strategy_name, user_errors)
from labelq.errors import LabelqError
from labelq.lazy import LazyModule
from labelq.loop import settings
from labelq.loop.people import default_person
from labelq.loop.queue_view import meta_columns
from labelq.review.defaults import REFERENCE_ROWS
from labelq.store.migrate import head_revision

# The engine loads on first use: `labelq --version` and `next` on a current store need none of it.
actions = LazyModule("labelq.loop.actions")
maintain = LazyModule("labelq.loop.maintain")
reports = LazyModule("labelq.loop.reports")
audits = LazyModule("labelq.loop.audit")

app = typer.Typer(
    name="labelq",
    cls=OneLineErrors,
    help="Label the candidates that teach a Gaussian-process classifier the most.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)


def show_version(value: bool) -> None:
    if value:
        typer.echo(f"labelq {__version__} (store schema {head_revision()})")
        raise typer.Exit()


@app.callback()
def main_options(
    version: Annotated[bool, typer.Option(
        "--version", help="Print the version and the store schema revision, then exit.",
        callback=show_version, is_eager=True)] = False,
):
    """Label the candidates that teach a Gaussian-process classifier the most."""


class BadOption(LabelqError):
    """An option's value is not one the command accepts."""


def check_strategy(strategy: Optional[str]) -> Optional[str]:
    """The strategy name, or a one-line error naming the accepted ones."""
    if strategy is not None and strategy not in STRATEGIES:
        raise BadOption(f"unknown strategy {strategy!r}; choose one of {', '.join(STRATEGIES)}")
    return strategy


def person(by: Optional[str]) -> str:
    return by or default_person()


@app.command()
@user_errors
def init(
    classes: Annotated[str, typer.Option(
        "--classes", help="Comma-separated class names, e.g. export,local,juice.")],
    db: DbOption = None,
    json: JsonOption = False,
):
    """Create a new store for the given classes."""
    names = [c.strip() for c in classes.split(",")]
    store = actions.create_store(db_path(db), names)
    with store:
        if json:
            render.print_json({"db": str(store.path), "classes": store.classes})
        else:
            render.console().print(f"Created {store.path} with classes {', '.join(store.classes)}.",
                                   markup=False)


@app.command("import")
@user_errors
def import_(
    file: Annotated[Path, typer.Argument(help="CSV file with a header row.", show_default=False)],
    id_column: Annotated[str, typer.Option(
        "--id", help="Column holding each candidate's unique key.")],
    features: Annotated[Optional[str], typer.Option(
        "--features", help="Comma-separated columns that are exactly the features; every other "
        "column is metadata.", show_default=False)] = None,
    meta: Annotated[Optional[str], typer.Option(
        "--meta", help="Comma-separated columns kept as metadata; every other column except --id "
        "and --labels is a feature.", show_default=False)] = None,
    missing: Annotated[str, typer.Option(
        "--missing", help="An empty cell in a feature column: error (refuse the file), drop-row "
        "(leave the row out) or median (fill with the column's median over the file).")
    ] = "error",
    labels: Annotated[Optional[str], typer.Option(
        "--labels", help="Column of labels already known (empty cell = unlabelled).",
        show_default=False)] = None,
    db: DbOption = None,
    json: JsonOption = False,
):
    """Add candidates from a CSV file.

    Which columns are features is a rule you can see and set: --features names exactly the
    features; --meta names the metadata columns, every other column except --id and --labels
    being a feature; with neither, a column is a feature when its first filled cell is a number,
    and metadata otherwise. A feature cell that is empty refuses the file unless --missing says
    what to do with it; one that is not a number always does. Nothing is added on any error.
    """
    from labelq.ingest import MISSING_TREATMENTS

    if missing not in MISSING_TREATMENTS:
        raise BadOption(f"unknown --missing treatment {missing!r}; choose one of "
                        f"{', '.join(MISSING_TREATMENTS)}")
    names = {option: None if text is None else [c.strip() for c in text.split(",") if c.strip()]
             for option, text in (("features", features), ("meta", meta))}
    with open_store(db) as store, render.progress_bar("importing") as update:
        result = actions.import_candidates(
            store, file, id_column, features=names["features"], meta=names["meta"],
            labels_column=labels, missing=missing,
            progress=lambda rows, done, total: update(done, total, f"importing ({rows:,} rows)"))
        counts = store.counts()
    if json:
        render.print_json({"added": result.candidates, "labels": result.labels,
                           "features": result.features, "metadata": result.metadata,
                           "candidates": counts["candidates"],
                           "feature_rule": result.feature_rule, "missing": result.missing,
                           "missing_cells": result.missing_cells,
                           "dropped_rows": result.dropped_rows,
                           "first_dropped_line": result.first_dropped_line,
                           "filled_cells": result.filled_cells,
                           "filled_with": result.filled_with})
        return
    rule = {"features": "named by --features",
            "meta": "every column but --id, --labels and --meta",
            "first-filled-cell": "columns whose first filled cell is a number; set with --features "
                                 "or --meta"}[result.feature_rule]
    per_column = ", ".join(f"{name} {n:,}" for name, n in result.missing_cells.items())
    n_missing = sum(result.missing_cells.values())
    found = f"{n_missing:,} ({per_column})" if n_missing else "none"
    if result.dropped_rows:
        rows = "row" if result.dropped_rows == 1 else "rows"
        treated = (f"; --missing drop-row left out {result.dropped_rows:,} {rows}, the first at "
                   f"line {result.first_dropped_line}")
    elif result.filled_with:
        medians = ", ".join(f"{name} {value:.6g}" for name, value in result.filled_with.items())
        treated = f"; --missing median filled them with the column median ({medians})"
    else:
        treated = f" (--missing {result.missing})"
    con = render.console()
    con.print(f"Added {result.candidates:,} candidates; the pool now holds "
              f"{counts['candidates']:,}.", markup=False)
    con.print(f"Features ({len(result.features)}): {', '.join(result.features)} ({rule}).",
              markup=False)
    con.print(f"Metadata ({len(result.metadata)}): {', '.join(result.metadata) or 'none'}.",
              markup=False)
    con.print(f"Empty feature cells: {found}{treated}.", markup=False)
    if result.labels:
        con.print(f"Recorded {result.labels:,} labels from column {labels!r}.", markup=False)


@app.command("next")
@user_errors
def next_(
    n: Annotated[int, typer.Option("-n", help="How many candidates to show.", min=1)] = 10,
    strategy: StrategyOption = None,
    by: ByOption = None,
    db: DbOption = None,
    json: JsonOption = False,
):
    """Show the queue: the candidates whose labels would teach the model most."""
    from labelq.loop.quick import quick_next_queue

    holder = by or default_person()
    location = db_path(db)
    # current scores in a file store: read through plain sqlite3 without loading the engine
    quick = (quick_next_queue(location, n, strategy_name(strategy), holder)
             if isinstance(location, Path) else None)
    if quick is not None:
        render_queue(quick[0], quick[1], json)
        return
    with open_store(db) as store:
        # the table is printed after the bar (on stderr) has gone: printing to stdout while it
        # is live left the bar's last line in front of the table in a terminal
        with render.progress_bar("refitting") as update:
            queue = actions.next_queue(store, n, strategy_name(strategy), holder=holder,
                                       progress=lambda stage, d, t: update(d, t, stage))
        render_queue(store.classes, queue, json)


def render_queue(classes: list[str], queue, json: bool, echo: Optional[dict] = None) -> None:
    """Print a queue as JSON (with ``echo``'s keys first, e.g. what was just recorded) or as a
    heading, a table and a count of rows held for other labellers."""
    if json:
        render.print_json({**(echo or {}), "queue": render.queue_rows_json(queue, classes),
                           "strategy": queue.strategy, "cold_start": queue.cold_start,
                           "fit": queue.fit.id, "held_for_others": queue.held})
        return
    con = render.console()
    if not queue.rows:
        con.print("Every candidate is labelled: the queue is empty.")
        return
    con.print(render.queue_heading(queue))
    con.print(render.queue_table(queue, classes, meta_columns(queue.rows)))
    if render.score_legend(queue, classes):
        con.print(render.score_legend(queue, classes), style="dim")
    if queue.held:
        con.print(render.held_line(queue.held, queue.held_until), style="dim")


@app.command()
@user_errors
def show(
    key: Annotated[str, typer.Argument(help="The candidate's key.", show_default=False)],
    db: DbOption = None,
    json: JsonOption = False,
):
    """One candidate: metadata, features, probability per class with interval, nearest labelled."""
    with open_store(db) as store:
        view = reports.candidate_view(store, key)
    if json:
        render.print_json(view)
        return
    con = render.console()
    status = (f"labelled {view['label']}" if view["label"] else
              "skipped" if view["skipped"] else f"queue rank {view['rank']}" if view["rank"] else
              "unranked")
    con.print(f"[bold]{escape(view['key'])}[/bold] ({escape(status)})")
    from labelq.cli.label_tables import current_label_line, history_table

    if current_label_line(view):
        con.print(current_label_line(view), markup=False)
    features = [(k, render.fmt_value(v)) for k, v in view["features"].items()]
    con.print(render.key_value_table(list(view["meta"].items()) + features))
    if view["p"]:
        con.print(render.probability_table(view))
    if view["nearest"]:
        con.print(render.nearest_table(view["nearest"]))
    if view["history"]:
        con.print(history_table(view["history"]))


LabelNote = Annotated[Optional[str], typer.Option("--note", help="A note kept with the label.",
                                                  show_default=False)]


@app.command()
@user_errors
def label(
    key: Annotated[str, typer.Argument(help="The candidate's key.", show_default=False)],
    class_: Annotated[str, typer.Argument(metavar="CLASS", help="The class you give it: its name "
                                          "(any case) or its number in the order given to init.",
                                          show_default=False)],
    note: LabelNote = None,
    by: ByOption = None,
    relabel: Annotated[bool, typer.Option("--relabel", help="Replace an existing label.")] = False,
    resolve: Annotated[bool, typer.Option(
        "--resolve", help="Settle a dispute between labellers with this class.")] = False,
    strategy: StrategyOption = None,
    n: Annotated[int, typer.Option("-n", help="How many of the new queue to show.", min=1)] = 5,
    db: DbOption = None,
    json: JsonOption = False,
):
    """Record a label, refit, re-rank and print the new head of the queue."""
    with open_store(db) as store:
        who = person(by)
        with render.progress_bar("refitting") as update:  # gone before anything is printed
            actions.label(store, key, class_, who, note=note, relabel=relabel, resolve=resolve,
                          strategy=strategy_name(strategy),
                          progress=lambda stage, d, t: update(d, t, stage))
            queue = actions.next_queue(store, n, strategy_name(strategy), holder=who)
        disputed = store.is_disputed(key)
        from labelq.store.classes import resolve_class

        class_ = resolve_class(class_, store.classes)  # the stored name, as the store matched it
        if not json:
            render.console().print(f"Labelled {key} as {class_}"
                                   + (" (dispute settled)." if resolve else "."), markup=False)
            if disputed:
                render.console().print(
                    f"{key} is now disputed: another labeller gave it another class. It leaves "
                    f"the training set until someone settles it with `labelq label {key} CLASS "
                    f"--resolve` (`labelq disputes` lists them).", markup=False)
        render_queue(store.classes, queue, json, echo={"labelled": {"key": key, "class": class_,
                                                            "by": who, "note": note,
                                                            "disputed": disputed}})


@app.command()
@user_errors
def skip(
    key: Annotated[str, typer.Argument(help="The candidate's key.", show_default=False)],
    by: ByOption = None,
    db: DbOption = None,
    json: JsonOption = False,
):
    """Skip a candidate: it waits at the bottom of the queue until labelled or the skip is undone."""
    with open_store(db) as store, render.progress_bar("re-ranking") as update:
        actions.skip(store, key, person(by), progress=lambda stage, d, t: update(d, t, stage))
    if json:
        render.print_json({"skipped": key})
    else:
        render.console().print(f"Skipped {key}; it now waits at the bottom of the queue.",
                               markup=False)


@app.command()
@user_errors
def undo(
    key: Annotated[Optional[str], typer.Argument(
        help="Take back this candidate's current label or skip instead (a relabel's earlier "
        "label comes back).", show_default=False)] = None,
    by: ByOption = None,
    db: DbOption = None,
    json: JsonOption = False,
):
    """Take back the most recent label or skip, or with a key that candidate's current label or
    skip (a retraction is recorded; nothing is deleted)."""
    with open_store(db) as store, render.progress_bar("refitting") as update:
        step = actions.undo(store, person(by), key=key,
                            progress=lambda stage, d, t: update(d, t, stage))
    event = step.event
    if json:
        render.print_json({"undone": event.kind, "key": event.key, "class": event.class_})
    elif event.kind == "label":
        render.console().print(f"Took back the label {event.class_} on {event.key}.", markup=False)
    else:
        render.console().print(f"Took back the skip of {event.key}.", markup=False)


@app.command()
@user_errors
def status(
    db: DbOption = None,
    json: JsonOption = False,
):
    """Counts, the last fit, and advice on whether more labels are paying off."""
    with open_store(db) as store:
        doc = reports.status(store)
    if json:
        render.print_json(doc)
        return
    render.print_status(render.console(), doc)


@app.command()
@user_errors
def audit(
    n: Annotated[Optional[int], typer.Option(
        "-n", help="Draw N more unlabelled candidates at random to audit.", min=1,
        show_default=False)] = None,
    double: Annotated[bool, typer.Option(
        "--double", help="With -n: each item is to be labelled by two labellers; status then "
        "reports their agreement (Cohen's kappa).")] = False,
    seed: Annotated[Optional[int], typer.Option(
        "--seed", help="Seed of the draw (default: a fresh one, recorded with the audit).",
        show_default=False)] = None,
    plot: Annotated[Optional[Path], typer.Option(
        "--plot", metavar="FILE.png", help="Also write the reliability diagram as a PNG.",
        show_default=False)] = None,
    by: ByOption = None,
    db: DbOption = None,
    json: JsonOption = False,
):
    """Measure the model's accuracy on a random sample: draw one (-n N), or report it.

    Audit items come up in `next` and `session`, one in five while any wait, without the
    model's prediction. Each is scored against the prediction made before its label, then it
    trains the model like any other label.
    """
    with open_store(db) as store:
        drawn = None
        if n is not None:
            with render.progress_bar("refitting") as update:  # a draw needs a current model
                drawn = audits.draw(store, n, person(by), seed,
                                    progress=lambda stage, d, t: update(d, t, stage),
                                    double=double)
        doc = audits.report(store)
        snap = None if json else reports.latest_snapshot(store)
    if plot is not None:
        if not doc or not doc["n"]:
            raise BadOption("no audit item is scored yet, so there is no reliability diagram "
                            "to plot")
        audits.plot(doc, reports.check_output(plot))
    if json:
        render.print_json({"drawn": None if drawn is None else
                           {"audit": drawn.audit_id, "n": drawn.n,
                            "drawn_from": drawn.drawn_from, "seed": drawn.seed},
                           "audit": doc})
        return
    render.print_audit(render.console(), drawn, doc, snap, plot)


@app.command()
@user_errors
def history(
    by: Annotated[Optional[str], typer.Option(
        "--by", metavar="fit|session|day", help="One row per fit, per sitting or per calendar day "
        "(default: day once the labels span more than one day, else fit).",
        show_default=False)] = None,
    tz: Annotated[Optional[str], typer.Option(
        "--tz", metavar="NAME", help="Time zone for days and sittings, an IANA name such as "
        "Europe/Helsinki (default: $TZ, else the system's local zone).",
        show_default=False)] = None,
    plot: Annotated[Optional[Path], typer.Option("--plot", help="Also write the chart as a PNG.",
                                                 show_default=False)] = None,
    db: DbOption = None,
    json: JsonOption = False,
):
    """How the pool's uncertainty changed, by fit, sitting or day, as a table and a chart.

    A sitting is a run of label events (undos included) by one labeller, each less than 30
    minutes after the one before; a pause of 30 minutes or more starts a new sitting. Labels
    given count only labels that still stand (undone or replaced ones do not). With --json:
    under --by fit the list of fits, otherwise {"by", "time_zone", "rows"}.
    """
    zone = reports.history_zone(tz)
    with open_store(db) as store:
        view = reports.history_view(store, by, zone)
    if plot is not None:
        reports.history_png(view, plot)
    if json:
        render.print_json(view["rows"] if view["by"] == "fit" else view)
        return
    con = render.console()
    chart = reports.history_chart(view)
    if view["by"] == "fit":
        render.print_history(con, view["rows"], chart)
    else:
        render.print_grouped_history(con, view, chart)
    if plot is not None:
        con.print(f"Wrote {plot}.", markup=False)


@app.command()
@user_errors
def export(
    what: Annotated[ExportKind, typer.Argument(help="What to export.", show_default=False)],
    output: Annotated[Optional[Path], typer.Option(
        "-o", "--output", help="Write to this file instead of stdout.", show_default=False)] = None,
    db: DbOption = None,
    json: JsonOption = False,
):
    """Export the labels, the predictions for every candidate, or the fitted model (JSON)."""
    with open_store(db) as store, render.progress_bar("exporting") as update:
        text = reports.export(store, what.value, as_json=json, progress=update)
    if output is None:
        typer.echo(text, nl=False)
    else:
        reports.write_text(output, text)
        render.err_console().print(f"Wrote {output}.")
    if what is ExportKind.predictions:
        render.err_console().print(render.CAUTION)


@app.command()
@user_errors
def session(
    strategy: StrategyOption = None,
    by: ByOption = None,
    db: DbOption = None,
    json: JsonOption = False,
):
    """Label at the prompt: shows the next candidate and asks for its class. With --json the
    prompts go to stderr and stdout gets one JSON summary at the end."""
    from labelq.cli.sitting import run_session

    with open_store(db) as store:
        summary = run_session(store, person(by), strategy_name(strategy),
                              con=render.err_console() if json else None)
    if json:
        render.print_json(summary)


@app.command()
@user_errors
def simulate(
    file: Annotated[Path, typer.Argument(help="A CSV of candidates with known classes.",
                                         show_default=False)],
    id_column: Annotated[str, typer.Option("--id", help="Column holding each row's key.")],
    truth: Annotated[str, typer.Option("--truth", help="Column holding the true class.")],
    truth_file: Annotated[Optional[Path], typer.Option(
        "--truth-file", help="Read the --truth column from this CSV instead, joined by --id.",
        show_default=False)] = None,
    strategies: Annotated[str, typer.Option(
        "--strategies", help=f"Comma-separated strategies to compare ({', '.join(STRATEGIES)}).")
    ] = f"{settings.DEFAULT_STRATEGY},random",
    budget: Annotated[int, typer.Option(
        "--budget", help="Labels per replay, from none.", min=2)] = 60,
    seeds: Annotated[int, typer.Option(
        "--seeds", help="Replays per strategy (seeds 0..K-1).", min=1)] = 3,
    reference: Annotated[int, typer.Option(
        "--reference", help="Rows (seeded sample) the full-pool reference model is fitted on; "
        "0 for none.", min=0)] = REFERENCE_ROWS,
    features: Annotated[Optional[str], typer.Option(
        "--features", help="Comma-separated feature columns (default: every numeric column).",
        show_default=False)] = None,
    plot: Annotated[Optional[Path], typer.Option(
        "--plot", help="Also write the learning curves as a PNG.", show_default=False)] = None,
    json: JsonOption = False,
):
    """Replay strategies from zero labels, exactly as `label` would pick, on a CSV whose classes
    are known, and compare their learning curves with random labelling."""
    names = [check_strategy(s.strip()) for s in strategies.split(",") if s.strip()]
    feature_list = [f.strip() for f in features.split(",")] if features else None
    with render.progress_bar("replaying", eta=True) as update:
        result = reports.simulate_csv(file, id_column, truth, names, budget, seeds,
                                      features=feature_list, truth_file=truth_file,
                                      reference_rows=reference or 0, progress=update)
    if plot is not None:
        reports.simulate_png(result, plot)
    if json:
        render.print_json(result)
        return
    render.print_simulation(render.console(), result, reports.simulation_chart(result))
    if plot is not None:
        render.console().print(f"Wrote {plot}.")


@app.command()
@user_errors
def check(
    db: DbOption = None,
    json: JsonOption = False,
):
    """Verify a store: schema revision, orphan rows, scores of the current fit, label events."""
    with open_store(db) as store:
        problems = maintain.check(store)
    if json:
        render.print_json({"ok": not problems, "problems": problems})
    elif problems:
        for p in problems:
            render.console().print(f"problem: {p}", markup=False)
    else:
        render.console().print("The store is consistent.")
    if problems:
        raise typer.Exit(1)


@app.command()
@user_errors
def rebuild(
    db: DbOption = None,
    json: JsonOption = False,
):
    """Recompute every fit, score and snapshot from the label events alone."""
    with open_store(db) as store, render.progress_bar("rebuilding") as update:
        n = maintain.rebuild(store, progress=lambda stage, d, t: update(d, t, stage))
    if json:
        render.print_json({"fits": n})
    else:
        render.console().print(f"Rebuilt {n} fits from the label events.")


@app.command()
@user_errors
def demo(
    dir: Annotated[Path, typer.Option(
        "--dir", help="Folder for the demo files and store.")] = Path("."),
    json: JsonOption = False,
):
    """Build the orchard demo store, label a few apples and show the queue."""
    from labelq.cli.walkthrough import run_demo

    doc = run_demo(dir, quiet=json)
    if json:
        render.print_json(doc)


review_commands.register(app)


def main() -> None:
    """Console-script entry point."""
    app()
