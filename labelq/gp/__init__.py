"""Gaussian-process classification engine: kernels, links, Laplace, EP, the estimator and the
average over a hyperparameter grid."""

from labelq.lazy import lazy_exports

_WHERE = {
    "GPClassifier": "labelq.gp.classifier",
    "GridAverage": "labelq.gp.averaging",
    "Prediction": "labelq.gp.classifier",
    "load_model": "labelq.gp.averaging",
    "predictive_probability": "labelq.gp.links",
    "probability_interval": "labelq.gp.links",
}
"""Where each public name lives; imported on first use (labelq.lazy)."""

__all__ = sorted(_WHERE)


__getattr__, __dir__ = lazy_exports(__name__, _WHERE)
