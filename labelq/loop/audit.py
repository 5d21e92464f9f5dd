"""Audits: draw a random sample to measure the model's accuracy, and report what it measured.

Labels chosen by the queue sit where the model is unsure, so no accuracy computed on them says
how good the predictions for the rest of the pool are. An audit labels a seeded, uniformly random
sample of unlabelled candidates; each label is scored against the prediction the model made for
that item before the label (test, then train: the prediction is copied inside the label's
transaction, labelq.store.audits), then joins the training labels like any other. What the audit
measures is the accuracy of the models in use while its items were labelled, on candidates drawn
at random from the pool as it was when the audit was drawn.
"""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import numpy as np

from labelq.errors import LabelqError
from labelq.loop import settings
from labelq.loop.refit import ensure_fit
from labelq.review.calibration import (bins_ece, calibration_flag, reliability_table,
                                       summarise_audit, write_reliability_png)


class NoModelForAuditError(LabelqError):
    """An audit was asked for before there is a model whose predictions it could test."""


def draw(store, n: int, by: str, seed: Optional[int] = None, progress=None, double=False):
    """Draw an audit of ``n`` unlabelled candidates (labelq.store.audits.AuditDraw), after
    bringing the model up to date (its predictions are what the audit tests). Before two
    classes have labels there is no model: an error, and nothing is written."""
    if len({r.class_ for r in store.current_labels()}) < 2:
        fit = None
    else:
        fit = ensure_fit(store, progress=progress)
    if fit is None or (fit.info or {}).get("cold_start") or fit.strategy == "cold-start":
        raise NoModelForAuditError(
            "an audit tests the model's predictions, and there is no model yet: label "
            "candidates of at least two classes first")
    return store.draw_audit(n, by, seed, double=double)


def _figures(items, mark: Optional[int] = None) -> dict:
    """Audit figures from ``items`` (store.audit_items()), as of event ``mark`` if given."""
    scored = [i for i in items if i.label is not None and i.predicted is not None
              and (mark is None or i.scored_mark <= mark)]
    correct = np.array([i.predicted == i.label for i in scored], dtype=bool)
    confidence = np.array([i.p_top for i in scored], dtype=float)
    summary = summarise_audit(correct, confidence if len(scored) else None)
    doc = summary.to_dict()
    doc["calibration"] = calibration_flag(summary)
    return doc, correct, confidence


def report(store) -> Optional[dict]:
    """The audit so far (status --json key ``audit``), None when no audit was ever drawn.

    Keys: ``n`` (items scored), ``accuracy`` (share right), ``low``, ``high`` (Wilson 95%
    interval), ``expected`` (the model's own estimate for the same items: the mean of its top
    class probability when it predicted them), ``calibration`` ("over-confident",
    "under-confident" or None), ``ece`` (expected calibration error, None before any item),
    ``bins`` (the reliability table), ``drawn``, ``pending`` (no label yet), ``skipped`` (pending
    and skipped), ``unscored`` (labelled while there was no model to predict them).
    """
    items = store.audit_items()
    if not items:
        return None
    doc, correct, confidence = _figures(items)
    n_bins = settings.AUDIT_BINS if doc["n"] >= 100 else settings.AUDIT_BINS_SMALL
    bins = reliability_table(confidence, correct, n_bins) if doc["n"] else []
    doc.update({
        "ece": bins_ece(bins) if bins else None,
        "bins": [{"low": b.low, "high": b.high, "count": b.count,
                  "mean_confidence": b.mean_confidence,
                  "observed_frequency": b.observed_frequency} for b in bins],
        "drawn": len(items),
        "pending": sum(i.label is None for i in items),
        "skipped": store.skipped_audit_items(),
        "unscored": sum(i.label is not None and i.predicted is None for i in items),
    })
    return doc


def agreement(store) -> Optional[dict]:
    """Agreement of two labellers on the items of double audits (status --json key
    ``agreement``): n items with two labellers' labels, Cohen's kappa with its standard error
    and 95% interval (Fleiss, Cohen & Everitt 1969; labelq.review.kappa.kappa_interval), the
    share of items they agreed on, and the pairs of labellers; None before any such item."""
    from labelq.review.kappa import kappa_interval

    pairs = store.double_pairs()
    if not pairs:
        return None
    a = [p[0] for p in pairs]
    b = [p[1] for p in pairs]
    kappa, se, low, high = kappa_interval(a, b)
    labellers = sorted({f"{p[2]}/{p[3]}" for p in pairs})
    return {"n": len(pairs), "kappa": kappa, "se": se, "low": low, "high": high,
            "agreed": sum(x == y for x, y in zip(a, b)) / len(pairs), "labellers": labellers}


def as_of_marks(store, marks) -> list[Optional[dict]]:
    """The audit's n, accuracy, low and high as they stood at each event mark (history rows);
    None for every mark when no audit was drawn."""
    items = store.audit_items()
    if not items:
        return [None for _ in marks]
    out = []
    for mark in marks:
        doc, _, _ = _figures(items, mark)
        out.append({k: doc[k] for k in ("n", "accuracy", "low", "high", "expected")})
    return out


def plot(doc: dict, path: Path) -> None:
    """The reliability diagram of an audit report as a PNG (needs the [plot] extra)."""
    from labelq.review.calibration import ReliabilityBin

    bins = [ReliabilityBin(**b) for b in doc["bins"]]
    write_reliability_png(bins, path, title=f"Audit: {doc['n']} items scored")
