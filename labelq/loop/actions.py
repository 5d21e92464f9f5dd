"""What the user does to a store, each as one plain function: the event is committed first, then
the model work follows (so a crash during a refit never loses a label)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Optional

from labelq.ingest import stream_candidates
from labelq.loop import settings
from labelq.loop.refit import Progress, asked_strategy, ensure_fit
from labelq.store import Store
from labelq.store.timestamps import utc_now
from labelq.loop.people import default_person  # noqa: F401
from labelq.loop.queue_view import AUDIT_REASON, CLAIM_ATTEMPTS, Queue, QueueRow, meta_columns, row_score  # noqa: F401


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
    """Read, validate and add a CSV of candidates in one transaction (nothing added on error),
    streamed: parts of about 32,768 rows go into the store as they are read.

    ``features``/``meta`` set the split of the columns and ``missing`` the treatment of empty
    feature cells, as in :func:`labelq.ingest.read_candidates`.
    """
    parts = stream_candidates(csv_path, id_column, features=features, labels_column=labels_column,
                              expected_features=store.feature_names or None, progress=progress,
                              meta=meta, missing=missing)
    seen = {"labels": 0, "last": None}

    def counted():
        for part in parts:  # streamed into the store part by part (labelq.store.columns)
            seen["labels"] += sum(1 for v in (part.labels or []) if v is not None)
            seen["last"] = part
            yield part

    added = store.add_candidate_parts(counted(), by=by)
    table = seen["last"]
    gaps = table.missing
    return ImportResult(added, seen["labels"], table.feature_names, table.meta_columns,
                        table.feature_rule, gaps.treatment, gaps.per_column, gaps.dropped_rows,
                        gaps.first_dropped_line, gaps.filled_cells, gaps.filled_with)


@dataclass
class StepResult:
    """An event and the fit made after it."""

    event: object
    fit: object


def label(store: Store, key: str, class_: str, by: str, note: Optional[str] = None,
          relabel: bool = False, strategy: Optional[str] = None, session_id=None,
          progress: Progress = None, resolve: bool = False) -> StepResult:
    """Record a label (committed at once), then refit, re-rank and snapshot. A second labeller's
    different class opens a dispute; ``resolve`` settles one (labelq.store.disputes)."""
    event = store.label(key, class_, by, note=note, relabel=relabel, resolve=resolve)
    store.release(by)
    return StepResult(event, ensure_fit(store, strategy, session_id=session_id, progress=progress))


def skip(store: Store, key: str, by: str, strategy: Optional[str] = None, session_id=None,
         progress: Progress = None) -> StepResult:
    """Record a skip (the candidate sinks to the bottom of the queue), then re-rank."""
    event = store.skip(key, by)
    store.release(by)
    return StepResult(event, ensure_fit(store, strategy, session_id=session_id, progress=progress))


def undo(store: Store, by: str, strategy: Optional[str] = None, session_id=None,
         progress: Progress = None, key: Optional[str] = None) -> StepResult:
    """Retract the most recent label or skip, or with ``key`` that candidate's current label or
    skip (an appended retraction), then refit."""
    event = store.undo(by, key=key)
    return StepResult(event, ensure_fit(store, strategy, session_id=session_id, progress=progress))


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
        rows = _queue_rows(store, n, holder, shown, cold, skipped)
        # The claim is its own write transaction: when another person claimed the same head
        # between our read and our claim, read the queue again (it now leaves theirs out).
        if not (holder and rows) or store.claim([rows[0].candidate_id], holder,
                                                seconds=settings.CLAIM_SECONDS):
            break
    held, until = store.held_by_others(holder)
    return Queue(rows, shown, cold, fit, held, until)


def _queue_rows(store: Store, n: int, holder, shown: str, cold: bool, skipped: set) -> list:
    """The first ``n`` rows as offered: the ranked queue with, while an audit has items waiting
    and the model can predict, one audit item in every `settings.AUDIT_EVERY` rows (counting the
    labels already given since the audit was drawn). An audit row shows no prediction, so the
    labeller is not led by the model it is testing."""
    pending = [] if cold else store.pending_audit(holder, utc_now())
    audit_ids = {cid for cid, _, _ in pending}
    found = store.queue(n + len(audit_ids), holder=holder)
    ranked = [QueueRow(r.rank, r.candidate_id, r.key, r.predicted, r.probabilities, r.p_top,
                       0.0 if cold else row_score(shown, r), r.meta, r.candidate_id in skipped,
                       r.reason)
              for r in found if r.candidate_id not in audit_ids]
    if not pending:
        return ranked[:n]
    audits = [QueueRow(0, cid, key, None, None, None, None, meta, cid in skipped, AUDIT_REASON,
                       audit=True) for cid, key, meta in pending]
    done, others = store.audit_pace()
    rows = []
    while len(rows) < n and (audits or ranked):
        if audits and (not ranked or done * (settings.AUDIT_EVERY - 1) <= others):
            rows.append(audits.pop(0))
            done += 1
        else:
            rows.append(ranked.pop(0))
            others += 1
    return rows
