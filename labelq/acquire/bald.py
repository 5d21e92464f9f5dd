"""BALD: mutual information between a candidate's label and the latent function, in bits.

Houlsby, Huszar, Ghahramani & Lengyel 2011, "Bayesian Active Learning for Classification and
Preference Learning", arXiv:1112.5745 (I[y; f] = H[y | x, D] - E_f[H[y | x, f]]).
"""

import numpy as np

from labelq.acquire.checks import check_count, check_latent
from labelq.acquire.entropy import entropy_last_axis
from labelq.gp import predictive_probability
from labelq.gp.links import get_link

# Houlsby et al. 2011: h(Phi(x)) ~ exp(-x^2 / (pi ln 2)), i.e. a Gaussian with
# variance C^2 = pi ln 2 / 2, which makes the expected conditional entropy a Gaussian integral.
_HOULSBY_C2 = np.pi * np.log(2.0) / 2.0


# Elements of one (candidates, samples, classes) Monte Carlo block: 2**22 doubles = 32 MiB.
_BLOCK_ELEMENTS = 1 << 22


def bald_bits(mean, var, link, seed=0, n_samples=1000):
    """Mutual information I[y; f] between the label and the latent function, in bits.

    - ``link="probit"`` (mean, var of shape (n_candidates,)): the closed-form approximation of
      Houlsby et al. 2011,
      h(Phi(mu / sqrt(var + 1))) - C / sqrt(var + C^2) exp(-mu^2 / (2 (var + C^2))),
      C^2 = pi ln 2 / 2, h the binary entropy in bits. Measured against quadrature of the
      exact mutual information over mean in [-6, 6], var in [0.01, 50]: error at most 0.0025
      bits (0.27802 against the exact 0.27865 at mu = 0, var = 1); where it would dip below
      zero (var near 0) the result is clipped at 0, the true value's bound.
    - ``link="logistic"``: the same formula after rescaling the logistic to a probit,
      logistic(f) ~ Phi(sqrt(pi/8) f): f ~ N(mu, var) becomes sqrt(pi/8) f ~
      N(sqrt(pi/8) mu, (pi/8) var). The rescaling (at most 0.018 off in probability) adds to
      the error: measured on the same grid, at most 0.036 bits, largest at mu = 0 and large
      variance (0.616 against 0.580 at var = 16), at most 0.013 bits for var <= 1.
    - ``link="softmax"`` (mean, var of shape (n_candidates, n_classes), independent latents per
      class): H[E p] - E[H[p]] by Monte Carlo with ``n_samples`` draws shared by every
      candidate (common random numbers, antithetic pairs, generator seeded with ``seed``), so a
      candidate's value does not depend on the rest of the pool or on the chunking. The
      estimate is non-negative by construction (entropy is concave). Monte Carlo error at the
      default 1000 draws, measured for three classes with latent variances 0.1 to 3 against a
      400,000-draw reference: standard deviation across seeds about 0.01 bits (at most 0.015),
      shrinking as 1 / sqrt(n_samples); H[E p] is biased down by at most about
      (C - 1) / (2 n_samples ln 2) bits (0.0014 bits here, second-order bound). Because every
      candidate uses the same draws, the errors of similar candidates are correlated.
      Cost: n_candidates * n_samples * n_classes exponentials (about 10 s per 100,000
      three-class candidates on one core).

    Parameters
    ----------
    mean, var : arrays of shape (n_candidates,) or (n_candidates, n_classes)
        Gaussian latent predictive mean and variance.
    link : {"probit", "logistic", "softmax"}
    seed : int
        Seed of the Monte Carlo draws (softmax only).
    n_samples : int
        Monte Carlo draws (softmax only), rounded up to an even number.

    Returns
    -------
    ndarray of shape (n_candidates,)
    """
    mean, var = check_latent(mean, var, link)
    likelihood = get_link(link)
    if likelihood.n_latent is None:  # softmax
        n_samples = check_count(n_samples, "n_samples")
        if n_samples == 0:
            raise ValueError("n_samples must be positive, got 0")
        return _softmax_monte_carlo(mean, var, seed, n_samples)
    s = likelihood.probit_scale  # the logistic as a probit, sigma(f) ~ Phi(s f)
    return _houlsby_probit(s * mean, s * s * var)


def _houlsby_probit(mean, var):
    """Houlsby et al. 2011 closed form for a probit likelihood, in bits."""
    p = predictive_probability(mean, var, "probit")
    marginal = entropy_last_axis(np.stack([p, 1.0 - p], axis=-1))
    spread = var + _HOULSBY_C2
    conditional = np.sqrt(_HOULSBY_C2 / spread) * np.exp(-(mean**2) / (2.0 * spread))
    return np.maximum(marginal - conditional, 0.0)


def _softmax_monte_carlo(mean, var, seed, n_samples):
    """H[E p] - E[H[p]] in bits from antithetic Gaussian draws of each class latent."""
    n_candidates, n_classes = mean.shape
    half = np.random.default_rng(seed).standard_normal(((n_samples + 1) // 2, n_classes))
    draws = np.concatenate([half, -half])
    # Work arrays are laid out (classes, rows, draws): reductions over classes are then
    # element-wise operations on contiguous arrays.
    draws_t = np.ascontiguousarray(draws.T)[:, None, :]
    mean_t = np.ascontiguousarray(mean.T)[:, :, None]
    sd_t = np.ascontiguousarray(np.sqrt(var).T)[:, :, None]
    rows = max(1, _BLOCK_ELEMENTS // draws.size)
    out = np.empty(n_candidates)
    for start in range(0, n_candidates, rows):
        block = slice(start, start + rows)
        log_p = mean_t[:, block] + sd_t[:, block] * draws_t
        log_p -= log_p.max(axis=0)
        p = np.exp(log_p)
        total = p.sum(axis=0)
        p /= total
        log_p -= np.log(total)
        expected_entropy = -(p * log_p).sum(axis=0).mean(axis=1) / np.log(2.0)
        out[block] = entropy_last_axis(p.mean(axis=2).T) - expected_entropy
    return np.maximum(out, 0.0)
