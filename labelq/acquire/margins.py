"""Margin: how close a candidate sits to the decision boundary. Smaller = more informative."""

import numpy as np

from labelq.acquire.checks import check_latent, check_proba


def margin(proba, mean=None, var=None):
    """Distance of each candidate from the decision boundary; smaller means ask sooner.

    Binary model with a latent given (``proba`` has two columns and ``mean``, ``var`` have
    shape (n_candidates,)): |mean| / sqrt(1 + var), the boundary distance in units of the
    predictive spread (after the GP uncertainty criterion of Kapoor, Grauman, Urtasun & Darrell
    2007, "Active learning with Gaussian processes for object categorization", ICCV).
    Otherwise: p_(1) - p_(2), the difference of the two largest class probabilities (for two
    classes |2 p - 1|).

    Parameters
    ----------
    proba : array of shape (n_candidates, n_classes)
    mean, var : arrays of shape (n_candidates,), optional
        Latent predictive mean and variance of a binary model (latent of ``classes_[1]``).
        Multi-class latents, shape (n_candidates, n_classes), are accepted and not used.

    Returns
    -------
    ndarray of shape (n_candidates,)
    """
    proba = check_proba(proba)
    if (mean is None) != (var is None):
        raise ValueError("margin needs both mean and var, or neither")
    if mean is not None and np.ndim(mean) == 1 and proba.shape[1] == 2:
        mean, var = check_latent(mean, var, "probit")
        if mean.shape[0] != proba.shape[0]:
            raise ValueError(f"mean has {mean.shape[0]} candidates, proba has {proba.shape[0]}")
        return np.abs(mean) / np.sqrt(1.0 + var)  # after Kapoor et al. 2007
    top_two = np.partition(proba, proba.shape[1] - 2, axis=1)[:, -2:]
    return top_two[:, 1] - top_two[:, 0]
