"""One entry point per strategy: the priority that orders the queue and the score users see."""

import numpy as np

from labelq.acquire.bald import bald_bits
from labelq.acquire.checks import check_proba, check_strategy
from labelq.acquire.entropy import entropy_bits
from labelq.acquire.margins import margin
from labelq.acquire.names import STRATEGIES


def display_score(strategy, proba, mean, var, link, seed=0):
    """The value shown in the queue's ``score`` column, shape (n_candidates,).

    entropy: entropy of the averaged class probabilities in bits; margin: the margin itself
    (smaller = closer to the boundary, see :func:`labelq.acquire.margins.margin`); bald: the
    mutual information in bits; random: a seeded uniform(0, 1) draw.

    Parameters
    ----------
    strategy : {"entropy", "margin", "bald", "random"}
    proba : array of shape (n_candidates, n_classes)
    mean, var : arrays of shape (n_candidates,) binary or (n_candidates, n_classes) multi-class
        Latent predictive; needed by "bald", used by "margin" when binary, else may be None.
    link : {"probit", "logistic", "softmax"}
    seed : int
        Seeds the random draw ("random") and the Monte Carlo draws ("bald", softmax).
    """
    check_strategy(strategy, STRATEGIES)
    proba = check_proba(proba)
    if mean is not None and np.shape(mean)[0] != proba.shape[0]:
        raise ValueError(f"mean has {np.shape(mean)[0]} candidates, proba has {proba.shape[0]}")
    if strategy == "entropy":
        return entropy_bits(proba)
    if strategy == "margin":
        return margin(proba, mean, var)
    if strategy == "bald":
        return bald_bits(mean, var, link, seed)
    if strategy == "epig":
        raise ValueError("strategy 'epig' needs the joint predictive of candidates and targets: "
                         "use labelq.acquire.epig")
    return np.random.default_rng(seed).uniform(size=proba.shape[0])


def priority(strategy, proba, mean, var, link, seed=0):
    """Priority of each candidate, shape (n_candidates,) float: higher = ask sooner.

    The display score for entropy, bald and random; for margin the positive decreasing
    transform 1 / (1 + margin), so the candidate nearest the boundary comes first (common
    practice, no published source for this particular transform). Arguments as for
    :func:`display_score`.
    """
    score = display_score(strategy, proba, mean, var, link, seed)
    if strategy == "margin":
        return 1.0 / (1.0 + score)
    return score
