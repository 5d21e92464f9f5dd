"""Tests for labelq.acquire.priority and display_score."""

import numpy as np
import pytest

from labelq.acquire import STRATEGIES, bald_bits, display_score, entropy_bits, margin, priority
from labelq.gp import predictive_probability


def _binary_pool():
    mean = np.array([-2.0, -0.1, 0.0, 0.4, 3.0])
    var = np.array([0.5, 1.0, 2.0, 0.1, 1.0])
    p = predictive_probability(mean, var, "probit")
    return np.stack([1.0 - p, p], axis=1), mean, var


def test_strategies_are_the_documented_five():
    # DESIGN.md vocabulary.
    assert STRATEGIES == ("entropy", "margin", "bald", "epig", "random")


def test_epig_needs_the_joint_predictive():
    proba, mean, var = _binary_pool()
    with pytest.raises(ValueError, match="epig"):
        display_score("epig", proba, mean, var, "probit")


def test_display_scores_are_the_criteria_themselves():
    proba, mean, var = _binary_pool()
    def shown(strategy):
        return display_score(strategy, proba, mean, var, "probit")

    np.testing.assert_array_equal(shown("entropy"), entropy_bits(proba))
    np.testing.assert_array_equal(shown("margin"), margin(proba, mean, var))
    np.testing.assert_array_equal(shown("bald"), bald_bits(mean, var, "probit"))


def test_margin_priority_is_decreasing_in_the_margin():
    # 1 / (1 + margin): common practice, no published source for the transform.
    proba, mean, var = _binary_pool()
    shown = display_score("margin", proba, mean, var, "probit")
    np.testing.assert_allclose(priority("margin", proba, mean, var, "probit"), 1.0 / (1.0 + shown))
    assert np.argmax(priority("margin", proba, mean, var, "probit")) == np.argmin(shown)


def test_random_is_seeded_uniform_and_shown_as_drawn():
    # numpy.random.default_rng(seed).uniform, as specified.
    proba, mean, var = _binary_pool()
    draw = priority("random", proba, None, None, "probit", seed=7)
    np.testing.assert_array_equal(draw, np.random.default_rng(7).uniform(size=5))
    shown = display_score("random", proba, None, None, "probit", seed=7)
    np.testing.assert_array_equal(shown, draw)
    assert not np.array_equal(draw, priority("random", proba, None, None, "probit", seed=8))


def test_higher_priority_is_nearer_the_boundary_for_every_informative_strategy():
    # Common practice: the candidate at mean 0 with the largest variance is the most uncertain.
    proba, mean, var = _binary_pool()
    for strategy in ("entropy", "margin", "bald"):
        assert np.argmax(priority(strategy, proba, mean, var, "probit")) == 2


def test_unknown_strategy_is_named():
    proba, mean, var = _binary_pool()
    with pytest.raises(ValueError, match="'uncertainty'"):
        priority("uncertainty", proba, mean, var, "probit")
    with pytest.raises(ValueError, match="candidates"):
        priority("bald", proba, mean[:3], var[:3], "probit")
