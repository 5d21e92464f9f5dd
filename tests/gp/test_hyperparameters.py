"""Hyperparameter search helpers (labelq.gp.hyperparameters)."""
import numpy as np
import pytest
from scipy.spatial.distance import pdist

from labelq.gp.hyperparameters import bounds, maximise, median_distance


def test_median_distance_matches_scipy_pdist():
    # Source: scipy.spatial.distance.pdist (reference implementation of pairwise distances).
    X = np.random.default_rng(0).normal(size=(60, 4))
    assert median_distance(X) == pytest.approx(np.median(pdist(X)), rel=1e-12)
    assert median_distance(np.ones((5, 3))) == 1.0  # all rows equal: fallback (our convention)


def test_maximise_concave_quadratic():
    # Source: the maximum of -|theta - c|^2 is c (calculus); L-BFGS-B with analytic gradient.
    c = np.array([0.3, -1.2, 2.0])
    theta, value, warnings = maximise(lambda t: (-((t - c) ** 2).sum(), -2 * (t - c)),
                                      np.zeros(3), [(-5, 5)] * 3)
    np.testing.assert_allclose(theta, c, atol=1e-4)
    assert value == pytest.approx(0.0, abs=1e-8) and warnings == []


def test_bound_reached_is_a_one_line_warning_and_restarts_are_seeded():
    # Source: labelq contract (non-fatal trouble recorded as one-line strings in fit_warnings_).
    objective = lambda t: (t.sum(), np.ones_like(t))
    box = bounds(np.zeros(2))
    theta, _, warnings = maximise(objective, np.zeros(2), box, n_restarts=2, seed=1,
                                  names=["lengthscale", "signal_variance"])
    np.testing.assert_allclose(theta, [b for _, b in box])
    assert any("lengthscale reached its bound" in w for w in warnings)
    assert any("signal_variance reached its bound" in w for w in warnings)
    assert all("\n" not in w for w in warnings)
    again, _, _ = maximise(objective, np.zeros(2), box, n_restarts=2, seed=1)
    np.testing.assert_array_equal(theta, again)
