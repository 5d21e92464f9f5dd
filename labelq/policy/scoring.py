"""Score the pool under a fitted model: class probabilities, acquisition scores, priority.

The model is a GPClassifier or a GridAverage (a weighted mixture of GPClassifiers). Every score is
computed from the mixture, not from one member: the probabilities are the mixture's; BALD is the
mutual information between the label and the latent *and* the hyperparameters,
H[sum_k w_k p_k] - sum_k w_k E_k[H[y | f]] (Houlsby et al. 2011 with the grid average of GPML
sec. 5.2); EPIG mixes the members' joint predictive tables before taking the mutual information.
Both use the members holding at least `detail_weight` of the posterior (renormalised).
Margin and the probability intervals use the mixture's moment-matched Gaussian latent.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

import numpy as np

from labelq.acquire import bald_bits, entropy_bits, margin, priority
from labelq.acquire.epig import binary_joint, epig_bits, softmax_joint
from labelq.gp.averaging import mix_predictions
from labelq.gp.links import probability_interval
from labelq.policy.settings import PolicySettings


@dataclass
class PoolScores:
    """Per-candidate figures of one fit over the pool (N rows)."""

    proba: np.ndarray  # (N, C) averaged class probabilities
    mean: Optional[np.ndarray]  # (N,) or (N, C) latent mean (moment-matched for an average)
    var: Optional[np.ndarray]  # same shape, latent variance
    priority: np.ndarray  # (N,) higher = ask sooner
    entropy: np.ndarray  # (N,) bits
    margin: np.ndarray  # (N,)
    bald: Optional[np.ndarray]  # (N,) bits, or None when not computed
    likelihood: object  # the model's likelihood (labelq.gp.links), None before any model

    @property
    def predicted(self) -> np.ndarray:
        """(N,) position of the most probable class."""
        return np.argmax(self.proba, axis=1)

    @property
    def p_top(self) -> np.ndarray:
        """(N,) probability of the predicted class."""
        return self.proba[np.arange(len(self.proba)), self.predicted]

    def interval(self):
        """(low, high): 5-95% interval of the predicted class's probability (labelq.gp.links)."""
        if self.mean is None:
            return self.p_top, self.p_top
        return probability_interval(self.mean, self.var, self.predicted, self.likelihood)


def members(model):
    """(list of GPClassifier, weights) of a model: the grid average's members or the model alone."""
    if hasattr(model, "members_"):
        return model.members_, np.asarray(model.weights_)
    return [model], np.ones(1)


def uniform_scores(n: int, n_classes: int) -> PoolScores:
    """Scores before any model: uniform probabilities, no latent, no priority."""
    proba = np.full((n, n_classes), 1.0 / n_classes)
    zeros = np.zeros(n)
    return PoolScores(proba, None, None, zeros, entropy_bits(proba), zeros, zeros, None)


def score_pool(model, X, settings: PolicySettings, strategy: str, unlabelled: np.ndarray,
               full: bool = True, n_jobs: int = 1) -> PoolScores:
    """Score every row of X (N, d) standardised under ``model``.

    ``unlabelled`` (N,) bool marks the candidates that may be queued (EPIG targets come from
    them). With ``full`` False only what ``strategy``'s priority needs is computed (the replay);
    the priority is the same either way.
    """
    ms, w = members(model)
    parts = [m.predict_pool(X, n_jobs=n_jobs) for m in ms]
    proba, mean, var = mix_predictions(parts, w)
    link = model.likelihood_
    entropy = entropy_bits(proba)
    # p1 - p2 for every number of classes. For two classes the spread-scaled distance
    # |mean| / sqrt(1 + var) (Kapoor et al. 2007; labelq.acquire.margins with a latent) was tried
    # as the priority: it trailed random on the statsmodels affairs survey (area 0.650 against
    # 0.667, 10 seeds) where p1 - p2 reached 0.665, and tied it elsewhere (bench_labels.py).
    marg = margin(proba)
    need_bald = full or strategy in ("bald", "epig")
    major = w >= min(settings.detail_weight, w.max())  # members that carry BALD and EPIG
    w_major = w[major] / w[major].sum()
    parts_major = [p for p, keep in zip(parts, major) if keep]
    bald = (_mixture_bald(parts_major, w_major, link, settings.seed) if need_bald else None)
    if strategy == "bald":
        prio = bald
    elif strategy == "epig":
        prio = _epig_priority([m for m, keep in zip(ms, major) if keep], w_major, X, bald,
                              unlabelled, settings, link)
    else:  # entropy, margin (p1 - p2: no latent passed) and random: acquire's own priority
        prio = priority(strategy, proba, None, None, link, settings.seed)
    return PoolScores(proba, mean, var, prio, entropy, marg, bald, link)


BALD_SAMPLES = 256
"""Monte Carlo draws per member for multi-class BALD (standard deviation about 0.02 bits, see
labelq.acquire.bald; only the order of candidates matters)."""


def _mixture_bald(parts, w, link, seed):
    """I[y; f, theta] in bits: entropy of the mixture minus the members' expected entropies."""
    expected = 0.0
    proba = sum(wk * p.proba for wk, p in zip(w, parts))
    for wk, p in zip(w, parts):
        # E_k[H[y | f]] = H[p_k] - I_k[y; f] (Houlsby et al. 2011 per member)
        expected = expected + wk * (entropy_bits(p.proba) - bald_bits(p.mean, p.var, link, seed,
                                                                      n_samples=BALD_SAMPLES))
    return np.maximum(entropy_bits(proba) - expected, 0.0)


def _epig_priority(ms, w, X, bald, unlabelled, settings, link):
    """EPIG (bits) for the `epig_shortlist` unlabelled rows with the largest BALD (EPIG <= BALD
    by the data-processing inequality, so BALD is the natural shortlist); every other row gets a
    priority below all of them, in BALD order."""
    rows = np.flatnonzero(unlabelled)
    prio = -1.0 / (1.0 + bald)  # in (-1, 0]: after every shortlisted row, by BALD
    if rows.size == 0:
        return prio
    short = rows[np.argsort(-bald[rows], kind="stable")[:settings.epig_shortlist]]
    rng = np.random.default_rng(settings.seed)
    targets = rng.choice(rows, size=min(settings.epig_targets, rows.size), replace=False)
    Xs, Xt = X[short], X[targets]
    joints, baselines = [], []
    for m in ms:
        mc, vc = m.latent(Xs)
        mt, vt = m.latent(Xt)
        cov = m.latent_cross_cov(Xs, Xt)
        if link.n_latent is None:  # softmax: joint draws with the control variate
            args = (mc, vc, mt, vt, cov)
            joints.append(softmax_joint(*args, n_samples=settings.epig_samples,
                                        seed=settings.seed))
            baselines.append(softmax_joint(*args, n_samples=settings.epig_samples,
                                           seed=settings.seed, independent=True))
        else:
            joints.append(binary_joint(mc, vc, mt, vt, cov, link=link))
    value = epig_bits(joints, w, baseline=baselines or None)
    prio[short] = value
    return prio
