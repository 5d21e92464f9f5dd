"""Figures that summarise replayed learning curves (accuracy against number of labels)."""

import numpy as np
from scipy.integrate import trapezoid


def labels_to_reach(labels: np.ndarray, accuracy: np.ndarray, target: float):
    """Median over runs of the first label count whose accuracy is at least ``target``.

    ``accuracy`` is (n_runs, n_points) against ``labels`` (n_points,). A run that never reaches the
    target counts as infinitely many labels; returns None when the median is infinite, else an
    int (or a half-integer float when an even number of runs splits). Common practice, no
    published source.
    """
    reached = accuracy >= target
    first = np.where(reached.any(axis=1), labels[reached.argmax(axis=1)], np.inf)
    median = float(np.median(first))
    if not np.isfinite(median):
        return None
    return int(median) if median.is_integer() else median


def normalised_auc(labels: np.ndarray, curve: np.ndarray) -> float:
    """Area under ``curve`` by the trapezoid rule, divided by the span of ``labels``.

    That is the curve's mean height over the label range, so it reads like an accuracy. A single
    point has no span; its value is returned.
    """
    span = float(labels[-1] - labels[0])
    if span == 0.0:
        return float(curve[0])
    return float(trapezoid(curve, labels) / span)


def curve_summary(labels, accuracy, entropy, full_pool_accuracy) -> dict:
    """JSON-ready summary of one strategy's runs.

    Parameters
    ----------
    labels : (n_points,) label counts at which the runs were measured
    accuracy, entropy : (n_runs, n_points) accuracy over the pool, mean unlabelled entropy (bits)
    full_pool_accuracy : accuracy of a model fitted on the whole pool (None: not measured, and
        labels_to_95 / labels_to_99 are None)

    Returns
    -------
    dict with ``labels``, ``accuracy_mean``, ``accuracy_sd`` (population standard deviation across
    runs), ``entropy_mean``, ``labels_to_95`` / ``labels_to_99`` (labels to reach 95% / 99% of the
    full-pool accuracy, see :func:`labels_to_reach`), ``auc`` (:func:`normalised_auc` of the mean
    curve) and ``auc_se``, the standard error of the mean of the runs' areas (sample standard
    deviation over sqrt(runs); 0 for one run).
    """
    labels = np.asarray(labels)
    mean = accuracy.mean(axis=0)
    areas = np.array([normalised_auc(labels, run) for run in accuracy])
    se = float(areas.std(ddof=1) / np.sqrt(areas.size)) if areas.size > 1 else 0.0
    reach = (lambda f: None) if full_pool_accuracy is None else (
        lambda f: labels_to_reach(labels, accuracy, f * full_pool_accuracy))
    return {
        "labels": [int(n) for n in labels],
        "accuracy_mean": mean.tolist(),
        "accuracy_sd": accuracy.std(axis=0).tolist(),
        "entropy_mean": entropy.mean(axis=0).tolist(),
        "labels_to_95": reach(0.95),
        "labels_to_99": reach(0.99),
        "auc": normalised_auc(labels, mean),
        "auc_se": se,
    }
