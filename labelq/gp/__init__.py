"""Gaussian-process classification engine: kernels, links, Laplace, EP, the estimator and the
average over a hyperparameter grid."""
from labelq.gp.averaging import GridAverage, load_model
from labelq.gp.classifier import GPClassifier, Prediction
from labelq.gp.links import predictive_probability, probability_interval

__all__ = ["GPClassifier", "GridAverage", "Prediction", "load_model", "predictive_probability",
           "probability_interval"]
