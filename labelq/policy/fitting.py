"""How a model is fitted from the labels: grid average while labels are few, then learnt.

The states of the hyperparameters, one per fit (`FitOutcome.mode`):
- "average": class probabilities averaged over a grid of hyperparameters weighted by their
  approximate evidence (labelq.gp.averaging; GPML sec. 5.2). Nothing is chosen from a dozen
  labels, so nothing can collapse.
- "learnt": once there are `learn_from` labels and one grid point holds `handover_weight` of the
  posterior, the hyperparameters are learnt by maximising the approximate log marginal
  likelihood (L-BFGS-B, GPML sec. 5.4.1) started from that grid point - the hand-over - and then
  learnt again each time the label count has doubled (`learning_due`), one lengthscale per
  feature once there are `ard_labels_per_feature` labels per feature.
- "held": between relearns the learnt hyperparameters are held and Newton warm-starts from the
  previous mode. If the log marginal likelihood per label then falls by more than
  `lml_drop_per_label`, the hyperparameters no longer explain the labels: the fit goes back to
  the grid average (which may hand over again at once).
A fit is a deterministic function of (the labels, the previous outcome, the settings).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

import numpy as np

from labelq.gp import GPClassifier
from labelq.gp.averaging import GridAverage
from labelq.policy.settings import PolicySettings

MODES = ("average", "learnt", "held")


@dataclass
class FitOutcome:
    """A fitted model and how it was made."""

    model: object  # GPClassifier or GridAverage, fitted on standardised features
    mode: str  # one of MODES
    learnt_at: int  # label count at the last gradient-based learning (0: never)
    n_labels: int

    @property
    def relearnt(self) -> bool:
        """True when this fit learnt the hyperparameters by maximising the evidence."""
        return self.mode == "learnt"


def learning_due(n_labels: int, learnt_at: int, learn_from: int) -> bool:
    """True when held hyperparameters should be learnt afresh: the label count has doubled since
    they were last learnt (common practice of re-learning on a geometric schedule)."""
    return n_labels >= learn_from and learnt_at > 0 and n_labels >= 2 * learnt_at


def ard_due(n_labels: int, n_features: int, per_feature: int) -> bool:
    """One lengthscale per feature from `per_feature` labels per feature (about ten observations
    per parameter; common practice, no published source)."""
    return n_features > 1 and n_labels >= per_feature * n_features


def grid_model(settings: PolicySettings, median_distance: float) -> GridAverage:
    """The unfitted grid average for a pool whose median pairwise distance is given."""
    return GridAverage([f * median_distance for f in settings.grid_lengthscales],
                       settings.grid_signal_variances, kernel=settings.kernel, link=settings.link,
                       inference=settings.inference, softmax_points=settings.softmax_points)


def _learnt_model(settings, X, y, classes, start_lengthscale, start_signal_variance):
    """Hyperparameters learnt by L-BFGS-B from the given start (ARD when due)."""
    ard = ard_due(len(y), X.shape[1], settings.ard_labels_per_feature)
    clf = GPClassifier(kernel=settings.kernel, link=settings.link, inference=settings.inference,
                       ard=ard, optimize=True, standardize=False, random_state=0,
                       lengthscale=start_lengthscale, signal_variance=start_signal_variance,
                       softmax_points=settings.softmax_points)
    return clf.fit(X, y, classes=classes)


def _handover(settings, X, y, classes, average: GridAverage) -> Optional[FitOutcome]:
    """Learnt hyperparameters from the dominant grid point, when the evidence has concentrated."""
    if len(y) < settings.learn_from or average.weights_.max() < settings.handover_weight:
        return None
    ls, s2 = average.best_grid_point_
    return FitOutcome(_learnt_model(settings, X, y, classes, ls, s2), "learnt", len(y), len(y))


def fit_labels(settings: PolicySettings, X, y, classes, previous: Optional[FitOutcome],
               median_distance: float) -> FitOutcome:
    """Fit the model for labelled rows X (n, d) standardised, y (n,) class names.

    ``previous`` is the outcome of the fit before (None for none); ``median_distance`` the pool's
    median pairwise distance in standardised features (sets the grid's lengthscales).
    """
    n = len(y)
    if previous is not None and previous.mode in ("learnt", "held"):
        model = previous.model
        if learning_due(n, previous.learnt_at, settings.learn_from):
            hp = model.hyperparameters_
            start = np.exp(np.mean(np.log(hp["lengthscale"])))
            learnt = _learnt_model(settings, X, y, classes, start, hp["signal_variance"])
            return FitOutcome(learnt, "learnt", n, n)
        before = model.log_marginal_likelihood_ / max(previous.n_labels, 1)
        model.optimize = False  # the previous model is refitted in place, its mode a warm start
        model.fit(X, y, warm_start=True, classes=classes)
        if model.log_marginal_likelihood_ / n >= before - settings.lml_drop_per_label:
            return FitOutcome(model, "held", previous.learnt_at, n)
        previous = None  # the held hyperparameters stopped fitting: back to the grid average
    average = grid_model(settings, median_distance)
    warm = previous is not None and previous.mode == "average"
    if warm:
        average = previous.model
    average.fit(X, y, classes=classes, warm_start=warm)
    handed = _handover(settings, X, y, classes, average)
    if handed is not None:
        return handed
    return FitOutcome(average, "average", previous.learnt_at if previous else 0, n)
