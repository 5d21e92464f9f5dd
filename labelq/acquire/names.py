"""The acquisition strategies by name (a light module: the CLI reads it at start-up)."""

STRATEGIES = ("entropy", "margin", "bald", "epig", "random")
"""Acquisition rules. ``epig`` needs the joint predictive of candidates and targets, so its
priority comes from :mod:`labelq.acquire.epig` (through labelq.policy), not from
:mod:`labelq.acquire.scores`."""
