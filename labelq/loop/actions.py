"""What the user does to a store, each as one plain function: the event is committed first, then
the model work follows (so a crash during a refit never loses a label)."""

from __future__ import annotations

import getpass
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Optional

from labelq.ingest import read_candidates
from labelq.loop import settings
from labelq.loop.refit import Progress, asked_strategy, ensure_fit
from labelq.store import Store


def default_person() -> str:
    """Who is labelling: $LABELQ_BY, else the login name."""
    name = os.environ.get("LABELQ_BY")
    if name:
        return name
    try:
        return getpass.getuser()
    except Exception:  # no login name in some containers
        return "unknown"


def create_store(path: Path, classes: list[str]) -> Store:
    """A new, empty store at ``path`` for the given classes."""
    return Store.create(path, classes)


@dataclass
class ImportResult:
    """What an import added, how the file's columns were split and what was done with empty
    feature cells (``missing``: "error", "drop-row" or "median"; counts per feature column)."""

    candidates: int
    labels: int
    features: list[str]
    metadata: list[str]
    feature_rule: str
    missing: str
    missing_cells: dict[str, int]
    dropped_rows: int
    first_dropped_line: Optional[int]
    filled_cells: dict[str, int]
    filled_with: dict[str, float]


def import_candidates(store: Store, csv_path: Path, id_column: str, features=None,
                      labels_column: Optional[str] = None, by: str = "import",
                      progress=None, meta=None, missing: str = "error") -> ImportResult:
    """Read, validate and add a CSV of candidates in one transaction (nothing added on error).

    ``features``/``meta`` set the split of the columns and ``missing`` the treatment of empty
    feature cells, as in :func:`labelq.ingest.read_candidates`.
    """
    table = read_candidates(csv_path, id_column, features=features, labels_column=labels_column,
                            expected_features=store.feature_names or None, progress=progress,
                            meta=meta, missing=missing)
    store.add_candidates(table.keys, table.X, table.meta, table.feature_names,
                         labels=table.labels, by=by)
    n_labels = sum(1 for v in (table.labels or []) if v is not None)
    gaps = table.missing
    return ImportResult(len(table.keys), n_labels, table.feature_names, table.meta_columns,
                        table.feature_rule, gaps.treatment, gaps.per_column, gaps.dropped_rows,
                        gaps.first_dropped_line, gaps.filled_cells, gaps.filled_with)


@dataclass
class StepResult:
    """An event and the fit made after it."""

    event: object
    fit: object


def label(store: Store, key: str, class_: str, by: str, note: Optional[str] = None,
          relabel: bool = False, strategy: Optional[str] = None, session_id=None,
          progress: Progress = None) -> StepResult:
    """Record a label (committed at once), then refit, re-rank and snapshot."""
    event = store.label(key, class_, by, note=note, relabel=relabel)
    store.release(by)
    return StepResult(event, ensure_fit(store, strategy, session_id=session_id, progress=progress))


def skip(store: Store, key: str, by: str, strategy: Optional[str] = None, session_id=None,
         progress: Progress = None) -> StepResult:
    """Record a skip (the candidate sinks to the bottom of the queue), then re-rank."""
    event = store.skip(key, by)
    store.release(by)
    return StepResult(event, ensure_fit(store, strategy, session_id=session_id, progress=progress))


def undo(store: Store, by: str, strategy: Optional[str] = None, session_id=None,
         progress: Progress = None) -> StepResult:
    """Retract the most recent label or skip (an appended retraction), then refit."""
    event = store.undo(by)
    return StepResult(event, ensure_fit(store, strategy, session_id=session_id, progress=progress))


CLAIM_ATTEMPTS = 5
"""How often `next_queue` re-reads the queue when the head it read was claimed meanwhile."""


@dataclass
class QueueRow:
    """One candidate in a queue as shown: its rank, class probabilities and the strategy's score."""

    rank: int
    candidate_id: int
    key: str
    predicted: int
    probabilities: object
    p_top: float
    score: float
    meta: dict
    skipped: bool
    reason: Optional[str] = None


def row_score(strategy: str, row) -> float:
    """The number shown in the queue's score column for ``strategy`` (see acquire.display_score)."""
    if strategy == "entropy":
        return row.entropy
    if strategy == "margin":
        return row.margin
    if strategy == "bald":
        return row.bald
    return row.priority


def meta_columns(rows) -> list[str]:
    """Metadata column names in first-seen order across ``rows``."""
    seen: dict[str, None] = {}
    for row in rows:
        seen.update(dict.fromkeys(row.meta))
    return list(seen)


@dataclass
class Queue:
    """The head of the queue as shown to one person."""

    rows: list
    strategy: str
    cold_start: bool
    fit: object
    held: int = 0  # rows held for other labellers (left out of rows)
    held_until: Optional[str] = None  # the latest expiry of those holds, UTC


def next_queue(store: Store, n: int = 10, strategy: Optional[str] = None,
               holder: Optional[str] = None, session_id=None,
               progress: Progress = None) -> Queue:
    """The first ``n`` candidates to label, from persisted scores (refitting only when stale).

    The first row is claimed for ``holder`` for settings.CLAIM_SECONDS so that a second person
    asking at the same time is handed another candidate.
    """
    if n < 1:
        raise ValueError("n must be at least 1")
    fit = ensure_fit(store, strategy, session_id=session_id, progress=progress)
    shown = asked_strategy(fit)
    cold = bool((fit.info or {}).get("cold_start"))
    skipped = set(store.skipped_ids().tolist())
    for _ in range(CLAIM_ATTEMPTS):
        found = store.queue(n, holder=holder)
        # The claim is its own write transaction: when another person claimed the same head
        # between our read and our claim, read the queue again (it now leaves theirs out).
        if not (holder and found) or store.claim([found[0].candidate_id], holder,
                                                 seconds=settings.CLAIM_SECONDS):
            break
    rows = [QueueRow(r.rank, r.candidate_id, r.key, r.predicted, r.probabilities, r.p_top,
                     0.0 if cold else row_score(shown, r), r.meta, r.candidate_id in skipped,
                     r.reason)
            for r in found]
    held, until = store.held_by_others(holder)
    return Queue(rows, shown, cold, fit, held, until)
