"""The current labels for review: who gave which class when, and how likely the current model
finds each of them (plain data for `labelq labels`)."""

from __future__ import annotations

from collections import Counter
from typing import Optional

import numpy as np

from labelq.loop.refit import Progress, ensure_fit
from labelq.store.classes import resolve_class


def label_list(store, class_: Optional[str] = None, by: Optional[str] = None,
               disagree: bool = False, n: Optional[int] = None, progress: Progress = None) -> dict:
    """The current labels, filtered to class ``class_`` (matched by resolve_class) and labeller
    ``by`` (exact name), newest label first; with ``disagree``, by ``p_model`` ascending (ties
    newest first). The first ``n`` rows are kept (all when None).

    Returns ``{"rows", "matched", "per_labeller", "fit", "class"}``: ``rows`` are
    ``{"key", "class", "by", "at", "note", "p_model"}`` with ``at`` UTC as stored and ``p_model``
    the last fit's probability of the labelled class to 6 decimals, as `export predictions`
    gives it (refitting first, reporting to ``progress``, when the store changed since that fit;
    None where the fit has no score for the candidate); ``matched`` counts the labels the filters
    kept before ``n``, ``per_labeller`` those per labeller (most first, then by name); ``fit`` is
    the fit's id (None when there are no labels); ``class`` the resolved class (None for all).
    """
    classes = store.classes
    wanted = None if class_ is None else resolve_class(class_, classes)
    labels = [r for r in store.current_labels()
              if (wanted is None or r.class_ == wanted) and (by is None or r.by == by)]
    labels.reverse()  # current_labels is in event order: newest first
    fit = ensure_fit(store, progress=progress) if labels else None
    p_model = labelled_class_probability(store, labels, classes)
    if disagree:
        # Reviewing the labels the model finds least likely first is a common way to catch
        # slips (common practice); a stable sort keeps ties newest first.
        order = np.argsort(np.where(np.isnan(p_model), np.inf, p_model), kind="stable")
    else:
        order = np.arange(len(labels))
    rows = [{"key": labels[i].key, "class": labels[i].class_, "by": labels[i].by,
             "at": labels[i].at, "note": labels[i].note,
             "p_model": None if np.isnan(p_model[i]) else round(float(p_model[i]), 6)}
            for i in order[:n]]
    counts = Counter(r.by for r in labels)
    per_labeller = dict(sorted(counts.items(), key=lambda item: (-item[1], item[0])))
    return {"rows": rows, "matched": len(labels), "per_labeller": per_labeller,
            "fit": fit.id if fit is not None else None, "class": wanted}


def labelled_class_probability(store, labels, classes) -> np.ndarray:
    """(len(labels),) the last fit's probability of each label's class for its candidate, from
    the stored scores (one row per candidate of the pool); NaN where there is no score."""
    ids = np.array([r.candidate_id for r in labels], dtype=np.int64)
    position = {c: k for k, c in enumerate(classes)}
    given = np.array([position[r.class_] for r in labels], dtype=np.int64)
    p = np.full(len(ids), np.nan)
    if not len(ids):
        return p
    by_id = np.argsort(ids, kind="stable")
    for chunk in store.scores(ids):
        rows = by_id[np.searchsorted(ids[by_id], chunk.candidate_id)]
        p[rows] = chunk.probabilities[np.arange(len(rows)), given[rows]]
    return p
