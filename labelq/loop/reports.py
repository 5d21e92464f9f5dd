"""Read-only views of a store for people and scripts: status, history, one candidate, exports, and
the strategy replay on a labelled CSV. Each returns plain data (dicts, lists, text)."""

from __future__ import annotations

import csv
import io
import json
import os
import tempfile
from bisect import bisect_right
from datetime import date, datetime
from pathlib import Path
from typing import Optional

import numpy as np

from labelq import gp, review  # engine parts load on first use (labelq.lazy), not at start-up
from labelq.errors import LabelqError
from labelq.gp.persistence import with_input_scaling
from labelq.ingest import read_candidates
from labelq.loop import audit, settings
from labelq.loop.refit import ensure_fit, is_current
from labelq.review.advice import stopping_advice
from labelq.review.chart import render_chart
from labelq.review.grouping import (calendar_days, local, parse_utc, resolve_zone, sittings,
                                    zone_label)
from labelq.review.png import write_dated_panels_png, write_panels_png, write_png


class UnknownExportError(LabelqError):
    """`export` was asked for something other than labels, predictions or model."""


class NothingFittedError(LabelqError):
    """The store has no fitted model yet (no labels from two classes)."""


class OutputPathError(LabelqError):
    """An output file cannot be written where the user asked."""


def check_output(path: Path) -> Path:
    """``path`` if a file can be written there, else OutputPathError naming the problem."""
    path = Path(path)
    if path.is_dir():
        raise OutputPathError(f"cannot write {path}: it is a folder")
    parent = path.parent if str(path.parent) else Path(".")
    if not parent.is_dir():
        raise OutputPathError(f"cannot write {path}: folder {parent} does not exist")
    return path


def label_counts(store) -> dict:
    """Labels per class, every class included."""
    counts = {c: 0 for c in store.classes}
    for rec in store.current_labels():
        counts[rec.class_] += 1
    return counts


def labeller_counts(store) -> dict:
    """Current labels per labeller, most first (then by name)."""
    counts: dict = {}
    for rec in store.current_labels():
        counts[rec.by] = counts.get(rec.by, 0) + 1
    return dict(sorted(counts.items(), key=lambda item: (-item[1], item[0])))


def _fit_summary(fit) -> Optional[dict]:
    if fit is None:
        return None
    return {
        "fit": fit.id,
        "n_labels": fit.n_labels,
        "strategy": fit.strategy,
        "log_marginal_likelihood": fit.log_marginal_likelihood,
        "hyperparameters": fit.hyperparameters,
        "seconds": round(fit.seconds, 3) if fit.seconds is not None else None,
        "at": fit.at,
        "warnings": fit.warnings,
        "hyperparameters_relearnt": bool(fit.full_optimize),
        "hyper_mode": fit.hyper_mode,
        "learnt_at": fit.learnt_at,
    }


def relearns(rows) -> list[dict]:
    """The history rows where the hyperparameters were learnt (the hand-over from the grid average
    or a relearn), each with the change in the model's expected accuracy it caused."""
    return [{"fit": r["fit"], "n_labels": r["n_labels"], "from": r["hyper_mode_before"],
             "expected_accuracy_change": r["accuracy_change"]}
            for r in rows if r["relearnt"]]


def _learning_fits(store):
    """Fits made on a new label set (re-uses after undo or a strategy change are left out)."""
    return [f for f in store.fits() if not (f.info or {}).get("reused")]


CAUTION = ("Probabilities are the model's estimates from the labels given so far; an audit "
           "(`labelq audit`) measures how often they are right. Where a decision bears on food "
           "safety or health, follow local rules and licensed practice, not this model alone.")


def status(store) -> dict:
    """Counts, the last fit, the latest snapshot and the stopping advice (status --json)."""
    counts = store.counts()
    per_class = label_counts(store)
    snaps = {s["fit_id"]: s for s in store.snapshots()}
    kappas = [snaps.get(f.id, {}).get("agreement_kappa") for f in _learning_fits(store)
              if f.strategy != "cold-start"]
    audit_doc = audit.report(store)
    advice = stopping_advice(kappas, per_class, audit=audit_doc,
                             half_width=settings.AUDIT_HALF_WIDTH)
    last = store.last_fit()
    snap = snaps.get(last.id) if last is not None else None
    learnt = relearns(history(store))
    return {
        "db": str(store.path),
        "candidates": counts["candidates"],
        "labelled": counts["labelled"],
        "skipped": counts["skipped"],
        "classes": per_class,
        "labellers": labeller_counts(store),
        "features": store.feature_names,
        "last_fit": _fit_summary(last),
        "stale": not is_current(store, last),
        "snapshot": _snapshot_doc(snap, last),
        "last_relearn": learnt[-1] if learnt else None,
        "advice": {"stop": advice.stop, "message": advice.message, "figures": advice.figures,
                   "flagged_classes": advice.flagged_classes},
        "audit": audit_doc,
        "agreement": audit.agreement(store),
        "disputes": len(store.disputes()),
        "caution": CAUTION,
    }


def latest_snapshot(store) -> Optional[dict]:
    """The last fit's snapshot as `status` shows it (key ``snapshot``), or None."""
    last = store.last_fit()
    if last is None:
        return None
    return _snapshot_doc(next((s for s in store.snapshots() if s["fit_id"] == last.id), None),
                         last)


def _snapshot_doc(snap, fit) -> Optional[dict]:
    """The snapshot as `status --json` gives it; ``sample`` is None when its figures cover the
    whole pool, else the seeded sample they are estimated from: rows, of, and the standard
    error of each (a large pool's bounded fit, labelq.loop.settings.EXACT_POOL_UP_TO)."""
    if snap is None:
        return None
    return {"mean_entropy": snap["mean_entropy"], "n_uncertain": snap["n_uncertain"],
            "expected_accuracy": snap["expected_accuracy"], "kappa": snap["agreement_kappa"],
            "class_counts": snap["class_counts"],
            "sample": (fit.info or {}).get("summary") if fit is not None else None}


def history(store) -> list[dict]:
    """One row per fit (history --json contract), with how its hyperparameters were set
    (``hyper_mode``), whether this fit learnt them (``relearnt``) and, where it did, the change in
    the model's expected accuracy against the fit before (``accuracy_change``)."""
    fits = store.fits()
    return _with_audit(store, _fit_rows(fits, store.snapshots()), fits)


def _with_audit(store, rows, fits) -> list[dict]:
    """Each history row with ``audit``: the audit's n, accuracy, Wilson interval and the model's
    own estimate for the same items, as they stood at the row's fit (None without an audit)."""
    mark_of = {f.id: f.event_mark for f in fits}
    for row, doc in zip(rows, audit.as_of_marks(store, [mark_of.get(r["fit"], -1) for r in rows])):
        row["audit"] = doc
    return rows


def _fit_rows(fits, snapshots) -> list[dict]:
    """The rows of :func:`history` from the store's fits and snapshots."""
    fits = {f.id: f for f in fits}
    rows = []
    before = None
    for s in snapshots:
        fit = fits.get(s["fit_id"])
        relearnt = bool(fit and fit.full_optimize)
        change = (s["expected_accuracy"] - before["expected_accuracy"]
                  if relearnt and before is not None else None)
        rows.append({
            "fit": s["fit_id"],
            "session": fit.session_id if fit else None,
            "n_labels": fit.n_labels if fit else None,
            "mean_entropy": s["mean_entropy"],
            "n_uncertain": s["n_uncertain"],
            "expected_accuracy": s["expected_accuracy"],
            "kappa": s["agreement_kappa"],
            "at": fit.at if fit else None,
            "hyper_mode": fit.hyper_mode if fit else None,
            "hyper_mode_before": before["hyper_mode"] if before else None,
            "relearnt": relearnt,
            "accuracy_change": change,
            # a large pool's figures: estimates from the seeded sample, with standard errors
            "sample": (fit.info or {}).get("summary") if fit else None,
        })
        before = rows[-1]
    return rows


GROUPINGS = ("fit", "session", "day")
"""How `history` groups its rows: one per fit, per sitting, per calendar day."""

GROUP_WORDS = {"fit": "fit", "session": "sitting", "day": "day"}
"""The word for one group of each grouping, for titles and axes."""


class UnknownTimeZoneError(LabelqError):
    """`history --tz` names no time zone the system knows."""


class UnknownGroupingError(LabelqError):
    """`history --by` names no grouping."""


def history_zone(name: Optional[str] = None):
    """The time zone days and sittings are shown in: the IANA zone ``name`` (``--tz``), else
    the one ``$TZ`` names, else the process's local zone (None); see
    labelq.review.grouping.resolve_zone."""
    try:
        return resolve_zone(name)
    except ValueError as exc:
        raise UnknownTimeZoneError(str(exc)) from None


def history_view(store, by: Optional[str] = None, zone=None) -> dict:
    """The history grouped ``by`` "fit", "session" (sittings) or "day" (calendar days in
    ``zone``, a tzinfo or None for the local zone); with ``by`` None, "day" once the label
    events span more than one calendar day, else "fit".

    Returns ``{"by": ..., "time_zone": name of the zone, "rows": [...]}``: under "fit" the rows
    of :func:`history`, otherwise those of :func:`history_groups`.
    """
    if by is not None and by not in GROUPINGS:
        raise UnknownGroupingError(f"cannot group the history by {by!r}; choose one of "
                                   f"{', '.join(GROUPINGS)}")
    events = store.label_event_log()
    if by is None:
        days = calendar_days([parse_utc(e["at"]) for e in events], zone)
        by = "day" if len(days) > 1 else "fit"
    fits = store.fits()
    fit_rows = _with_audit(store, _fit_rows(fits, store.snapshots()), fits)
    rows = (fit_rows if by == "fit" else
            history_groups(events, fits, fit_rows, by, zone))
    return {"by": by, "time_zone": zone_label(zone), "rows": rows}


def history_groups(events, fits, fit_rows, by: str, zone) -> list[dict]:
    """One row per sitting (``by="session"``) or calendar day (``by="day"``) of the label
    events, earliest first.

    ``events`` is ``store.label_event_log()``, ``fits`` ``store.fits()`` and ``fit_rows`` the
    rows of :func:`history`. A sitting is a run of label events (undos included) by one labeller,
    each less than 30 minutes after that labeller's previous one (labelq.review.grouping); a day
    is a local date in ``zone``. A fit belongs to the group of the latest label event it saw (its
    event mark), so a refit made later (after a rebuild, say) stays with the labels it was made
    from; fits made before any label belong to no group.

    Keys of each row:
    - ``group``: the local date (``2026-12-01``) or the sitting's local start
      (``2026-12-01 22:03``); ``by``: the sitting's labeller (None for a day);
    - ``start``, ``end``: the first and last label event, ISO-8601 local time with its offset;
    - ``labels_given``: the group's labels that still stand (a label later undone, or replaced
      by a relabel, does not count), so the column adds up to the labels in the store now;
    - ``labels_total``: labels in the store after the group's last event, as they stood then;
    - ``mean_entropy`` (bits), ``n_uncertain``, ``expected_accuracy``: the snapshot of the
      group's last fit (None when the group has no fit);
    - ``entropy_change``: mean entropy against the end of the nearest earlier group with a fit
      (None for the first);
    - ``relearnt``: whether any fit of the group learnt its hyperparameters;
    - ``fits``: the ids of the group's fits.
    Cohen's kappa between the ends of two groups is not given: only each fit's agreement with
    the fit just before it is stored (``--by fit``), and older fits' predictions are not kept.
    """
    times = [parse_utc(e["at"]) for e in events]
    groups = (calendar_days(times, zone) if by == "day" else
              sittings(times, [e["by"] for e in events], zone))
    group_of = {i: g for g, group in enumerate(groups) for i in group.members}
    standing, still_standing = _labels_standing(events)
    marks = [e["mark"] for e in events]
    mark_of = {f.id: f.event_mark for f in fits}
    fits_of = [[] for _ in groups]
    for row in fit_rows:
        seen = bisect_right(marks, mark_of.get(row["fit"], -1)) - 1
        if seen >= 0:
            fits_of[group_of[seen]].append(row)
    rows, before = [], None
    for group, members in zip(groups, fits_of):
        last = members[-1] if members else None
        entropy = last["mean_entropy"] if last else None
        rows.append({
            "group": group.name,
            "by": group.by,
            "start": local(group.start, zone).isoformat(),
            "end": local(group.end, zone).isoformat(),
            "labels_given": sum(events[i]["id"] in still_standing for i in group.members),
            "labels_total": standing[max(group.members)],
            "mean_entropy": entropy,
            "entropy_change": (entropy - before if entropy is not None and before is not None
                               else None),
            "n_uncertain": last["n_uncertain"] if last else None,
            "expected_accuracy": last["expected_accuracy"] if last else None,
            "relearnt": any(r["relearnt"] for r in members),
            "audit": last["audit"] if last else None,
            "sample": last["sample"] if last else None,
            "fits": [r["fit"] for r in members],
        })
        before = entropy if entropy is not None else before
    return rows


def _labels_standing(events) -> tuple[list[int], set[int]]:
    """Replay the label events (id order): the number of labelled candidates after each event,
    and the ids of the label events standing at the end (each candidate's latest label not
    retracted, as the store's current labels)."""
    live: dict[int, set[int]] = {}
    count, counts = 0, []
    for e in events:
        held = live.setdefault(e["candidate_id"], set())
        had = bool(held)
        if e["retracts_id"] is None:
            held.add(e["id"])
        else:
            held.discard(e["retracts_id"])
        count += bool(held) - had
        counts.append(count)
    return counts, {max(held) for held in live.values() if held}


def history_series(view) -> dict:
    """Mean entropy and expected accuracy, for charts: against labels given under ``by="fit"``,
    against the group's index (1, 2, ... as in the table) otherwise; groups without a fit are
    left out."""
    rows = [r for r in view["rows"] if r["mean_entropy"] is not None]
    if view["by"] == "fit":
        xs = [r["n_labels"] for r in rows]
    else:
        xs = [i for i, r in enumerate(view["rows"], start=1) if r["mean_entropy"] is not None]
    return {"mean entropy (bits)": (xs, [r["mean_entropy"] for r in rows]),
            "expected accuracy": (xs, [r["expected_accuracy"] for r in rows])}


HISTORY_TITLE = "Pool uncertainty by labels given"
REPLAY_TITLE = "Accuracy over the pool by labels given"


def history_chart(view) -> str:
    """The history as plain-text charts, one panel per quantity on its own scale (each at most
    80 columns); the x axis is labels given, or the day's or sitting's number in the table."""
    word = GROUP_WORDS[view["by"]]
    along, x_label = (("labels given", "labels") if view["by"] == "fit" else
                      (f"{word}", f"{word} (# in the table)"))
    return "\n".join(render_chart({name: xy}, f"{name} by {along}", x_label, name, height=8)
                     for name, xy in history_series(view).items())


def history_png(view, path: Path) -> None:
    """The history chart as a PNG, one panel per quantity (needs the [plot] extra); under
    ``day`` and ``session`` the x axis is the date (the sitting's start) in the view's zone."""
    if view["by"] == "fit":
        panels = [(name, xs, ys) for name, (xs, ys) in history_series(view).items()]
        write_panels_png(check_output(path), panels, HISTORY_TITLE, "labels")
        return
    word = GROUP_WORDS[view["by"]]
    rows = [r for r in view["rows"] if r["mean_entropy"] is not None]
    # wall-clock times without the offset: matplotlib then labels them as the user reads them
    when = [(date.fromisoformat(r["group"]) if view["by"] == "day" else
             datetime.fromisoformat(r["start"]).replace(tzinfo=None)) for r in rows]
    panels = [(name, when, ys) for name, (_, ys) in history_series(view).items()]
    x_label = f"{'day' if view['by'] == 'day' else 'sitting start'}, {view['time_zone']}"
    write_dated_panels_png(check_output(path), panels, f"Pool uncertainty by {word}", x_label,
                           whole_days=view["by"] == "day")


def _model(fit):
    """The fit's model (GPClassifier or GridAverage), None when it has none."""
    if fit is None or fit.model is None:
        return None
    return gp.load_model(fit.model)


def candidate_view(store, key: str) -> dict:
    """One candidate: metadata, raw features, p per class with a 5-95% interval, nearest labelled;
    its current label's ``by``, ``at`` (UTC) and ``note`` (None when unlabelled), and
    ``history``: its label and skip events oldest first (Store.item_history)."""
    rec = store.candidate(key)
    fit = ensure_fit(store)
    view = {"key": rec.key, "meta": rec.meta, "features": rec.features, "label": rec.label,
            "skipped": rec.skipped, "rank": None, "p": {}, "nearest": []}
    chunk = next(store.scores([rec.id]), None)
    if chunk is not None and chunk.rank[0] > 0:
        view["rank"] = int(chunk.rank[0])
    clf = _model(fit)
    mean_, scale = store.feature_scaling()
    x = (np.array([list(rec.features.values())]) - mean_) / scale
    classes = store.classes
    if clf is not None:
        proba = clf.predict_proba(x)[0]
        m, v = clf.latent(x)
        for k, c in enumerate(classes):
            lo, hi = gp.probability_interval(m, v, np.array([k]), clf.likelihood_)
            view["p"][c] = {"p": float(proba[k]), "low": float(lo[0]), "high": float(hi[0])}
    labels = store.current_labels()
    mine = next((r for r in labels if r.candidate_id == rec.id), None)
    view["by"], view["at"], view["note"] = (mine.by, mine.at, mine.note) if mine else (None,) * 3
    view["history"] = store.item_history(rec.key)
    if labels:
        ids = np.array([r.candidate_id for r in labels], dtype=np.int64)
        X = (store.features(ids) - mean_) / scale
        dist = np.sqrt(((X - x) ** 2).sum(axis=1))
        for j in np.argsort(dist, kind="stable")[:3]:
            if labels[j].key != rec.key:
                view["nearest"].append({"key": labels[j].key, "class": labels[j].class_,
                                        "distance": float(dist[j])})
    return view


def export(store, what: str, as_json: bool = False, progress=None) -> str:
    """The text of `export labels|predictions|model` (CSV, or JSON with ``as_json``);
    ``progress(done, total)`` is called after each chunk of predictions."""
    if what == "labels":
        rows = [{"key": r.key, "class": r.class_, "by": r.by, "at": r.at, "note": r.note or ""}
                for r in store.current_labels()]
        return _table_text(rows, ["key", "class", "by", "at", "note"], as_json)
    if what == "predictions":
        ensure_fit(store)
        return _predictions_text(store, as_json, progress)
    if what == "model":
        clf = _model(ensure_fit(store))
        if clf is None:
            raise NothingFittedError("no model yet: label candidates of at least two classes first")
        mean_, scale = store.feature_scaling()
        # self-contained: load_model(FILE).predict_proba takes the raw feature values
        doc = with_input_scaling(clf.to_dict(), mean_, scale)
        doc["feature_names"] = store.feature_names
        return json.dumps(doc, indent=1) + "\n"
    raise UnknownExportError(f"cannot export {what!r}; choose labels, predictions or model")


def _predictions_text(store, as_json: bool, progress=None) -> str:
    classes = store.classes
    given = {r.candidate_id: r.class_ for r in store.current_labels()}
    columns = ["key", "predicted"] + [f"p_{c}" for c in classes] + ["p_low", "p_high", "entropy",
                                                                     "labelled", "label"]
    rows, meta_cols = [], []
    exact = ExactScores(store)
    total, done = store.counts()["candidates"], 0
    for chunk in map(exact, store.scores(chunk_size=20_000)):
        done += len(chunk.candidate_id)
        if progress is not None:
            progress(done, total)
        keys = store.keys(chunk.candidate_id)
        metas = store.metas(chunk.candidate_id)
        for i, cid in enumerate(chunk.candidate_id):
            row = {"key": keys[i], "predicted": classes[int(chunk.predicted[i])]}
            for c, p in zip(classes, chunk.probabilities[i]):
                row[f"p_{c}"] = round(float(p), 6)
            row["p_low"] = round(float(chunk.p_low[i]), 6)
            row["p_high"] = round(float(chunk.p_high[i]), 6)
            row["entropy"] = round(float(chunk.entropy[i]), 6)
            row["labelled"] = int(int(cid) in given)
            row["label"] = given.get(int(cid))  # the labeller's class; empty in CSV, null in JSON
            for k, v in metas[i].items():
                if k not in meta_cols:
                    meta_cols.append(k)
                row.setdefault(k, v)
            rows.append(row)
    return _table_text(rows, columns + [m for m in meta_cols if m not in columns], as_json)


class ExactScores:
    """Make a chunk of the last fit's stored scores exact in double precision: rows stored with
    a bounded latent variance (a large pool's fit, labelq.policy.bounded), and every row of a
    fit scored in mixed precision (within 2e-5 of double; GPClassifier.predict_pool), are
    computed again from the fit's model and settings with the scoring the fit uses for its exact
    rows (every member's latent in double precision)."""

    def __init__(self, store):
        self.store = store
        self._parts = None

    def __call__(self, chunk):
        from dataclasses import replace

        if self._parts is None:
            from labelq.policy import PolicySettings

            fit = self.store.last_fit()
            model = _model(fit)
            double = bool((fit.info or {}).get("double"))  # its exact rows are in double
            policy = None if model is None else PolicySettings.from_dict(fit.settings)
            self._parts = (model, double, policy, *self.store.feature_scaling())
        model, double, policy, mean_, scale = self._parts
        if model is None:  # before any model: the stored uniform probabilities are exact
            return chunk
        exact = chunk.exact if double and chunk.exact is not None else np.zeros(
            len(chunk.candidate_id), dtype=bool)
        exact = exact & np.isfinite(chunk.p_low)  # a large pool keeps intervals for its head only
        if exact.all():
            return chunk
        from labelq.policy import score_pool
        from labelq.policy.bounded import in_double
        from labelq.review.blas_threads import single_blas_thread

        redo = np.flatnonzero(~exact)
        X = (self.store.features(chunk.candidate_id[redo]) - mean_) / scale
        with single_blas_thread():
            fresh = score_pool(in_double(model), X, policy, "margin",
                               np.ones(len(redo), dtype=bool), full=False,
                               n_jobs=settings.POOL_WORKERS)
        low, high = fresh.interval()
        values = {name: getattr(chunk, name).copy() for name in
                  ("probabilities", "predicted", "p_top", "p_low", "p_high", "entropy")}
        for name, new in (("probabilities", fresh.proba), ("predicted", fresh.predicted),
                          ("p_top", fresh.p_top), ("p_low", low), ("p_high", high),
                          ("entropy", fresh.entropy)):
            values[name][redo] = new
        return replace(chunk, exact=np.ones(len(chunk.exact), dtype=bool), **values)


def _table_text(rows, columns, as_json) -> str:
    if as_json:
        return json.dumps(rows, indent=1, ensure_ascii=False) + "\n"
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=columns, extrasaction="ignore", lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    return buf.getvalue()


def write_text(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` atomically (a temporary file renamed into place)."""
    path = check_output(path)
    try:
        fd, tmp = tempfile.mkstemp(dir=path.parent if str(path.parent) else ".", prefix=".labelq-")
    except OSError as exc:
        raise OutputPathError(f"cannot write {path}: {exc.strerror or exc}") from None
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except OSError as exc:
        os.unlink(tmp) if os.path.exists(tmp) else None
        raise OutputPathError(f"cannot write {path}: {exc.strerror or exc}") from None
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


class SimulationInputError(LabelqError):
    """The replay file cannot be replayed (too few rows or classes)."""


def read_truth(path: Path, id_column: str, truth: str) -> dict:
    """Key -> true class from a CSV with columns ``id_column`` and ``truth``; one clear error
    naming the file, line and column for a missing column, an empty cell or a repeated key."""
    try:
        with open(path, newline="", encoding="utf-8-sig") as handle:
            reader = csv.DictReader(handle)
            header = reader.fieldnames or []
            for column in (id_column, truth):
                if column not in header:
                    raise SimulationInputError(
                        f"{path}: no column {column!r} (columns: {', '.join(header) or 'none'})")
            found = {}
            for line, row in enumerate(reader, start=2):
                key, value = (row.get(id_column) or "").strip(), (row.get(truth) or "").strip()
                if not key or not value:
                    empty = id_column if not key else truth
                    raise SimulationInputError(f"{path}, line {line}, column {empty!r}: empty cell")
                if key in found:
                    raise SimulationInputError(
                        f"{path}, line {line}, column {id_column!r}: key {key!r} appears twice")
                found[key] = value
    except OSError as exc:
        raise SimulationInputError(f"{path}: cannot read ({exc.strerror or exc})") from None
    except UnicodeDecodeError:
        raise SimulationInputError(f"{path}: not UTF-8 text") from None
    return found


def simulate_csv(path: Path, id_column: str, truth: str, strategies, budget: int, seeds: int,
                 features=None, truth_file: Optional[Path] = None, reference_rows=1000,
                 progress=None) -> dict:
    """Replay ``strategies`` on a fully labelled CSV with the label loop's own policy (see
    labelq.review.simulate); the true classes come from column ``truth`` of ``path`` or, with
    ``truth_file``, of that file joined by ``id_column``."""
    if truth_file is None:
        table = read_candidates(path, id_column, features=features, labels_column=truth)
        labels = table.labels
        if any(v is None for v in labels):
            missing = table.keys[[v is None for v in labels].index(True)]
            raise SimulationInputError(f"{path}: row {missing!r} has no value in column {truth!r}")
    else:
        table = read_candidates(path, id_column, features=features)
        known = read_truth(truth_file, id_column, truth)
        absent = [k for k in table.keys if k not in known]
        if absent:
            raise SimulationInputError(f"{truth_file}: no {truth!r} for key {absent[0]!r} of {path} "
                                       f"({len(absent):,} keys missing)")
        labels = [known[k] for k in table.keys]
    y = np.array(labels, dtype=object)
    if len(set(labels)) < 2:
        raise SimulationInputError(f"{truth_file or path}: column {truth!r} holds fewer than two classes")
    if budget > len(y):
        raise SimulationInputError(f"{path}: {len(y)} rows cannot supply a budget of {budget}")
    result = review.simulate(table.X, y, strategies=tuple(strategies), budget=budget,
                      seeds=tuple(range(seeds)), settings=settings.POLICY,
                      reference_rows=reference_rows, progress=progress)
    result["file"] = str(path)
    return result


def simulation_series(result) -> dict:
    """Mean accuracy against labels per strategy, for charts."""
    return {name: (s["labels"], s["accuracy_mean"]) for name, s in result["strategies"].items()}


def simulation_chart(result) -> str:
    """Learning curves as a plain-text chart."""
    return render_chart(simulation_series(result), REPLAY_TITLE, "labels", "accuracy")


def simulate_png(result, path: Path) -> None:
    """Learning curves as a PNG (needs the [plot] extra)."""
    write_png(check_output(path), simulation_series(result), REPLAY_TITLE, "labels", "accuracy")


def latest_mean_entropy(store) -> Optional[float]:
    """The newest snapshot's mean entropy over unlabelled candidates (bits), or None."""
    snaps = store.snapshots()
    return snaps[-1]["mean_entropy"] if snaps else None
