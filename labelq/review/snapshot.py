"""Pool-wide uncertainty summary taken after a fit."""

from typing import Optional, Sequence

import numpy as np

from labelq.acquire import entropy_bits


def snapshot(proba: np.ndarray, classes: Sequence[str], uncertain_below: float = 0.8) -> dict:
    """Summarise the model's uncertainty over the unlabelled candidates.

    Parameters
    ----------
    proba : ndarray of shape (n_candidates, n_classes)
        Predicted class probabilities of the UNLABELLED candidates, columns in ``classes`` order.
    classes : sequence of str, length n_classes
    uncertain_below : float
        A candidate counts as uncertain when its top class probability is below this.

    Returns
    -------
    dict with
        ``mean_entropy``: mean Shannon entropy in bits (None for an empty pool);
        ``n_uncertain``: number of candidates whose top probability < ``uncertain_below``;
        ``expected_accuracy``: mean top probability, i.e. the accuracy the model itself expects
        on these candidates if its probabilities are calibrated - the model's own estimate, not a
        measured accuracy (None for an empty pool);
        ``class_counts``: {class: number of candidates predicted as that class}, every class listed.
    """
    classes = [str(c) for c in classes]
    p = np.asarray(proba, dtype=float)
    if p.ndim != 2 or p.shape[1] != len(classes):
        raise ValueError(
            f"proba must have shape (n_candidates, {len(classes)}) to match classes {classes}, "
            f"got {p.shape}"
        )
    if not 0.0 < uncertain_below <= 1.0:
        raise ValueError(f"uncertain_below must be in (0, 1], got {uncertain_below}")
    n = p.shape[0]
    if n == 0:
        return {
            "mean_entropy": None,
            "n_uncertain": 0,
            "expected_accuracy": None,
            "class_counts": {c: 0 for c in classes},
        }
    top = p.max(axis=1)
    counts = np.bincount(p.argmax(axis=1), minlength=len(classes))
    mean_entropy: Optional[float] = float(entropy_bits(p).mean())
    return {
        "mean_entropy": mean_entropy,
        "n_uncertain": int(np.count_nonzero(top < uncertain_below)),
        "expected_accuracy": float(top.mean()),
        "class_counts": {c: int(k) for c, k in zip(classes, counts)},
    }


def sampled_snapshot(proba: np.ndarray, classes: Sequence[str], n_pool: int,
                     uncertain_below: float = 0.8) -> tuple[dict, dict]:
    """`snapshot` of a pool of ``n_pool`` unlabelled candidates estimated from a simple random
    sample of them (``proba``: the sample's probabilities, computed exactly).

    Returns ``(snap, sample)``: ``snap`` has `snapshot`'s keys, the means estimated by the
    sample means and the counts (``n_uncertain``, ``class_counts``) by the sample proportions
    times ``n_pool``, rounded; ``sample`` is ``{"rows": m, "of": n_pool, "se": {...}}`` with the
    standard error of each estimate (s / sqrt(m) times the finite-population correction
    sqrt(1 - m / n_pool); Cochran, Sampling Techniques, 3rd ed. 1977, eqs. 2.19 and 3.8).
    """
    snap = snapshot(proba, classes, uncertain_below)
    p = np.asarray(proba, dtype=float)
    m = p.shape[0]
    if m == 0 or n_pool <= 0:
        return snap, {"rows": m, "of": n_pool, "se": None}
    fpc = np.sqrt(max(0.0, 1.0 - m / n_pool))

    def se(values: np.ndarray) -> float:
        return float(values.std(ddof=1) / np.sqrt(m) * fpc) if m > 1 else float("nan")

    top = p.max(axis=1)
    uncertain = (top < uncertain_below).astype(float)
    predicted = p.argmax(axis=1)
    scale = n_pool / m
    snap["n_uncertain"] = int(round(uncertain.sum() * scale))
    snap["class_counts"] = {c: int(round(k * scale)) for c, k in snap["class_counts"].items()}
    errors = {
        "mean_entropy": se(entropy_bits(p)),
        "expected_accuracy": se(top),
        "n_uncertain": se(uncertain) * n_pool,
        "class_counts": {str(c): se((predicted == k).astype(float)) * n_pool
                         for k, c in enumerate(classes)},
    }
    return snap, {"rows": m, "of": n_pool, "se": errors}
