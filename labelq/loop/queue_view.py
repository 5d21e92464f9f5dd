"""What a queue shown to one person holds: a light module, shared by the full label loop
(`labelq.loop.actions`) and the quick read path (`labelq.loop.quick`)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Optional


AUDIT_REASON = "audit: drawn at random to measure accuracy"
"""Why an audit row is in the queue."""

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
    audit: bool = False  # an audit item: drawn at random, shown without the model's prediction


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
