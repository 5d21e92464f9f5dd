"""Intervals for a class probability implied by the Gaussian latent predictive.

The class probability is a function of the latent value f, so an interval for f maps to an interval
for the probability. Binary: p(class 1 | f) = link(f) is monotone, so the 5% and 95% quantiles of
the probability are the link of the latent quantiles, mean -/+ 1.645 sd (exact, no sampling).
Multi-class: the softmax of independent per-class Gaussians (the diagonal of the predictive
covariance, GPML Alg. 3.4 line 15) is not monotone in one variable, so quantiles come from seeded
Monte Carlo draws; with S = 256 draws the quantile's standard error is about
sqrt(q (1 - q) / S) / density, a few hundredths at most: an interval for people, not a test
statistic.
"""

from __future__ import annotations

import numpy as np
from scipy.special import softmax

Z95 = 1.6448536269514722
"""Standard normal 95% quantile (common knowledge; scipy.stats.norm.ppf(0.95))."""


def binary_interval(mean, var, cls, inverse_link):
    """5-95% interval of the probability of class ``cls`` (0 or 1) when P(class 1 | f) =
    inverse_link(f), f ~ N(mean, var): the link of the latent's quantiles mean -/+ 1.645 sd
    (a monotone map keeps quantiles). mean, var, cls (n,); returns (low, high), each (n,)."""
    sd = np.sqrt(np.maximum(var, 0.0))
    lo1, hi1 = inverse_link(mean - Z95 * sd), inverse_link(mean + Z95 * sd)
    is1 = np.asarray(cls) == 1
    return np.where(is1, lo1, 1.0 - hi1), np.where(is1, hi1, 1.0 - lo1)


def softmax_interval(mean, var, cls, lower=0.05, upper=0.95, n_draws=256, seed=0,
                     chunk_size=20_000):
    """``lower``-``upper`` quantiles of the softmax probability of class ``cls`` (n,) when the
    class latents are independent N(mean, var), (n, C), by seeded Monte Carlo; (low, high)."""
    var = np.maximum(var, 0.0)
    rng = np.random.default_rng(seed)
    n, c = mean.shape
    eps = rng.standard_normal((n_draws, c))
    low = np.empty(n)
    high = np.empty(n)
    for start in range(0, n, chunk_size):
        sl = slice(start, start + chunk_size)
        f = mean[sl, None, :] + np.sqrt(var[sl, None, :]) * eps[None, :, :]
        p = softmax(f, axis=2)
        pk = np.take_along_axis(p, cls[sl, None, None], axis=2)[:, :, 0]
        low[sl], high[sl] = np.quantile(pk, [lower, upper], axis=1)
    return low, high
