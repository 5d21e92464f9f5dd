"""Shannon entropy of averaged class probabilities, in bits."""

import numpy as np

from labelq.acquire.checks import check_proba


def entropy_bits(proba):
    """Entropy of each candidate's averaged class probabilities, in bits.

    H(p) = -sum_c p_c log2 p_c with 0 log 0 = 0 (Shannon 1948, "A mathematical theory of
    communication"). Lies in [0, log2 n_classes].

    Parameters
    ----------
    proba : array of shape (n_candidates, n_classes)
        Class probabilities averaged over the latent posterior; rows sum to one.

    Returns
    -------
    ndarray of shape (n_candidates,)
    """
    proba = check_proba(proba)
    return entropy_last_axis(proba)


def entropy_last_axis(proba):
    """Entropy in bits along the last axis of ``proba`` without validation (0 log 0 = 0)."""
    positive = proba > 0.0
    logs = np.log2(proba, where=positive, out=np.zeros_like(proba))
    return np.maximum(-(proba * logs).sum(axis=-1), 0.0)
