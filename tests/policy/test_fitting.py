"""The fit policy's hyperparameter states: grid average, hand-over to learnt values, held, relearnt.

Data: scikit-learn's bundled breast-cancer data, standardised. The rules are this project's
(labelq.policy.fitting docstring); the averaging itself is GPML sec. 5.2, the learning sec. 5.4.1.
"""

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer

from labelq.gp import GPClassifier, GridAverage
from labelq.gp.hyperparameters import median_distance
from labelq.policy import FitOutcome, PolicySettings, fit_labels
from labelq.policy.fitting import ard_due, learning_due


@pytest.fixture(scope="module")
def pool():
    X, y = load_breast_cancer(return_X_y=True)
    X = (X - X.mean(0)) / X.std(0)
    order = np.random.default_rng(0).permutation(len(y))
    return X, y.astype(str), order, median_distance(X)


def _fit(pool, n, previous=None, **changes):
    X, y, order, median = pool
    rows = order[:n]
    return fit_labels(PolicySettings(**changes), X[rows], y[rows], ["0", "1"], previous, median)


def test_few_labels_are_averaged_over_the_grid(pool):
    out = _fit(pool, 8)
    assert out.mode == "average" and out.learnt_at == 0 and isinstance(out.model, GridAverage)
    # the grid's lengthscales follow the pool's median distance
    assert out.model.lengthscales == pytest.approx([f * pool[3] for f in (0.25, 0.5, 1.0)])


def test_no_hand_over_below_learn_from_even_when_concentrated(pool):
    assert _fit(pool, 15, handover_weight=1e-9).mode == "average"


def test_hand_over_starts_from_the_dominant_grid_point(pool, monkeypatch):
    starts = []
    real = GPClassifier.fit

    def spy(self, X, y, warm_start=False, classes=None):
        if self.optimize:
            starts.append((self.lengthscale, self.signal_variance))
        return real(self, X, y, warm_start=warm_start, classes=classes)

    monkeypatch.setattr(GPClassifier, "fit", spy)
    average = _fit(pool, 16, handover_weight=1.0)  # weight 1.0 is never reached: no hand-over
    out = _fit(pool, 16, handover_weight=1e-9)
    assert average.mode == "average"
    assert out.mode == "learnt" and out.relearnt and out.learnt_at == 16
    assert isinstance(out.model, GPClassifier) and out.model.optimize
    assert starts == [average.model.best_grid_point_]


def test_held_between_relearns_and_relearnt_when_the_count_doubles(pool):
    learnt = _fit(pool, 16, handover_weight=1e-9)
    held = _fit(pool, 20, previous=learnt)
    assert held.mode == "held" and held.learnt_at == 16 and not held.relearnt
    assert held.model.hyperparameters_ == learnt.model.hyperparameters_
    again = _fit(pool, 32, previous=held)
    assert again.mode == "learnt" and again.learnt_at == 32


def test_a_fall_in_evidence_goes_back_to_the_average(pool):
    learnt = _fit(pool, 16, handover_weight=1e-9)
    # any fall counts when the allowed drop is negative: the held values are abandoned
    out = _fit(pool, 20, previous=learnt, lml_drop_per_label=-1e9, handover_weight=1.0)
    assert out.mode == "average" and isinstance(out.model, GridAverage)


def test_schedule_rules():
    """Common practice, no published source: relearn when the count doubles; ARD from ten
    labels per feature."""
    assert not learning_due(31, 16, 16) and learning_due(32, 16, 16)
    assert not learning_due(40, 0, 16)  # never learnt: the hand-over decides
    assert not ard_due(299, 30, 10) and ard_due(300, 30, 10) and not ard_due(100, 1, 10)


def test_settings_round_trip_and_checks():
    s = PolicySettings(strategy="epig", grid_signal_variances=(1.0, 8.0))
    assert PolicySettings.from_dict(s.to_dict()) == s
    assert PolicySettings.from_dict({"strategy": "bald", "unknown": 1}).strategy == "bald"
    with pytest.raises(ValueError, match="strategy"):
        PolicySettings(strategy="greedy")
    with pytest.raises(ValueError, match="cold_start"):
        PolicySettings(cold_start="corners")
    assert isinstance(FitOutcome(None, "average", 0, 0).relearnt, bool)
