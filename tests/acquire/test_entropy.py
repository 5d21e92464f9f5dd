"""Tests for labelq.acquire.entropy_bits."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.stats import entropy

from labelq.acquire import entropy_bits


def test_matches_scipy_entropy_in_bits():
    # Reference: scipy.stats.entropy(base=2), Shannon entropy.
    rng = np.random.default_rng(0)
    proba = rng.dirichlet(np.ones(4), size=50)
    np.testing.assert_allclose(entropy_bits(proba), entropy(proba, base=2, axis=1), rtol=1e-12)


def test_zero_log_zero_is_zero_and_uniform_is_log2_classes():
    # Shannon 1948 convention 0 log 0 = 0; uniform over C classes has log2 C bits.
    proba = np.array([[1.0, 0.0, 0.0], [0.0, 0.5, 0.5], [1 / 3, 1 / 3, 1 / 3]])
    np.testing.assert_allclose(entropy_bits(proba), [0.0, 1.0, np.log2(3)], atol=1e-15)


@pytest.mark.parametrize(
    "proba, word",
    [
        ([[0.5, 0.6]], "sums to"),
        ([[-0.1, 1.1]], "-0.1"),
        ([[np.nan, 1.0]], "nan"),
        ([0.5, 0.5], "shape"),
    ],
)
def test_rejects_bad_probabilities_naming_the_value(proba, word):
    with pytest.raises(ValueError, match=word):
        entropy_bits(proba)


@settings(max_examples=60, deadline=None)
@given(
    arrays(
        float,
        st.tuples(st.integers(1, 6), st.integers(2, 5)),
        elements=st.floats(0.0, 1.0, allow_subnormal=False),
    )
)
def test_entropy_lies_between_zero_and_log2_classes(weights):
    # Property of Shannon entropy: 0 <= H <= log2 C.
    weights[:, 0] += 1e-3
    proba = weights / weights.sum(axis=1, keepdims=True)
    h = entropy_bits(proba)
    assert np.all(h >= 0.0)
    assert np.all(h <= np.log2(proba.shape[1]) + 1e-12)
