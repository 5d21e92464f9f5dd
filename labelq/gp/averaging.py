"""GridAverage: class probabilities averaged over a grid of kernel hyperparameters.

From a dozen labels the marginal likelihood cannot pin down one set of hyperparameters, and the
single maximiser can be degenerate (a tiny signal variance that calls every label noise).
GPML sec. 5.2 (Rasmussen & Williams 2006) gives the Bayesian answer: integrate the
hyperparameters out, p(y* | D) = sum_theta p(y* | D, theta) p(theta | D), with
p(theta | D) proportional to p(D | theta) p(theta) (GPML eq. 5.7-5.8). With a flat prior on a small
grid and the Laplace (or EP) approximation of the evidence p(D | theta) (GPML eq. 3.32, 3.44,
3.65) that is a weighted mixture of GP classifiers with weights exp(log Z_theta) normalised over
the grid. Each member is an ordinary `GPClassifier` with its hyperparameters held fixed.

The class probabilities of the average are the exact mixture of the members' averaged
probabilities. Where a single Gaussian latent is wanted (margin, intervals, batch spreading) the
mixture is summarised by its first two moments (moment matching: mean sum_k w_k m_k, variance
sum_k w_k (v_k + m_k^2) - mean^2); members whose weight is below `min_weight` are dropped after
the fit, which changes no probability by more than that weight.
"""
from __future__ import annotations

import numpy as np

from labelq.gp.classifier import GPClassifier, Prediction
from labelq.gp.persistence import load_json, save_json

FORMAT = "labelq.gp.GridAverage/1"


class GridAverage:
    """Bayesian model average of GP classifiers over a hyperparameter grid (GPML sec. 5.2).

    Parameters
    ----------
    lengthscales : sequence of isotropic lengthscales (in the units of the features given).
    signal_variances : sequence of signal variances.
    kernel, link, inference : as for GPClassifier.
    min_weight : members with a smaller posterior weight are dropped after fitting (their
        contribution to any probability is below this).
    softmax_points : passed to each member (multi-class averaged probabilities).

    Fitted attributes: classes_, members_ (list of GPClassifier), weights_ (k,), grid_ (k, 2)
    (lengthscale, signal variance of each member), index_ (k,) their positions in the grid,
    log_marginal_likelihood_ (log of the grid-averaged evidence, log mean_theta Z_theta),
    hyperparameters_ (dict: the weighted geometric mean lengthscale and signal variance, the top
    weight, the number of members kept), fit_warnings_.
    """

    def __init__(self, lengthscales, signal_variances, kernel="se", link="logistic",
                 inference="laplace", min_weight=1e-4, softmax_points=None):
        self.lengthscales = [float(v) for v in lengthscales]
        self.signal_variances = [float(v) for v in signal_variances]
        if not self.lengthscales or not self.signal_variances:
            raise ValueError("GridAverage needs at least one lengthscale and one signal variance")
        if min(self.lengthscales + self.signal_variances) <= 0:
            raise ValueError(f"grid values must be positive, got lengthscales "
                             f"{self.lengthscales} and signal variances {self.signal_variances}")
        self.kernel = kernel
        self.link = link
        self.inference = inference
        self.min_weight = float(min_weight)
        self.softmax_points = softmax_points

    def _member(self, lengthscale, signal_variance):
        return GPClassifier(kernel=self.kernel, link=self.link, inference=self.inference,
                            ard=False, optimize=False, lengthscale=lengthscale,
                            signal_variance=signal_variance, standardize=False,
                            softmax_points=self.softmax_points)

    def fit(self, X, y, classes=None, warm_start=False):
        """Fit one member per grid point to X (n_samples, n_features), y (n_samples,) and weight
        them by their approximate evidence. warm_start reuses the previous members' modes for
        rows seen before (GPClassifier.fit)."""
        previous = {}
        if warm_start and hasattr(self, "members_"):
            previous = dict(zip(self.index_.tolist(), self.members_))
        members, grid, lml = [], [], []
        points = [(ls, s2) for ls in self.lengthscales for s2 in self.signal_variances]
        for i, (ls, s2) in enumerate(points):
            m = previous.get(i) or self._member(ls, s2)
            m.fit(X, y, warm_start=i in previous, classes=classes)
            members.append(m)
            grid.append((ls, s2))
            lml.append(m.log_marginal_likelihood_)
        lml = np.asarray(lml)
        top = lml.max()
        weights = np.exp(lml - top)  # GPML eq. 5.7 with a flat prior over the grid
        total = weights.sum()
        weights /= total
        self.log_marginal_likelihood_ = float(top + np.log(total / len(lml)))
        keep = weights >= min(self.min_weight, weights.max())
        self.members_ = [m for m, k in zip(members, keep) if k]
        self.weights_ = weights[keep] / weights[keep].sum()
        self.grid_ = np.asarray(grid)[keep]
        self.index_ = np.flatnonzero(keep)
        self.grid_lml_ = lml
        self.classes_ = members[0].classes_
        self.n_classes_ = members[0].n_classes_
        self.fit_warnings_ = sorted({w for m in self.members_ for w in m.fit_warnings_})
        self._summarise()
        return self

    def _summarise(self):
        log_grid = np.log(self.grid_)
        centre = np.exp(self.weights_ @ log_grid)
        self.hyperparameters_ = {"lengthscale": float(centre[0]),
                                 "signal_variance": float(centre[1]),
                                 "top_weight": float(self.weights_.max()),
                                 "members": len(self.members_)}

    @property
    def likelihood_(self):
        """The members' likelihood object (labelq.gp.links)."""
        return self.members_[0].likelihood_

    @property
    def best_member_(self):
        """The member with the largest posterior weight."""
        return self.members_[int(np.argmax(self.weights_))]

    @property
    def best_grid_point_(self):
        """(lengthscale, signal variance) of the member with the largest weight."""
        return tuple(float(v) for v in self.grid_[int(np.argmax(self.weights_))])

    # ----------------------------------------------------------------------------- predict
    def member_predictions(self, X, **kwargs):
        """List of each member's `predict_pool(X, **kwargs)` (same order as weights_)."""
        return [m.predict_pool(X, **kwargs) for m in self.members_]

    def predict_pool(self, X, **kwargs):
        """`Prediction` of the average for a pool: mixture probabilities (n, C) and the moment-
        matched latent mean and variance; keyword arguments go to each member's predict_pool."""
        return mix_predictions(self.member_predictions(X, **kwargs), self.weights_)

    def latent(self, X):
        """Moment-matched latent (mean, var) of the mixture: (n,) binary, (n, C) multi-class."""
        mixed = mix_predictions([Prediction(None, *m.latent(X)) for m in self.members_],
                                self.weights_)
        return mixed.mean, mixed.var

    def predict_proba(self, X):
        """Mixture of the members' averaged class probabilities, (n, C) in classes_ order."""
        return sum(wk * m.predict_proba(X) for wk, m in zip(self.weights_, self.members_))

    def predict(self, X):
        """Most probable class label for each row (n,)."""
        return self.classes_[np.argmax(self.predict_proba(X), axis=1)]

    def latent_cross_cov(self, X, Z):
        """Covariance of the latent between rows of X and Z under the mixture:
        sum_k w_k (C_k + m_k(X) m_k(Z)^T) - m(X) m(Z)^T; (n, m) binary, (n, m, C) multi-class."""
        same = Z is X
        cov, mx_bar, mz_bar = 0.0, 0.0, 0.0
        for wk, m in zip(self.weights_, self.members_):
            mx = m.latent(X)[0]
            mz = mx if same else m.latent(Z)[0]
            outer = mx[:, None] * mz[None, :]
            cov = cov + wk * (m.latent_cross_cov(X, X if same else Z) + outer)
            mx_bar = mx_bar + wk * mx
            mz_bar = mz_bar + wk * mz
        return cov - mx_bar[:, None] * mz_bar[None, :]

    # ----------------------------------------------------------------------------- storage
    def to_dict(self):
        """JSON-ready dict: the grid settings, weights and each kept member's `to_dict`."""
        return {
            "format": FORMAT,
            "settings": {"lengthscales": self.lengthscales,
                         "signal_variances": self.signal_variances, "kernel": self.kernel,
                         "link": self.link, "inference": self.inference,
                         "min_weight": self.min_weight, "softmax_points": self.softmax_points},
            "weights": self.weights_.tolist(),
            "grid": self.grid_.tolist(),
            "index": self.index_.tolist(),
            "grid_lml": self.grid_lml_.tolist(),
            "log_marginal_likelihood": self.log_marginal_likelihood_,
            "members": [m.to_dict() for m in self.members_],
        }

    def save(self, path):
        """Write `to_dict()` as JSON to path (read it back with `load_model`)."""
        save_json(self.to_dict(), path)

    @classmethod
    def from_dict(cls, d):
        """Rebuild a fitted average from `to_dict` output."""
        found = d.get("format") if isinstance(d, dict) else None
        if found != FORMAT:
            raise ValueError(f"not a stored GridAverage: format {found!r}, expected {FORMAT!r}")
        model = cls(**d["settings"])
        model.members_ = [GPClassifier.from_dict(m) for m in d["members"]]
        model.weights_ = np.asarray(d["weights"], dtype=float)
        model.grid_ = np.asarray(d["grid"], dtype=float).reshape(-1, 2)
        model.index_ = np.asarray(d["index"], dtype=np.int64)
        model.grid_lml_ = np.asarray(d["grid_lml"], dtype=float)
        model.log_marginal_likelihood_ = float(d["log_marginal_likelihood"])
        model.classes_ = model.members_[0].classes_
        model.n_classes_ = model.members_[0].n_classes_
        model.fit_warnings_ = sorted({w for m in model.members_ for w in m.fit_warnings_})
        model._summarise()
        return model


def mix_predictions(parts, weights):
    """`Prediction` of a weighted mixture from its members' predictions: the weighted sum of
    the probabilities (None when the parts carry none) and the moment-matched latent, mean
    sum_k w_k m_k and variance sum_k w_k (v_k + m_k^2) - mean^2 (law of total variance)."""
    proba = (None if parts[0].proba is None
             else sum(wk * p.proba for wk, p in zip(weights, parts)))
    mean = sum(wk * p.mean for wk, p in zip(weights, parts))
    second = sum(wk * (p.var + p.mean ** 2) for wk, p in zip(weights, parts))
    return Prediction(proba, mean, np.maximum(second - mean ** 2, 0.0))


def load_model(source):
    """A fitted GPClassifier or GridAverage from its `to_dict` output or a JSON file of it
    (`save`, `labelq export model`); dispatch on the stored format."""
    d = source if isinstance(source, dict) else load_json(source)
    if isinstance(d, dict) and d.get("format") == FORMAT:
        return GridAverage.from_dict(d)
    return GPClassifier.from_dict(d)
