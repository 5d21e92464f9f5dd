"""Tests for labelq.acquire.margins."""

import numpy as np
import pytest

from labelq.acquire import margin


def test_binary_latent_margin_by_hand():
    # Kapoor et al. 2007 criterion |mean| / sqrt(1 + var), computed by hand:
    # |1.5| / sqrt(1 + 3) = 0.75; |-2| / sqrt(1 + 0) = 2; 0 / sqrt(2) = 0.
    proba = np.array([[0.2, 0.8], [0.9, 0.1], [0.5, 0.5]])
    got = margin(proba, np.array([1.5, -2.0, 0.0]), np.array([3.0, 0.0, 1.0]))
    np.testing.assert_allclose(got, [0.75, 2.0, 0.0])


def test_multiclass_margin_is_gap_between_two_largest_by_hand():
    # Hand computation: 0.5 - 0.3 = 0.2; 0.4 - 0.4 = 0; 0.7 - 0.2 = 0.5.
    proba = np.array([[0.3, 0.5, 0.2], [0.4, 0.2, 0.4], [0.1, 0.2, 0.7]])
    np.testing.assert_allclose(margin(proba), [0.2, 0.0, 0.5], atol=1e-15)
    # Multi-class latents are accepted and do not change the probability margin.
    with_latent = margin(proba, np.zeros((3, 3)), np.ones((3, 3)))
    np.testing.assert_allclose(with_latent, [0.2, 0.0, 0.5], atol=1e-15)


def test_binary_without_latent_is_probability_gap():
    # Hand computation: |2 p - 1| for p = 0.8 and 0.5.
    np.testing.assert_allclose(margin(np.array([[0.2, 0.8], [0.5, 0.5]])), [0.6, 0.0], atol=1e-15)


def test_rejects_half_a_latent_and_negative_variance():
    proba = np.array([[0.2, 0.8]])
    with pytest.raises(ValueError, match="both mean and var"):
        margin(proba, mean=np.array([1.0]))
    with pytest.raises(ValueError, match="-1.0"):
        margin(proba, np.array([1.0]), np.array([-1.0]))
