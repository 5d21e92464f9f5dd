"""Defaults of the strategy replay (a light module: the CLI reads them at start-up)."""

REFERENCE_ROWS = 1000
"""The reference model (the accuracy a model fitted on labels for the whole pool reaches) is fitted
on a seeded sample of at most this many rows by default and scored on the whole pool."""

POOL_FRACTION = 0.9
"""Each seed replays on its own seeded random share of the rows (the same for every strategy), so
that seeds differ even for strategies that are deterministic given the pool."""
