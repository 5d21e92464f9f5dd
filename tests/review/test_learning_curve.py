"""Learning-curve figures: labels to reach a target, normalised area under the curve."""

import numpy as np
import pytest

from labelq.review.learning_curve import curve_summary, labels_to_reach, normalised_auc

LABELS = np.array([4, 5, 6, 7, 8])


def test_labels_to_reach_is_median_of_first_crossings():
    """Hand computation: first crossings 5, 7, never -> sorted (5, 7, inf), median 7."""
    acc = np.array([[0.5, 0.9, 0.9, 0.9, 0.9],
                    [0.5, 0.6, 0.7, 0.9, 0.9],
                    [0.5, 0.5, 0.5, 0.5, 0.5]])
    assert labels_to_reach(LABELS, acc, 0.9) == 7


def test_labels_to_reach_is_none_when_median_never_reaches():
    """Hand computation: crossings (4, inf, inf) have an infinite median."""
    acc = np.array([[0.95] * 5, [0.5] * 5, [0.5] * 5])
    assert labels_to_reach(LABELS, acc, 0.9) is None


def test_labels_to_reach_even_number_of_runs():
    """Hand computation: crossings (4, 7) have median 5.5; (4, inf) an infinite one."""
    assert labels_to_reach(LABELS, np.array([[1.0] * 5, [0, 0, 0, 1, 1.0]]), 0.9) == 5.5
    assert labels_to_reach(LABELS, np.array([[1.0] * 5, [0.0] * 5]), 0.9) is None


def test_normalised_auc():
    """Hand computation by the trapezoid rule: a line from 0.5 to 0.9 over any span averages 0.7."""
    assert normalised_auc(np.array([4, 64]), np.array([0.5, 0.9])) == pytest.approx(0.7)
    assert normalised_auc(LABELS, np.full(5, 0.8)) == pytest.approx(0.8)
    assert normalised_auc(np.array([4]), np.array([0.6])) == pytest.approx(0.6)


def test_curve_summary_keys_and_spread():
    """Hand computation: two runs 0.6 and 0.8 have mean 0.7 and population sd 0.1."""
    acc = np.array([[0.6, 0.6], [0.8, 0.8]])
    out = curve_summary(np.array([4, 5]), acc, np.ones((2, 2)), full_pool_accuracy=0.8)
    assert out["accuracy_mean"] == pytest.approx([0.7, 0.7])
    assert out["accuracy_sd"] == pytest.approx([0.1, 0.1])
    assert out["labels"] == [4, 5] and out["entropy_mean"] == [1.0, 1.0]
    assert out["labels_to_95"] is None  # 0.95 * 0.8 = 0.76: one of two runs, median infinite
    assert out["auc"] == pytest.approx(0.7)
    # per-run areas 0.6 and 0.8: sample sd 0.1414, standard error 0.1414 / sqrt(2) = 0.1
    assert out["auc_se"] == pytest.approx(0.1)


def test_curve_summary_without_reference():
    """No reference model: labels to reach a fraction of it are unknown (None)."""
    out = curve_summary(np.array([1, 2]), np.array([[0.6, 0.9]]), np.ones((1, 2)), None)
    assert out["labels_to_95"] is None and out["labels_to_99"] is None and out["auc_se"] == 0.0
