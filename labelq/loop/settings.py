"""The choices the label loop makes, in one place.

How a fit is made and the pool ranked is the fit policy's (`POLICY`, labelq.policy), the same
settings `labelq simulate` replays; they are recorded with every fit. The rest here is how the
loop stores and shows its work. Constants rather than options, so that every fit of a store, and
every rebuild of it, is made the same way.
"""
import os

from labelq.policy import PolicySettings

POLICY = PolicySettings()
"""The fit policy's defaults; the strategy the user asks for replaces `POLICY.strategy`."""

DEFAULT_STRATEGY = POLICY.strategy
"""Strategy used when the user names none (see PolicySettings.strategy)."""

THREADED_FIT_FROM = 400
"""Fits on fewer labels than this run BLAS on one thread (small matrices; threads cost more)."""

KEEP_MODELS = 20
"""Fits older than the newest KEEP_MODELS drop their stored model (derived; rebuildable)."""

UNCERTAIN_BELOW = 0.8
"""A candidate whose top class probability is below this counts as uncertain in snapshots."""

AUDIT_EVERY = 5
"""While an audit has items waiting, one row in this many of the queue is an audit item."""

AUDIT_BINS_SMALL, AUDIT_BINS = 5, 10
"""Reliability bins for audits of fewer than 100 scored items, and from 100 on."""

AUDIT_HALF_WIDTH = 0.05
"""Stopping advice quotes a measured accuracy only when the audit's 95% interval is at most this
wide on each side (common practice for a quoted proportion; e.g. +-5 points)."""

CLAIM_SECONDS = 300
"""How long the head of a queue shown to one person is held back from another."""

POOL_WORKERS = max(1, min(4, os.cpu_count() or 1))
"""Threads scoring pool chunks at once (each with one BLAS thread)."""

EXACT_POOL_UP_TO = 20_000
"""Pools up to this many candidates are scored exactly everywhere at every fit. Above it a fit
computes exact figures only where they can reach the head of the queue (`EXACT_HEAD` rows), for
the labelled candidates, the audit items and a fixed seeded sample of `SUMMARY_SAMPLE` candidates
(the pool's snapshot is estimated from it, with standard errors); every other row holds bounds
(labelq.policy.bounded) and `export predictions` computes it exactly when asked."""

EXACT_HEAD = 1_000
"""Rows at the head of the queue whose priorities are exact (labelq.store.sql.QUEUE_HEAD_ROWS)."""

SUMMARY_SAMPLE = 2_000
"""Size of the seeded sample (bottom-k of the candidate ids, labelq.review.stop_set) from which a
large pool's snapshot is estimated (the same ids as the stop set's; mean entropy to about
+-0.01 bits)."""
