"""PolicySettings: every choice that decides how a fit is made and how the pool is ranked.

One frozen object, recorded as JSON with every fit, so that a fit says how it was made and a
replay (`labelq simulate`) makes the same choices as the label loop (`labelq label`).
"""
from __future__ import annotations

from dataclasses import asdict, dataclass, fields, replace
from typing import Optional

from labelq.acquire.names import STRATEGIES
COLD_STARTS = ("typical", "farthest")


@dataclass(frozen=True)
class PolicySettings:
    """How a fit is made from labels and how the pool is ranked (see labelq.policy)."""

    strategy: str = "margin"
    """Acquisition rule of the queue (one of STRATEGIES); chosen by tests/benchmarks/bench_labels.py."""
    kernel: str = "se"
    link: str = "logistic"
    inference: str = "laplace"
    grid_lengthscales: tuple = (0.25, 0.5, 1.0)
    """Lengthscales of the averaging grid, as multiples of the pool's median pairwise distance
    (so the grid follows the number of features)."""
    grid_signal_variances: tuple = (1.0, 4.0, 16.0)
    """Signal variances of the averaging grid (features are standardised)."""
    handover_weight: float = 0.9
    """Hand over from the grid average to learnt hyperparameters once one grid point holds this
    much posterior weight (and there are learn_from labels)."""
    learn_from: int = 16
    """No gradient-based hyperparameter learning below this many labels."""
    ard_labels_per_feature: int = 10
    """One lengthscale per feature only from this many labels per feature."""
    lml_drop_per_label: float = 0.1
    """A fit with held hyperparameters whose log marginal likelihood per label falls by more than
    this goes back to the grid average."""
    softmax_points: Optional[int] = None
    """Multi-class averaged probabilities: None (the default) uses the bounded quadrature of
    labelq.gp.predictive.softmax_quadrature (error at most 2e-4 per probability; on a
    100,000 x 3 pool 2.3x faster than 512 quasi Monte Carlo points and 13x more accurate,
    tests/benchmarks/bench_softmax.py); a number uses that many fixed quasi Monte Carlo points
    (fits recorded before this default, at 512, replay with 512)."""
    head_size: int = 20
    """The first head_size ranks are a spread-out batch (or the cold start's picks)."""
    batch_shortlist: int = 300
    """The spread-out batch is picked among this many candidates of highest priority (their joint
    latent covariance is formed: 300 rows cost a fraction of a second even for a grid average of
    nine three-class members, 2,000 rows cost seconds)."""
    cold_start: str = "typical"
    """With fewer than two classes labelled: "typical" points of clusters or "farthest" points."""
    epig_targets: int = 100
    """Seeded sample of unlabelled candidates whose predictions EPIG aims at."""
    epig_shortlist: int = 300
    """EPIG is computed for this many candidates with the largest BALD (its upper bound)."""
    epig_samples: int = 256
    """Joint draws per candidate-target pair for multi-class EPIG."""
    detail_weight: float = 0.01
    """BALD and EPIG of a grid average use only the members with at least this weight
    (renormalised); the probabilities use every member kept by the average."""
    seed: int = 0
    """Seeds the random strategy, the targets and every Monte Carlo draw of a fit."""

    def __post_init__(self):
        if self.strategy not in STRATEGIES:
            raise ValueError(f"strategy must be one of {STRATEGIES}, got {self.strategy!r}")
        if self.cold_start not in COLD_STARTS:
            raise ValueError(f"cold_start must be one of {COLD_STARTS}, got {self.cold_start!r}")
        if not 0.0 < self.handover_weight <= 1.0:
            raise ValueError(f"handover_weight must be in (0, 1], got {self.handover_weight!r}")

    def with_(self, **changes) -> "PolicySettings":
        """A copy with some fields changed."""
        return replace(self, **changes)

    def to_dict(self) -> dict:
        """JSON-ready dict of every field."""
        return {k: list(v) if isinstance(v, tuple) else v for k, v in asdict(self).items()}

    @classmethod
    def from_dict(cls, d: dict) -> "PolicySettings":
        """Settings from `to_dict` output; fields it lacks keep their defaults."""
        known = {f.name for f in fields(cls)}
        return cls(**{k: tuple(v) if isinstance(v, list) else v
                      for k, v in d.items() if k in known})
