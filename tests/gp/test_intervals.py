"""5-95% intervals of a class probability under the Gaussian latent predictive.

Binary: the class probability is a monotone function of the latent, so its quantiles are the link
of the latent's quantiles (a property of quantiles under monotone maps; common knowledge), with
the latent quantile from scipy.stats.norm.ppf. Multi-class: seeded Monte Carlo, checked against a
large independent sample (sampling error of a quantile, common practice, no published source).
"""

import numpy as np
import pytest
from scipy.special import expit, ndtr, softmax
from scipy.stats import norm

from labelq.gp.links import probability_interval


@pytest.mark.parametrize("link,g", [("logistic", expit), ("probit", ndtr)])
def test_binary_interval_is_the_link_of_latent_quantiles(link, g):
    mean = np.array([-2.0, 0.0, 0.7, 3.0])
    var = np.array([0.5, 1.0, 4.0, 0.01])
    cls = np.array([1, 1, 0, 0])
    low, high = probability_interval(mean, var, cls, link=link)
    q05, q95 = norm.ppf([0.05, 0.95])
    lo1, hi1 = g(mean + q05 * np.sqrt(var)), g(mean + q95 * np.sqrt(var))
    np.testing.assert_allclose(low, np.where(cls == 1, lo1, 1 - hi1), atol=1e-12)
    np.testing.assert_allclose(high, np.where(cls == 1, hi1, 1 - lo1), atol=1e-12)


def test_binary_interval_covers_ninety_percent_of_draws():
    rng = np.random.default_rng(1)
    m, v = 0.4, 2.0
    p = expit(m + np.sqrt(v) * rng.standard_normal(400_000))
    low, high = probability_interval(np.array([m]), np.array([v]), np.array([1]))
    assert abs(np.mean((p >= low[0]) & (p <= high[0])) - 0.90) < 0.005


def test_multiclass_interval_against_a_large_sample():
    mean = np.array([[1.0, 0.0, -1.0], [0.2, 0.1, 0.0]])
    var = np.array([[0.5, 1.0, 2.0], [3.0, 0.2, 1.0]])
    cls = np.array([0, 2])
    low, high = probability_interval(mean, var, cls, link="softmax")
    rng = np.random.default_rng(7)
    for i in range(2):
        f = mean[i] + np.sqrt(var[i]) * rng.standard_normal((200_000, 3))
        pk = softmax(f, axis=1)[:, cls[i]]
        ref_lo, ref_hi = np.quantile(pk, [0.05, 0.95])
        assert abs(low[i] - ref_lo) < 0.03 and abs(high[i] - ref_hi) < 0.03
        assert 0.0 <= low[i] <= high[i] <= 1.0
