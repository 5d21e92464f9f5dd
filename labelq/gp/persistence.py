"""JSON storage of fitted GPClassifier models (no pickle).

The stored mode weights (Laplace) or site parameters (EP) rebuild the posterior exactly as the
fit did, so a reloaded model reproduces predict_proba to rounding error.
"""
import json

import numpy as np

FORMAT = "labelq.gp.GPClassifier/1"
SETTINGS = ("kernel", "link", "inference", "ard", "optimize", "lengthscale", "signal_variance",
            "standardize", "n_restarts", "random_state", "max_optimizer_iter", "softmax_points")


def class_array(labels):
    """classes_ as an ndarray; object dtype unless all labels are scalars of one type."""
    scalar = all(isinstance(lab, (str, int, float, np.generic)) for lab in labels)
    if scalar and len({type(lab) for lab in labels}) == 1:
        return np.array(labels)
    out = np.empty(len(labels), dtype=object)
    out[:] = labels
    return out


def _json_scalar(value, what):
    """Python scalar for a JSON file; TypeError naming the value otherwise."""
    if isinstance(value, np.generic):
        value = value.item()
    if value is None or isinstance(value, (str, bool, int, float)):
        return value
    raise TypeError(f"{what} {value!r} is not a JSON scalar (str, int, float, bool or None)")


def _json_setting(value):
    if isinstance(value, (list, tuple, np.ndarray)):
        return [float(v) for v in np.ravel(value)]
    return _json_scalar(value, "setting")


def model_to_dict(model):
    """Dict of settings, hyperparameters, standardisation, training data, classes and state."""
    model._check_fitted()
    post = model.posterior_
    return {
        "format": FORMAT,
        "settings": {name: _json_setting(getattr(model, name)) for name in SETTINGS},
        "classes": [_json_scalar(c, "class label") for c in model.classes_],
        "theta": model.theta_.tolist(),
        "hyperparameters": model.hyperparameters_,
        "x_mean": model.x_mean_.tolist(),
        "x_scale": model.x_scale_.tolist(),
        "X": model.X_train_.tolist(),
        "y": [_json_scalar(model.classes_[c], "class label") for c in model.codes_],
        "state": {} if post is None else {k: np.asarray(v).tolist() for k, v in post.state.items()},
        "log_marginal_likelihood": model.log_marginal_likelihood_,
        "n_iter": model.n_iter_,
        "fit_warnings": list(model.fit_warnings_),
    }


def model_from_dict(cls, d):
    """Rebuild a fitted `cls` instance from `model_to_dict` output."""
    found = d.get("format") if isinstance(d, dict) else None
    if found != FORMAT:
        raise ValueError(f"not a stored GPClassifier: format {found!r}, expected {FORMAT!r}")
    model = cls(**d["settings"])
    labels = list(d["classes"])
    model._check_settings(len(labels))
    model.classes_ = class_array(labels)
    model.n_classes_ = len(labels)
    index = {lab: i for i, lab in enumerate(labels)}
    model.codes_ = np.array([index[lab] for lab in d["y"]], dtype=int)
    model.X_train_ = np.asarray(d["X"], dtype=float).reshape(len(model.codes_), -1)
    model.x_mean_ = np.asarray(d["x_mean"], dtype=float)
    model.x_scale_ = np.asarray(d["x_scale"], dtype=float)
    model._Xs = (model.X_train_ - model.x_mean_) / model.x_scale_
    model.fit_warnings_ = list(d["fit_warnings"])
    model._set_fit(np.asarray(d["theta"], dtype=float), None, d["log_marginal_likelihood"],
                   d["n_iter"])
    if d["state"]:
        state = {k: np.asarray(v, dtype=float) for k, v in d["state"].items()}
        model._pending_state = state  # the posterior is factorised on first use
        model._remember_rows(state)
    return model


def with_input_scaling(d, mean, scale):
    """A copy of a stored model (`model_to_dict`, or a grid average's dict with "members") that
    takes raw inputs x where the model was fitted on (x - mean) / scale.

    The model's own transform (z - x_mean) / x_scale of z = (x - mean) / scale is the single
    affine map (x - (mean + scale x_mean)) / (scale x_scale); the stored training rows become
    z scale + mean. Predictions agree with the original's to rounding (about 1e-12).
    """
    mean = np.asarray(mean, dtype=float)
    scale = np.asarray(scale, dtype=float)
    if "members" in d:
        return {**d, "members": [with_input_scaling(m, mean, scale) for m in d["members"]]}
    x_mean = np.asarray(d["x_mean"], dtype=float)
    x_scale = np.asarray(d["x_scale"], dtype=float)
    if mean.shape != x_mean.shape or scale.shape != x_mean.shape:
        raise ValueError(f"mean and scale must have shape {x_mean.shape}, got {mean.shape} and "
                         f"{scale.shape}")
    X = np.asarray(d["X"], dtype=float).reshape(len(d["y"]), -1)
    return {**d, "X": (X * scale + mean).tolist(), "x_mean": (mean + scale * x_mean).tolist(),
            "x_scale": (scale * x_scale).tolist()}


def save_json(d, path):
    """Write dict d as JSON to path."""
    with open(path, "w", encoding="utf-8") as fh:
        json.dump(d, fh)


def load_json(path):
    """Read a JSON dict from path."""
    with open(path, encoding="utf-8") as fh:
        return json.load(fh)
