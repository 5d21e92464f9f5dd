"""The modelling choices the label loop makes, in one place.

They are constants rather than options so that every fit of a store, and every rebuild of it, is
made the same way: a fit is a deterministic function of the label events and the previous fit.
"""
import os

KERNEL = "se"
LINK = "logistic"
INFERENCE = "laplace"

DEFAULT_STRATEGY = "margin"
"""Strategy used when the user names none. Margin rather than entropy: replayed on the orchard
demo pool (3 classes, `labelq simulate`, 64 labels, 2 seeds) entropy and BALD kept choosing
outlying apples far from every label and ended at pool accuracy 0.33 and 0.49, margin at 0.74
(random 0.74); on scikit-learn's breast-cancer data margin and entropy tie and beat random.
Uncertainty sampling's pull towards outliers is a known failure mode (Settles 2009, "Active
Learning Literature Survey", sec. on density-weighted methods)."""

HEAD_SIZE = 20
"""The first HEAD_SIZE ranks of a fit are a spread-out batch (acquire.select_batch)."""

COLD_START_SIZE = 50
"""With no labels, or one class only, this many farthest-point picks lead the queue."""

THREADED_FIT_FROM = 400
"""Fits on fewer labels than this run BLAS on one thread (small matrices; threads cost more)."""

LML_DROP_PER_LABEL = 0.1
"""A warm fit whose log marginal likelihood per label falls by more than this re-learns."""

KEEP_MODELS = 20
"""Fits older than the newest KEEP_MODELS drop their stored model (derived; rebuildable)."""

UNCERTAIN_BELOW = 0.8
"""A candidate whose top class probability is below this counts as uncertain in snapshots."""

CLAIM_SECONDS = 300
"""How long the head of a queue shown to one person is held back from another."""

POOL_WORKERS = max(1, min(4, os.cpu_count() or 1))
"""Threads scoring pool chunks at once (each with one BLAS thread)."""
