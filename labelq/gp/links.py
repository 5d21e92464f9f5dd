"""Likelihood link functions for binary GP classification.

Each link gives log p(y | f) for targets y in {-1, +1} and its first three derivatives with
respect to the latent f (GPML eq. 3.15 for the logistic, eq. 3.16 for the probit). All forms are
written so that |f| up to 1e3 gives finite values (no overflow, no NaN).
"""
import numpy as np
from scipy.special import erfcx, expit, log_ndtr

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


LINKS = {"logistic": Logistic(), "probit": Probit()}


def get_link(name):
    """Return the link object named `name` ("logistic" or "probit"); ValueError otherwise."""
    if name not in LINKS:
        raise ValueError(f"link must be one of {sorted(LINKS)}, got {name!r}")
    return LINKS[name]
