"""Validation of the arrays the acquisition functions receive.

Each check returns a float64 array and raises ValueError naming the argument and the bad value.
"""

import numpy as np

LINKS = ("logistic", "probit", "softmax")
"""Names of the likelihoods in labelq.gp.links (objects are accepted too)."""

# Rows of class probabilities may be off from summing to one by accumulated rounding only.
_SUM_TOLERANCE = 1e-6


def check_proba(proba):
    """Return ``proba`` as float64 of shape (n_candidates, n_classes), rows on the simplex."""
    proba = np.asarray(proba, dtype=float)
    if proba.ndim != 2 or proba.shape[1] < 2:
        raise ValueError(
            f"proba must have shape (n_candidates, n_classes >= 2), got {proba.shape}"
        )
    bad = ~np.isfinite(proba) | (proba < 0.0) | (proba > 1.0)
    if bad.any():
        row, col = np.argwhere(bad)[0]
        raise ValueError(f"proba[{row}, {col}] = {proba[row, col]!r} is not a probability")
    off = np.abs(proba.sum(axis=1) - 1.0)
    if proba.shape[0] and off.max() > _SUM_TOLERANCE:
        row = int(np.argmax(off))
        raise ValueError(f"proba row {row} sums to {proba[row].sum()!r}, not 1")
    return proba


def check_latent(mean, var, link):
    """Return (mean, var) as float64 arrays matching ``link``.

    Binary links ("probit", "logistic") take shape (n_candidates,); "softmax" takes
    (n_candidates, n_classes). Variances must be finite and non-negative.
    """
    from labelq.gp.links import get_link  # SciPy only when arrays are checked, not at start-up

    likelihood = get_link(link)  # a likelihood object or its name
    if mean is None or var is None:
        raise ValueError(f"a latent mean and var are needed here, got mean={mean!r}, var={var!r}")
    mean = np.asarray(mean, dtype=float)
    var = np.asarray(var, dtype=float)
    ndim = 2 if likelihood.n_latent is None else 1
    if mean.ndim != ndim:
        raise ValueError(f"mean for link {link!r} must be {ndim}-D, got shape {mean.shape}")
    if var.shape != mean.shape:
        raise ValueError(f"var shape {var.shape} does not match mean shape {mean.shape}")
    if not np.isfinite(mean).all():
        raise ValueError(f"mean holds a non-finite value: {mean[~np.isfinite(mean)][0]!r}")
    bad = ~np.isfinite(var) | (var < 0.0)
    if bad.any():
        raise ValueError(f"var holds a negative or non-finite value: {var[bad][0]!r}")
    return mean, var


def check_strategy(strategy, strategies):
    """Raise ValueError unless ``strategy`` is one of ``strategies``."""
    if strategy not in strategies:
        raise ValueError(f"strategy must be one of {strategies}, got {strategy!r}")


def check_count(n, name="n"):
    """Return ``n`` as a non-negative Python int."""
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 0:
        raise ValueError(f"{name} must be a non-negative integer, got {n!r}")
    return int(n)


def check_mask(mask, n_candidates, name="skipped_mask"):
    """Return a boolean mask of length ``n_candidates`` (all False when ``mask`` is None)."""
    if mask is None:
        return np.zeros(n_candidates, dtype=bool)
    mask = np.asarray(mask)
    if mask.shape != (n_candidates,) or mask.dtype != bool:
        raise ValueError(
            f"{name} must be a boolean array of shape ({n_candidates},), "
            f"got dtype {mask.dtype} shape {mask.shape}"
        )
    return mask
