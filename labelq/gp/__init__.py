"""Gaussian-process classification engine: kernels, links, Laplace, EP and the estimator."""
from labelq.gp.classifier import GPClassifier, Prediction
from labelq.gp.predictive import predictive_probability

__all__ = ["GPClassifier", "Prediction", "predictive_probability"]
