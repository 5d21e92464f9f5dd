"""Pool snapshot against values computed by hand."""

import math

import numpy as np
import pytest

from labelq.review import snapshot


def test_against_hand_values():
    """Hand computation; entropy in bits after Shannon (1948), H = -sum p log2 p.

    rows (A, B, C)        top   entropy (bits)
    (1.0, 0.0, 0.0)       1.0   0
    (0.5, 0.5, 0.0)       0.5   1
    (0.25, 0.25, 0.5)     0.5   1.5
    (0.1, 0.9, 0.0)       0.9   -(0.1 log2 0.1 + 0.9 log2 0.9) = 0.4689955936
    mean entropy = (0 + 1 + 1.5 + 0.4689955936) / 4; expected accuracy = (1 + .5 + .5 + .9) / 4
    = 0.725; uncertain (top < 0.8): rows 2 and 3; predicted: A, A (first of a tie), C, B.
    """
    proba = np.array([[1.0, 0.0, 0.0], [0.5, 0.5, 0.0], [0.25, 0.25, 0.5], [0.1, 0.9, 0.0]])
    h4 = -(0.1 * math.log2(0.1) + 0.9 * math.log2(0.9))
    out = snapshot(proba, ["A", "B", "C"])
    assert out["mean_entropy"] == pytest.approx((0 + 1 + 1.5 + h4) / 4, abs=1e-12)
    assert out["n_uncertain"] == 2
    assert out["expected_accuracy"] == pytest.approx(0.725, abs=1e-12)
    assert out["class_counts"] == {"A": 2, "B": 1, "C": 1}


def test_threshold_is_strict():
    """Hand computation: top probability exactly at the threshold is not uncertain (strict <)."""
    proba = np.array([[0.8, 0.2], [0.79, 0.21]])
    assert snapshot(proba, ["x", "y"], uncertain_below=0.8)["n_uncertain"] == 1


def test_empty_pool():
    """Common practice, no published source: nothing to average gives None, counts give zero."""
    out = snapshot(np.empty((0, 2)), ["x", "y"])
    assert out == {"mean_entropy": None, "n_uncertain": 0, "expected_accuracy": None,
                   "class_counts": {"x": 0, "y": 0}}


def test_shape_must_match_classes():
    """Common practice, no published source."""
    with pytest.raises(ValueError, match="classes"):
        snapshot(np.full((3, 2), 0.5), ["a", "b", "c"])
