"""Tables and lines for people, JSON documents for scripts. No store or model work happens here."""

from __future__ import annotations

import json
import math
import sys
from contextlib import contextmanager
from typing import Optional

from rich.box import SIMPLE_HEAD
from rich.console import Console
from rich.markup import escape
from rich.progress import (BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn,
                           TimeRemainingColumn)
from rich.table import Table

from labelq.policy.reasons import SPREAD
from labelq.review.grouping import SITTING_GAP

CAUTION = ("Probabilities are the model's estimates from the labels given so far. Validate them "
           "before relying on them for decisions that affect health or food safety, and follow "
           "local rules and licensed practice.")

SCORE_NAMES = {"entropy": "entropy", "margin": "margin", "bald": "BALD", "epig": "EPIG",
               "random": "random draw"}
SCORE_LEGEND = {"entropy": "entropy of the class probabilities, bits",
                "margin": "margin = p1 - p2, the gap between the two likeliest classes",
                "bald": "BALD = what a label would tell the model, bits",
                "epig": "EPIG = what a label would tell about the pool's predictions, bits",
                "random": "random draw = the baseline's seeded uniform number"}


def console() -> Console:
    """The console for results (stdout); Rich honours NO_COLOR and plain pipes."""
    return Console(highlight=False, soft_wrap=False)


def err_console() -> Console:
    """The console for progress and notes (stderr)."""
    return Console(stderr=True, highlight=False)


def print_json(doc) -> None:
    """One JSON document on stdout."""
    sys.stdout.write(json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n")


def fmt_p(p) -> str:
    """A probability for a table: two decimals, '<0.01'/'>0.99' at the ends."""
    if p is None or (isinstance(p, float) and math.isnan(p)):
        return "-"
    if p < 0.005:
        return "<0.01"
    if p > 0.995:
        return ">0.99"
    return f"{p:.2f}"


def fmt_num(x, digits=3) -> str:
    """A number for a table, '-' when missing."""
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "-"
    return f"{x:.{digits}f}"


def fmt_value(x) -> str:
    """A feature value as read: up to six significant digits."""
    return f"{x:.6g}"


def short_time(at) -> str:
    """'2026-12-01T22:59:14Z' -> '12-01 22:59' (UTC), for narrow tables."""
    return "-" if not at else f"{at[5:10]} {at[11:16]}"


def round_p(p) -> float:
    """A probability for JSON: four decimals."""
    return round(float(p), 4)


def queue_rows_json(queue, classes) -> list[dict]:
    """The `next --json` rows of the contract in DESIGN.md."""
    out = []
    for row in queue.rows:
        audit = getattr(row, "audit", False)  # an audit item: no prediction is shown
        out.append({
            "rank": None if audit else int(row.rank),
            "key": row.key,
            "audit": audit,
            "predicted": None if audit else classes[int(row.predicted)],
            "p": None if audit else {c: round_p(p) for c, p in zip(classes, row.probabilities)},
            "score": None if audit else round(float(row.score), 4),
            "strategy": queue.strategy,
            "reason": row.reason,
            "meta": row.meta,
        })
    return out


def queue_heading(queue) -> str:
    """One line above the queue saying how it was ranked."""
    fit = queue.fit
    if queue.cold_start:
        return ("Cold start: fewer than two classes have labels, so the model cannot rank yet. "
                "These are typical candidates of clusters of the pool, each standing for many "
                "others; no prediction is shown because there is none yet.")
    audit = (" Rows marked A are audit items, drawn at random to measure accuracy; their "
             "prediction is hidden so that it cannot lead you."
             if any(getattr(r, "audit", False) for r in queue.rows) else "")
    return (f"Ranked by {queue.strategy} after fit {fit.id} on {fit.n_labels} labels. Rows marked "
            f"+ form a batch chosen together and spread out, so their scores need not be in "
            f"order.{audit}")


def queue_table(queue, classes, meta_columns) -> Table:
    """The queue as an aligned table: rank (+ for rows of the spread-out batch), key, predicted
    class, p, score, why the row is there, metadata. A cold start has no prediction, so it shows
    only the rank, key, why and metadata."""
    table = Table(show_edge=False, pad_edge=False, header_style="bold")
    table.add_column("#", justify="right", no_wrap=True)
    table.add_column("key", overflow="fold")
    cold = queue.cold_start
    if not cold:
        table.add_column("predicted")
        table.add_column("p", justify="right")
        score_name = SCORE_NAMES.get(queue.strategy, "score")
        table.add_column(score_name, justify="right")
    table.add_column("why", overflow="fold", min_width=16)
    for name in meta_columns:
        table.add_column(escape(name), overflow="fold")
    for row in queue.rows:
        claimed = "" if not getattr(row, "skipped", False) else " (skipped)"
        audit = getattr(row, "audit", False)
        batch = "+" if row.reason and not cold and queue.strategy != "random" else ""
        cells = ["A" if audit else f"{batch}{row.rank}", escape(row.key) + claimed]
        if not cold and audit:  # the prediction an audit tests is not shown to the labeller
            cells += ["-", "-", "-"]
        elif not cold:
            cells += [escape(classes[int(row.predicted)]), fmt_p(row.p_top), fmt_num(row.score)]
        cells.append(escape((row.reason or f"ranked by {queue.strategy}").removesuffix(SPREAD)))
        table.add_row(*cells, *[escape(str(row.meta.get(m, ""))) for m in meta_columns])
    return table


def held_line(count: int, until: Optional[str]) -> str:
    """'2 rows held for another labeller until 14:05 (UTC)'."""
    rows = "row" if count == 1 else "rows"
    when = f" until {until[11:16]} (UTC)" if until else ""
    return f"{count} {rows} held for another labeller{when}"


def score_legend(queue, classes) -> str:
    """One line under the queue saying what its score column means."""
    if queue.cold_start:
        return ""
    return SCORE_LEGEND.get(queue.strategy, "")


def key_value_table(pairs) -> Table:
    """Two aligned columns of names and values."""
    table = Table(show_header=False, show_edge=False, pad_edge=False, box=None)
    table.add_column(style="bold")
    table.add_column()
    for k, v in pairs:
        table.add_row(escape(str(k)), escape(str(v)))
    return table


@contextmanager
def progress_bar(description: str, enabled: bool = True, eta: bool = False):
    """A Rich progress bar on stderr; yields ``update(done, total)``. Silent when not a terminal.
    With ``eta``, it also shows an estimate of the time left."""
    con = err_console()
    columns = [TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
               TimeElapsedColumn()]
    if eta:
        columns += [TextColumn("left"), TimeRemainingColumn()]
    bar = Progress(*columns, console=con, transient=True,
                   disable=not (enabled and con.is_terminal))
    with bar:
        task = bar.add_task(description, total=None)

        def update(done, total, label=None):
            bar.update(task, completed=done, total=total or None,
                       description=label or description)
        yield update


def probability_table(view) -> Table:
    """Probability per class with its 5-95% interval, for `show`."""
    table = Table(show_edge=False, pad_edge=False, header_style="bold")
    table.add_column("class")
    table.add_column("p", justify="right")
    table.add_column("5-95% interval", justify="right")
    for c, d in view["p"].items():
        table.add_row(escape(c), fmt_p(d["p"]), f"{fmt_p(d['low'])} - {fmt_p(d['high'])}")
    return table


def nearest_table(nearest) -> Table:
    """The nearest labelled candidates in standardised feature space, for `show`."""
    table = Table(show_edge=False, pad_edge=False, header_style="bold",
                  title="nearest labelled", title_justify="left")
    table.add_column("key")
    table.add_column("class")
    table.add_column("distance (sd)", justify="right")
    for n in nearest:
        table.add_row(escape(n["key"]), escape(n["class"]), fmt_num(n["distance"], 2))
    return table


def print_status(con: Console, doc) -> None:
    """The `status` screen: counts, labels per class, last fit, snapshot, advice, caution."""
    con.print(f"[bold]{escape(doc['db'])}[/bold]: {doc['candidates']:,} candidates, "
              f"{doc['labelled']:,} labelled, {doc['skipped']:,} skipped")
    con.print(key_value_table([(f"labels {c}", n) for c, n in doc["classes"].items()]
                              + [(f"labels by {who}", n)
                                 for who, n in (doc.get("labellers") or {}).items()]))
    fit = doc["last_fit"]
    if fit is None:
        con.print("No fit yet.")
    else:
        lml = fit["log_marginal_likelihood"]
        con.print(f"Last fit {fit['fit']} on {fit['n_labels']} labels at {fit['at']} "
                  f"({fit['seconds']:.2f} s"
                  + (f", log marginal likelihood {lml:.2f}" if lml is not None else "")
                  + (", hyperparameters re-learnt" if fit["hyperparameters_relearnt"] else "")
                  + ")" + (" - stale, refits on the next command" if doc["stale"] else ""))
        if fit.get("hyper_mode"):
            con.print(f"Hyperparameters {HYPER_WORDS[fit['hyper_mode']]}"
                      + _hyper_detail(fit), markup=False)
        for w in fit["warnings"] or []:
            con.print(f"  note: {w}", markup=False)
        learnt = doc.get("last_relearn")
        if learnt is not None and learnt["expected_accuracy_change"] is not None:
            con.print(f"Last learnt at fit {learnt['fit']} ({learnt['n_labels']} labels): the "
                      f"model's expected accuracy changed by "
                      f"{learnt['expected_accuracy_change']:+.3f}", markup=False)
    snap = doc["snapshot"]
    if snap is not None:
        kappa = snap["kappa"]
        sample = snap.get("sample")
        se = (sample or {}).get("se") or {}

        def pm(name, digits):  # "+- standard error" when the figure is a sample's estimate
            return f" +- {se[name]:,.{digits}f}" if name in se else ""

        con.print(key_value_table([
            ("mean entropy", f"{snap['mean_entropy']:.3f}{pm('mean_entropy', 3)} bits"),
            ("uncertain (top p < 0.8)", f"{snap['n_uncertain']:,}{pm('n_uncertain', 0)}"),
            ("expected accuracy", f"{snap['expected_accuracy']:.3f}"
                                  f"{pm('expected_accuracy', 3)} (the model's own estimate)"),
            ("agreement with previous fit", "-" if kappa is None else f"kappa {kappa:.3f}"),
        ]))
        if sample:
            con.print(f"Pool figures estimated from a fixed seeded sample of {sample['rows']:,} "
                      f"of {sample['of']:,} unlabelled candidates (+- one standard error); "
                      "`labelq export predictions` computes every candidate exactly.",
                      markup=False)
    agreement = doc.get("agreement")
    if agreement is not None:
        con.print(f"Double labels: {', '.join(agreement['labellers'])} agreed on "
                  f"{agreement['agreed']:.0%} of {agreement['n']} items; Cohen's kappa "
                  f"{agreement['kappa']:.2f} (95% interval {agreement['low']:.2f}-"
                  f"{agreement['high']:.2f}).", markup=False)
    if doc.get("disputes"):
        con.print(f"{doc['disputes']} disputed candidates are out of training until settled "
                  "(`labelq disputes`).", markup=False)
    audit = doc.get("audit")
    if audit is not None:
        con.print(audit_line(audit, snap), markup=False)
        if audit.get("calibration"):
            con.print(calibration_warning(audit), markup=False)
    con.print(f"[bold]Advice:[/bold] {escape(doc['advice']['message'])}")
    con.print(CAUTION, style="dim")


def audit_line(audit, snap=None) -> str:
    """'Audit: 0.86 right (95% interval 0.74-0.93) on 40 items; the model expected 0.91 for them'."""
    pending = (f"; {audit['pending']} of {audit['drawn']} still to label"
               if audit.get("pending") else "")
    if not audit["n"]:
        return f"Audit: no item scored yet{pending}."
    pool = ("" if snap is None else
            f"; for the whole pool it expects {snap['expected_accuracy']:.2f}")
    return (f"Audit (measured): {audit['accuracy']:.2f} right, 95% interval "
            f"{audit['low']:.2f}-{audit['high']:.2f}, on {audit['n']} random "
            f"{'item' if audit['n'] == 1 else 'items'}; the model expected "
            f"{audit['expected']:.2f} for the same {'item' if audit['n'] == 1 else 'items'}"
            f"{pool}{pending}.")


def calibration_warning(audit) -> str:
    """One line flagging the pool's probabilities as too high or too low."""
    if audit["calibration"] == "over-confident":
        return ("Over-confident: the audit found the model right less often than its own "
                "probabilities say; read every p in the queue and the export as too high.")
    return ("Under-confident: the audit found the model right more often than its own "
            "probabilities say; read every p in the queue and the export as too low.")


HYPER_WORDS = {
    "average": "averaged over a grid, weighted by their evidence",
    "learnt": "learnt by maximising the evidence on this fit",
    "held": "held from the last learning",
}


def _hyper_detail(fit) -> str:
    """Top grid weight, or the learnt signal variance and lengthscale(s), in brackets."""
    hp = fit.get("hyperparameters") or {}
    if fit["hyper_mode"] == "average" and "top_weight" in hp:
        return f" (top grid point holds {hp['top_weight']:.0%} of the weight)"
    ls = hp.get("lengthscale")
    if ls is None:
        return ""
    ls_text = (f"{ls:.3g}" if not isinstance(ls, list)
               else f"{min(ls):.3g}-{max(ls):.3g} (one per feature)")
    return (f" (lengthscale {ls_text}, signal variance {hp['signal_variance']:.3g};"
            f" learnt at {fit.get('learnt_at') or 0} labels)")


def print_history(con: Console, rows, chart: str) -> None:
    """The `history` screen: one row per fit (entropy = mean over unlabelled candidates, bits;
    uncertain = top probability below 0.8; exp. acc. = the model's own expected accuracy; kappa =
    agreement with the previous fit), then the chart."""
    if not rows:
        con.print("No fits yet: label a few candidates first.")
        return
    table = Table(show_edge=False, pad_edge=False, header_style="bold")
    audited = any((r.get("audit") or {}).get("n") for r in rows)
    # within 80 columns: the sitting column gives way to the audit (`--by session` has sittings)
    sittings = not audited and any(r["session"] is not None for r in rows)
    for name, justify in [("fit", "right"), ("sess.", "right"), ("labels", "right"),
                          ("entropy", "right"), ("uncertain", "right"), ("exp. acc.", "right"),
                          ("kappa", "right"), ("at (UTC)", "left"), ("audit", "right")]:
        if (name != "sess." or sittings) and (name != "audit" or audited):
            table.add_column(name, justify=justify, no_wrap=True)
    for r in rows:
        cells = [str(r["fit"]) + ("*" if r.get("relearnt") else "")]
        if sittings:
            cells.append("-" if r["session"] is None else str(r["session"]))
        cells += [str(r["n_labels"]), fmt_num(r["mean_entropy"]), f"{r['n_uncertain']:,}",
                  fmt_num(r["expected_accuracy"]), fmt_num(r["kappa"]), short_time(r["at"])]
        if audited:
            cells.append(audit_cell(r.get("audit")))
        table.add_row(*cells)
    con.print(table)
    con.print("entropy: mean over unlabelled candidates, bits; uncertain: top p below 0.8;\n"
              "exp. acc.: the model's own estimate; kappa: agreement with the previous fit"
              + (";\naudit: share right / items scored, random audit items so far "
                 "(`labelq audit`: interval)" if audited else ""),
              style="dim")
    sample_note(con, rows)
    for r in rows:
        if r.get("relearnt"):
            change = r.get("accuracy_change")
            con.print(f"* fit {r['fit']}: hyperparameters learnt at {r['n_labels']} labels"
                      + (" (from the grid average)" if r.get("hyper_mode_before") == "average"
                         else "")
                      + ("" if change is None else
                         f"; expected accuracy {change:+.3f}"), markup=False, style="dim")
    con.print(chart)


def sample_note(con: Console, rows) -> None:
    """Say which rows' pool figures are estimates from the seeded sample (large pools)."""
    sampled = [r for r in rows if r.get("sample")]
    if sampled:
        last = sampled[-1]["sample"]
        con.print(f"{len(sampled):,} of {len(rows):,} rows estimate entropy, uncertain and exp. "
                  f"acc. from a fixed seeded sample of {last['rows']:,} candidates (`labelq "
                  "status` gives their standard errors).", style="dim", markup=False)


def audit_cell(doc) -> str:
    """'0.86/40': the audit's measured accuracy and items scored; '-' before any."""
    if not doc or not doc.get("n"):
        return "-"
    return f"{doc['accuracy']:.2f}/{doc['n']}"


GROUP_NAMES = {"day": ("day", "days"), "session": ("sitting", "sittings")}
"""Singular and plural of a group of each grouping, for the history screen."""


def print_grouped_history(con: Console, view, chart: str) -> None:
    """The `history` screen by day or sitting: a heading naming the time zone, one row per
    group (# as on the chart's x axis; * where hyperparameters were relearnt; labeller only when
    there are several), what the columns mean, then the chart."""
    rows = view["rows"]
    if not rows:
        con.print("No labels yet: label a few candidates first.")
        return
    one, many = GROUP_NAMES[view["by"]]
    standing = sum(r["labels_given"] for r in rows)
    con.print(f"History by {one}, times in {view['time_zone']}: {len(rows):,} "
              f"{one if len(rows) == 1 else many}, {standing:,} labels standing.", markup=False)
    table = Table(show_edge=False, pad_edge=False, header_style="bold", box=SIMPLE_HEAD,
                  collapse_padding=True)
    table.add_column("#", justify="right", no_wrap=True)
    table.add_column(one, no_wrap=True)
    several = len({r["by"] for r in rows}) > 1
    if several:
        table.add_column("by", no_wrap=True, max_width=7, overflow="ellipsis")
    audited = any((r.get("audit") or {}).get("n") for r in rows)
    for name in ("given", "total", "entropy", "change", "uncertain", "exp. acc.") + (
            ("audit",) if audited else ()):
        table.add_column(name, justify="right", no_wrap=True)
    for i, r in enumerate(rows, start=1):
        name = r["group"] if view["by"] == "day" else r["group"][5:]  # "12-01 22:03"
        cells = [str(i), escape(name) + ("*" if r["relearnt"] else "")]
        if several:
            cells.append(escape(r["by"] or "-"))
        change = r["entropy_change"]
        cells += [f"{r['labels_given']:,}", f"{r['labels_total']:,}", fmt_num(r["mean_entropy"]),
                  "-" if change is None else f"{change:+.3f}",
                  "-" if r["n_uncertain"] is None else f"{r['n_uncertain']:,}",
                  fmt_num(r["expected_accuracy"])]
        if audited:
            cells.append(audit_cell(r.get("audit")))
        table.add_row(*cells)
    con.print(table)
    minutes = int(SITTING_GAP.total_seconds() // 60)
    legend = [
        "given: labels that still stand (undone or replaced ones do not count)",
        f"total: labels in the store at the end of the {one}",
        f"entropy: mean over unlabelled candidates after the {one}'s last fit, bits",
        f"change: against the previous {one}; uncertain: top p below 0.8",
        "exp. acc.: the model's own estimate; *: hyperparameters relearnt",
        *(["audit: measured share right on audit items scored so far / their number"]
          if audited else []),
        f"kappa: - (agreement between {many} is not stored; --by fit has it per fit)",
    ]
    if view["by"] == "session":
        legend.append(f"a sitting: one labeller's label events under {minutes} minutes apart")
    con.print("\n".join(legend), style="dim", markup=False)
    sample_note(con, rows)
    con.print(chart)


def print_simulation(con: Console, result, chart: str) -> None:
    """The `simulate` screen: a summary per strategy, then the learning curves."""
    table = Table(show_edge=False, pad_edge=False, header_style="bold")
    for name, justify in [("strategy", "left"), ("final accuracy", "right"), ("sd", "right"),
                          ("labels to 95%", "right"), ("labels to 99%", "right"),
                          ("area under curve", "right"), ("se", "right")]:
        table.add_column(name, justify=justify)
    for name, s in result["strategies"].items():
        table.add_row(escape(name), fmt_num(s["accuracy_mean"][-1]), fmt_num(s["accuracy_sd"][-1]),
                      "-" if s["labels_to_95"] is None else str(s["labels_to_95"]),
                      "-" if s["labels_to_99"] is None else str(s["labels_to_99"]),
                      fmt_num(s["auc"]), fmt_num(s["auc_se"]))
    if result["full_pool_accuracy"] is None:
        con.print("No full-pool reference model was fitted (--reference 0).")
    else:
        con.print(f"Full-pool accuracy: {result['full_pool_accuracy']:.3f} (a model with learnt "
                  f"hyperparameters fitted on the true classes of {result['reference_rows']:,} "
                  f"rows, scored on every row)")
    con.print(table)
    con.print(f"Each replay starts from no labels and picks as `label` would (seeds "
              f"{', '.join(map(str, result['seeds']))}); area under curve = mean accuracy over "
              f"labels 1-{result['budget']}, se its standard error over seeds.", style="dim")
    con.print(chart)


def print_audit(con: Console, drawn, doc, snap, plot) -> None:
    """The `audit` screen: what was drawn, the measured accuracy beside the model's own
    estimate, the reliability table with the expected calibration error, the caution."""
    from labelq.review.calibration import ReliabilityBin, render_reliability

    if drawn is not None:
        con.print(f"Drew {drawn.n:,} audit candidates at random from {drawn.drawn_from:,} "
                  f"unlabelled (seed {drawn.seed}). `labelq next` and `labelq session` offer "
                  f"them one in five, marked A, without the model's prediction.", markup=False)
    if doc is None:
        con.print("No audit yet: `labelq audit -n 50` draws 50 candidates at random; their "
                  "labels measure how often the model is right.", markup=False)
        return
    con.print(audit_line(doc, snap), markup=False)
    if doc["unscored"]:
        con.print(f"{doc['unscored']} audit items were labelled before there was a model, so "
                  "they train it but measure nothing.", markup=False)
    if doc["skipped"]:
        con.print(f"{doc['skipped']} audit items are skipped: label them too, or the audit "
                  "leaves out the hard cases and reads too high.", markup=False)
    if doc["n"]:
        bins = [ReliabilityBin(**b) for b in doc["bins"]]
        con.print(render_reliability(bins, width=min(80, max(56, con.width))).rstrip(),
                  markup=False, highlight=False)
        if doc.get("calibration"):
            con.print(calibration_warning(doc), markup=False)
    if plot is not None:
        con.print(f"Wrote the reliability diagram to {plot}.", markup=False)
    con.print(CAUTION, style="dim")
