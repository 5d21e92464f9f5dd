"""Plain records the store returns; arrays are NumPy, JSON columns are decoded."""

from dataclasses import dataclass
from typing import Any, Literal

import numpy as np


@dataclass(frozen=True)
class CandidateRecord:
    """One candidate with its features by name, metadata and current label or skip."""

    id: int
    key: str
    features: dict[str, float]
    meta: dict[str, Any]
    label: str | None
    skipped: bool


@dataclass(frozen=True)
class LabelRecord:
    """A candidate's current label: the latest label event not retracted."""

    event_id: int
    candidate_id: int
    key: str
    class_: str
    by: str
    note: str | None
    at: str


@dataclass(frozen=True)
class UndoRecord:
    """What an undo retracted: a label (with its class) or a skip of the candidate ``key``."""

    kind: Literal["label", "skip"]
    key: str
    class_: str | None


@dataclass(frozen=True)
class FitRecord:
    """One fit; ``model`` is None when the fits were listed without their models or it was pruned.

    ``fingerprint`` identifies the label set the fit was made on; ``info`` is a small JSON object
    the workflow keeps beside the fit (strategy asked for, cold start, reuse).
    """

    id: int
    session_id: int | None
    n_labels: int
    strategy: str
    hyperparameters: dict[str, Any]
    log_marginal_likelihood: float | None
    seconds: float
    at: str
    event_mark: int
    model: dict[str, Any] | None
    warnings: list[str]
    full_optimize: bool
    fingerprint: str | None = None
    info: dict[str, Any] | None = None
    settings: dict[str, Any] | None = None
    hyper_mode: str | None = None
    learnt_at: int | None = None


@dataclass(frozen=True)
class ScoreRow:
    """One queue entry: a candidate's probabilities (C,) and scores under the last fit."""

    candidate_id: int
    key: str
    meta: dict[str, Any]
    probabilities: np.ndarray
    predicted: int
    p_top: float
    entropy: float
    margin: float
    bald: float
    priority: float
    rank: int
    reason: str | None = None


@dataclass(frozen=True)
class ScoreChunk:
    """Scores of ``m`` candidates of the last fit as arrays; ``rank`` is -1 for labelled ones.

    Shapes: ``candidate_id``, ``predicted``, ``rank`` int64 (m,); ``probabilities`` float64 (m, C);
    the other fields float64 (m,).
    """

    candidate_id: np.ndarray
    probabilities: np.ndarray
    predicted: np.ndarray
    p_top: np.ndarray
    p_low: np.ndarray
    p_high: np.ndarray
    entropy: np.ndarray
    margin: np.ndarray
    bald: np.ndarray
    priority: np.ndarray
    rank: np.ndarray
    exact: np.ndarray | None = None
    """(m,) bool: the row's latent variance was computed exactly (False: an upper bound; see
    labelq.policy.bounded)."""
