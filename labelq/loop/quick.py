"""`labelq next` without the engine: the head of a current queue read through plain sqlite3.

`quick_next_queue` gives what `actions.next_queue` would give - the same rows, scores, claim of
the head and count of rows held for others - when the store's last fit is current and ranked by
the strategy asked for, and None otherwise (the caller then takes the full path, which refits).
It imports neither SQLAlchemy nor NumPy, so `next` on a current store starts in a fraction of the
time (figures in DEVELOPERS.md).
"""

from __future__ import annotations

from types import SimpleNamespace
from typing import Optional

from labelq.loop.queue_view import CLAIM_ATTEMPTS, Queue, QueueRow, row_score
from labelq.loop.settings import CLAIM_SECONDS, DEFAULT_STRATEGY
from labelq.store.migrate import head_revision
from labelq.store.quick import QuickReader


def quick_next_queue(path, n: int, strategy: Optional[str],
                     holder: Optional[str]) -> Optional[tuple[list[str], Queue]]:
    """(the store's classes, the queue) from current scores, or None to take the full path."""
    reader = QuickReader.open(path, head_revision())
    if reader is None:
        return None
    with reader:
        fit = reader.current_fit()
        if fit is None or reader.audit_waiting():
            return None
        wanted = strategy or (fit.strategy if fit.strategy != "cold-start" else None) or DEFAULT_STRATEGY
        shown = fit.info.get("strategy", fit.strategy)  # as refit.asked_strategy
        if shown != wanted:
            return None
        cold = bool(fit.info.get("cold_start"))
        for _ in range(CLAIM_ATTEMPTS):
            found = reader.queue(n, holder)
            if found is None:
                return None
            if not (holder and found) or reader.claim(found[0]["candidate_id"], holder, CLAIM_SECONDS):
                break
        skipped = reader.skipped([r["candidate_id"] for r in found])
        rows = [QueueRow(r["rank"], r["candidate_id"], r["key"], r["predicted"], r["probabilities"],
                         r["p_top"], 0.0 if cold else row_score(shown, SimpleNamespace(**r)),
                         r["meta"], r["candidate_id"] in skipped, r["reason"])
                for r in found]
        held, until = reader.held_by_others(holder)
        return reader.classes(), Queue(rows, shown, cold, fit, held, until)
