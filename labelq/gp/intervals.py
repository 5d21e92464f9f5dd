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
from scipy.special import expit, ndtr, softmax

Z95 = 1.6448536269514722
"""Standard normal 95% quantile (common knowledge; scipy.stats.norm.ppf(0.95))."""

_LINKS = {"logistic": expit, "probit": ndtr}


def probability_interval(mean, var, cls, link="logistic", lower=0.05, upper=0.95, n_draws=256,
                         seed=0, chunk_size=20_000):
    """5-95% interval (by default) of the probability of class ``cls`` under the latent predictive.

    mean, var: (n,) for a binary model (latent of class 1) or (n, C) for a multi-class one.
    cls: (n,) int, the class whose probability is bounded (e.g. the predicted class).
    Returns (low, high), each (n,).
    """
    mean = np.asarray(mean, dtype=float)
    var = np.maximum(np.asarray(var, dtype=float), 0.0)
    cls = np.asarray(cls, dtype=int)
    if mean.ndim == 1:
        if lower != 0.05 or upper != 0.95:
            raise ValueError("binary intervals are implemented for the 5-95% range only")
        g = _LINKS.get(link)
        if g is None:
            raise ValueError(f"unknown link {link!r}")
        sd = np.sqrt(var)
        lo1, hi1 = g(mean - Z95 * sd), g(mean + Z95 * sd)
        is1 = cls == 1
        return np.where(is1, lo1, 1.0 - hi1), np.where(is1, hi1, 1.0 - lo1)
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
