"""Likelihoods of GP classification, one small class each: logistic and probit (binary), softmax
(multi-class). A fitted GPClassifier holds one (`likelihood_`); everything that maps a Gaussian
latent to class probabilities asks it, instead of testing a link's name.

Each likelihood gives
- ``average(mean, var)``: the class probability averaged over f ~ N(mean, var) (GPML eq. 3.25,
  3.82; numerics in labelq.gp.predictive);
- ``interval(mean, var, cls)``: the 5-95% interval of class ``cls``'s probability
  (labelq.gp.intervals);
- binary ones: ``derivatives(y, f)``, log p(y | f) for targets y in {-1, +1} and its first three
  derivatives in f (GPML eq. 3.15 for the logistic, eq. 3.16 for the probit), finite for |f| up
  to 1e3; and ``probit_scale``, s with link(f) ~ Phi(s f) (1 for the probit), which the
  closed-form BALD and EPIG use.
"""
import numpy as np
from scipy.special import erfcx, expit, log_ndtr, ndtr

from labelq.gp.intervals import binary_interval, softmax_interval
from labelq.gp.predictive import (check_pair, logistic_average, probit_average,
                                  softmax_average)

_SQRT_2_OVER_PI = np.sqrt(2.0 / np.pi)


def normal_hazard(z):
    """Return N(z) / Phi(z) (standard normal pdf over cdf), stable for all real z.

    Uses Phi(z) = erfcx(-z / sqrt 2) exp(-z^2 / 2) / 2, so the Gaussian factors cancel; for large
    positive z erfcx overflows to inf and the ratio correctly becomes 0.
    """
    with np.errstate(over="ignore"):
        return _SQRT_2_OVER_PI / erfcx(-np.asarray(z, dtype=float) / np.sqrt(2.0))


class Logistic:
    """Logistic link, p(y | f) = sigma(y f) = 1 / (1 + exp(-y f)) (GPML eq. 3.15)."""

    name = "logistic"
    n_latent = 1
    probit_scale = np.sqrt(np.pi / 8.0)
    """sigma(f) ~ Phi(sqrt(pi / 8) f) (MacKay 1992, "The evidence framework applied to
    classification networks"; GPML sec. 3.4 - section number from memory)."""

    def average(self, mean, var, n_points=None):
        """E[sigma(f)], f ~ N(mean, var), (n,) (labelq.gp.predictive.logistic_average)."""
        return logistic_average(mean, var)

    def interval(self, mean, var, cls):
        """5-95% interval of P(cls | x), cls in {0, 1} per row."""
        return binary_interval(mean, var, cls, expit)

    def derivatives(self, y, f):
        """Return (log p, d1, d2, d3): log-likelihood and derivatives in f, each shape (n,).

        GPML eq. 3.15: d1 = t - pi with t = (y + 1) / 2 and pi = sigma(f); d2 = -pi (1 - pi);
        d3 = -pi (1 - pi) (1 - 2 pi).
        """
        y = np.asarray(y, dtype=float)
        f = np.asarray(f, dtype=float)
        log_p = -np.logaddexp(0.0, -y * f)
        pi = expit(f)
        pi_c = expit(-f)  # 1 - pi without cancellation
        d1 = (y + 1.0) / 2.0 - pi
        w = pi * pi_c
        return log_p, d1, -w, -w * (pi_c - pi)


class Probit:
    """Probit link, p(y | f) = Phi(y f) (GPML eq. 3.16)."""

    name = "probit"
    n_latent = 1
    probit_scale = 1.0

    def average(self, mean, var, n_points=None):
        """E[Phi(f)] = Phi(mean / sqrt(1 + var)) (GPML eq. 3.82), (n,)."""
        return probit_average(mean, var)

    def interval(self, mean, var, cls):
        """5-95% interval of P(cls | x), cls in {0, 1} per row."""
        return binary_interval(mean, var, cls, ndtr)

    def derivatives(self, y, f):
        """Return (log p, d1, d2, d3): log-likelihood and derivatives in f, each shape (n,).

        With z = y f and r = N(z) / Phi(z): d1 = y r, d2 = -r (r + z) (GPML eq. 3.16), and
        differentiating once more d3 = y (r (r + z) (2 r + z) - r).
        """
        y = np.asarray(y, dtype=float)
        f = np.asarray(f, dtype=float)
        z = y * f
        r = normal_hazard(z)
        rz = r * (r + z)
        return log_ndtr(z), y * r, -rz, y * (rz * (2.0 * r + z) - r)


class Softmax:
    """Softmax likelihood of C independent class latents, p(y = c | f) = exp f_c / sum_k exp f_k
    (GPML eq. 3.34)."""

    name = "softmax"
    n_latent = None  # one latent per class

    def average(self, mean, var, n_points=None):
        """E[softmax(f)], (n, C) (labelq.gp.predictive.softmax_average): a quadrature with error
        at most 2e-4 per probability, or with n_points the fixed quasi Monte Carlo rule."""
        return softmax_average(mean, var, n_points)

    def interval(self, mean, var, cls):
        """5-95% interval of P(cls | x) per row, by seeded Monte Carlo."""
        return softmax_interval(mean, var, cls)


BINARY_LINKS = {"logistic": Logistic(), "probit": Probit()}
LIKELIHOODS = {**BINARY_LINKS, "softmax": Softmax()}


def get_link(link):
    """The likelihood object for a name ("logistic", "probit", "softmax") or the object itself;
    ValueError otherwise."""
    if isinstance(link, (Logistic, Probit, Softmax)):
        return link
    if link not in LIKELIHOODS:
        raise ValueError(f"link must be one of {sorted(LIKELIHOODS)}, got {link!r}")
    return LIKELIHOODS[link]


def predictive_probability(mean, var, link, n_points=None):
    """Average the likelihood ``link`` (object or name) over the Gaussian latent N(mean, var).

    mean, var : (n,) for a binary link, (n, C) for softmax.
    n_points : softmax only. None (default): a deterministic quadrature with error at most 2e-4
        per probability where every latent variance is below 256 (beyond, 2048-point quasi Monte
        Carlo; labelq.gp.predictive.softmax_quadrature). A number of points (a power of two):
        the fixed quasi Monte Carlo rule (2048 points: error below 1e-3; 256: a few 1e-3).
    Returns (n,) P(class 1) for a binary link, (n, C) class probabilities for softmax.
    """
    likelihood = get_link(link)
    mean, var = check_pair(mean, var)
    want = 2 if likelihood.n_latent is None else 1
    if mean.ndim != want:
        raise ValueError(f"link {likelihood.name!r} needs {'(n, C)' if want == 2 else '(n,)'} "
                         f"mean and var, got shape {mean.shape}")
    return likelihood.average(mean, var, n_points)


def probability_interval(mean, var, cls, link="logistic"):
    """5-95% interval (low, high), each (n,), of the probability of class ``cls`` (n,) int under
    the latent predictive: mean, var (n,) for a binary link (latent of class 1), (n, C) for
    softmax; ``link`` an object or a name."""
    likelihood = get_link(link)
    mean = np.asarray(mean, dtype=float)
    if (mean.ndim == 2) != (likelihood.n_latent is None):
        raise ValueError(f"link {likelihood.name!r} does not match latent shape {mean.shape}")
    return likelihood.interval(mean, np.asarray(var, dtype=float), np.asarray(cls, dtype=int))
