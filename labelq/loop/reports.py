"""Read-only views of a store for people and scripts: status, history, one candidate, exports, and
the strategy replay on a labelled CSV. Each returns plain data (dicts, lists, text)."""

from __future__ import annotations

import csv
import io
import json
import os
import tempfile
from pathlib import Path
from typing import Optional

import numpy as np

from labelq.errors import LabelqError
from labelq.gp.averaging import load_model
from labelq.gp.persistence import with_input_scaling
from labelq.gp.links import probability_interval
from labelq.ingest import read_candidates
from labelq.loop import settings
from labelq.loop.refit import ensure_fit, is_current
from labelq.review import render_chart, simulate, stopping_advice, write_png
from labelq.review.png import write_panels_png


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


def status(store) -> dict:
    """Counts, the last fit, the latest snapshot and the stopping advice (status --json)."""
    counts = store.counts()
    per_class = label_counts(store)
    snaps = {s["fit_id"]: s for s in store.snapshots()}
    kappas = [snaps.get(f.id, {}).get("agreement_kappa") for f in _learning_fits(store)
              if f.strategy != "cold-start"]
    advice = stopping_advice(kappas, per_class)
    last = store.last_fit()
    snap = snaps.get(last.id) if last is not None else None
    learnt = relearns(history(store))
    return {
        "db": str(store.path),
        "candidates": counts["candidates"],
        "labelled": counts["labelled"],
        "skipped": counts["skipped"],
        "classes": per_class,
        "features": store.feature_names,
        "last_fit": _fit_summary(last),
        "stale": not is_current(store, last),
        "snapshot": _snapshot_doc(snap),
        "last_relearn": learnt[-1] if learnt else None,
        "advice": {"stop": advice.stop, "message": advice.message, "figures": advice.figures,
                   "flagged_classes": advice.flagged_classes},
        "caution": "Probabilities are the model's estimates from the labels given so far.",
    }


def _snapshot_doc(snap) -> Optional[dict]:
    if snap is None:
        return None
    return {"mean_entropy": snap["mean_entropy"], "n_uncertain": snap["n_uncertain"],
            "expected_accuracy": snap["expected_accuracy"], "kappa": snap["agreement_kappa"],
            "class_counts": snap["class_counts"]}


def history(store) -> list[dict]:
    """One row per fit (history --json contract), with how its hyperparameters were set
    (``hyper_mode``), whether this fit learnt them (``relearnt``) and, where it did, the change in
    the model's expected accuracy against the fit before (``accuracy_change``)."""
    fits = {f.id: f for f in store.fits()}
    rows = []
    before = None
    for s in store.snapshots():
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
        })
        before = rows[-1]
    return rows


def history_series(rows) -> dict:
    """Mean entropy and expected accuracy against labels given, for charts."""
    xs = [r["n_labels"] for r in rows]
    return {"mean entropy (bits)": (xs, [r["mean_entropy"] for r in rows]),
            "expected accuracy": (xs, [r["expected_accuracy"] for r in rows])}


HISTORY_TITLE = "Pool uncertainty by labels given"
REPLAY_TITLE = "Accuracy over the pool by labels given"


def history_chart(rows) -> str:
    """The history as plain-text charts, one panel per quantity on its own scale (each at most
    80 columns)."""
    return "\n".join(render_chart({name: xy}, f"{name} by labels given", "labels", name,
                                   height=8)
                      for name, xy in history_series(rows).items())


def history_png(rows, path: Path) -> None:
    """The history chart as a PNG, one panel per quantity (needs the [plot] extra)."""
    panels = [(name, xs, ys) for name, (xs, ys) in history_series(rows).items()]
    write_panels_png(check_output(path), panels, HISTORY_TITLE, "labels")


def _model(fit):
    """The fit's model (GPClassifier or GridAverage), None when it has none."""
    if fit is None or fit.model is None:
        return None
    return load_model(fit.model)


def candidate_view(store, key: str) -> dict:
    """One candidate: metadata, raw features, p per class with a 5-95% interval, nearest labelled."""
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
            lo, hi = probability_interval(m, v, np.array([k]), clf.likelihood_)
            view["p"][c] = {"p": float(proba[k]), "low": float(lo[0]), "high": float(hi[0])}
    labels = store.current_labels()
    if labels:
        ids = np.array([r.candidate_id for r in labels], dtype=np.int64)
        X = (store.features(ids) - mean_) / scale
        dist = np.sqrt(((X - x) ** 2).sum(axis=1))
        for j in np.argsort(dist, kind="stable")[:3]:
            if labels[j].key != rec.key:
                view["nearest"].append({"key": labels[j].key, "class": labels[j].class_,
                                        "distance": float(dist[j])})
    return view


def export(store, what: str, as_json: bool = False) -> str:
    """The text of `export labels|predictions|model` (CSV, or JSON with ``as_json``)."""
    if what == "labels":
        rows = [{"key": r.key, "class": r.class_, "by": r.by, "at": r.at, "note": r.note or ""}
                for r in store.current_labels()]
        return _table_text(rows, ["key", "class", "by", "at", "note"], as_json)
    if what == "predictions":
        ensure_fit(store)
        return _predictions_text(store, as_json)
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


def _predictions_text(store, as_json: bool) -> str:
    classes = store.classes
    labelled = {r.candidate_id for r in store.current_labels()}
    columns = ["key", "predicted"] + [f"p_{c}" for c in classes] + ["p_low", "p_high", "entropy",
                                                                     "labelled"]
    rows, meta_cols = [], []
    for chunk in store.scores():
        keys = store.keys(chunk.candidate_id)
        metas = store.metas(chunk.candidate_id)
        for i, cid in enumerate(chunk.candidate_id):
            row = {"key": keys[i], "predicted": classes[int(chunk.predicted[i])]}
            for c, p in zip(classes, chunk.probabilities[i]):
                row[f"p_{c}"] = round(float(p), 6)
            row["p_low"] = round(float(chunk.p_low[i]), 6)
            row["p_high"] = round(float(chunk.p_high[i]), 6)
            row["entropy"] = round(float(chunk.entropy[i]), 6)
            row["labelled"] = int(int(cid) in labelled)
            for k, v in metas[i].items():
                if k not in meta_cols:
                    meta_cols.append(k)
                row.setdefault(k, v)
            rows.append(row)
    return _table_text(rows, columns + [m for m in meta_cols if m not in columns], as_json)


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
    result = simulate(table.X, y, strategies=tuple(strategies), budget=budget,
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
