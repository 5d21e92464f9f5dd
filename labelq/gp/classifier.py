"""GPClassifier: the public Gaussian-process classification estimator of labelq.

A small estimator in front of the engines: binary Laplace (`laplace.py`, GPML Alg. 3.1/3.2/5.1),
binary EP with the probit link (`ep.py`, Alg. 3.5/3.6/5.2) and multi-class softmax Laplace
(`multiclass.py`, Alg. 3.3/3.4), with hyperparameters learnt by `hyperparameters.maximise`.
"""
import threading
from collections import namedtuple
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from labelq.gp import ep, laplace, multiclass
from labelq.gp.hyperparameters import bounds, maximise, median_distance
from labelq.gp.kernels import KERNELS, make_kernel
from labelq.gp.links import BINARY_LINKS, LIKELIHOODS, get_link
from labelq.gp.persistence import (class_array, load_json, model_from_dict, model_to_dict,
                                   save_json)
from labelq.gp.posterior import latent_cross_covariance, latent_moments
from labelq.gp.threads import blas_threads_for

Prediction = namedtuple("Prediction", ["proba", "mean", "var"])
Prediction.__doc__ = """Pool prediction: proba (n, C), latent mean and var ((n,) binary, (n, C))."""

INFERENCES = ("laplace", "ep")
POOL_CHUNK_BYTES = 48 * 2**20
"""Default work memory per `predict_pool` chunk: a float64 and a float32 (rows, n_train) array."""


def _as_matrix(X, name="X"):
    """Validate a finite 2-D float array (n_samples, n_features)."""
    try:
        X = np.asarray(X, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"{name} must be numeric: {exc}") from None
    if X.ndim != 2:
        raise ValueError(f"{name} must be 2-D (n_samples, n_features), got shape {X.shape}")
    bad = ~np.isfinite(X)
    if bad.any():
        row, col = np.argwhere(bad)[0]
        raise ValueError(f"{name} contains NaN or inf (first at row {row}, column {col})")
    return X


def _class_list(y, classes):
    """The ordered class list: declared `classes`, else the sorted observed labels."""
    if classes is not None:
        declared = list(classes)
        if len(set(declared)) != len(declared):
            raise ValueError(f"classes contains duplicates: {declared!r}")
        known = set(declared)
        unknown = [lab for lab in dict.fromkeys(y) if lab not in known]
        if unknown:
            raise ValueError(f"labels {unknown!r} are not among the declared classes {declared!r}")
        return declared
    observed = list(dict.fromkeys(y))
    try:
        return sorted(observed)
    except TypeError:
        return observed


def _label_list(y):
    """y as a list of hashable labels; ValueError for anything not 1-D."""
    if isinstance(y, np.ndarray):
        if y.ndim != 1:
            raise ValueError(f"y must be 1-D, got shape {y.shape}")
        return y.tolist()
    labels = list(y)
    for lab in labels:
        try:
            hash(lab)
        except TypeError:
            raise ValueError(f"y must be 1-D with hashable labels, found {lab!r}") from None
    return labels


class GPClassifier:
    """Gaussian-process classifier (binary or multi-class) with learnt kernel hyperparameters.

    Parameters
    ----------
    kernel : {"se", "matern52"}, squared exponential or Matern 5/2 covariance.
    link : {"logistic", "probit"}, binary likelihood; multi-class models always use softmax.
    inference : {"laplace", "ep"}; EP needs the probit link and two classes.
    ard : one lengthscale per feature (True) or one shared lengthscale.
    optimize : learn hyperparameters by maximising the approximate log marginal likelihood.
    lengthscale, signal_variance : starting (or, with optimize=False, fixed) values; default a
        median-distance lengthscale and a signal variance of 1.
    standardize : scale features by the training mean and standard deviation (scale 1 for
        constant features) inside the model.
    n_restarts : extra seeded random L-BFGS-B starts.
    random_state : seed for restarts and the median-distance subsample.
    max_optimizer_iter : L-BFGS-B iteration limit per start.
    softmax_points : multi-class averaged probabilities: None (default) for the bounded
        quadrature (error at most 2e-4 per probability, labelq.gp.predictive.softmax_quadrature),
        or a number of fixed quasi Monte Carlo points per row.

    Fitted attributes: classes_, log_marginal_likelihood_, hyperparameters_ (dict), n_iter_
    (Newton iterations or EP sweeps of the final posterior fit), fit_warnings_ (list of one-line
    strings).

    With a single class (observed, and no `classes` declaring more) there is nothing to learn:
    classes_ holds that class, predict_proba returns ones, the latent is the prior (mean 0) and
    log_marginal_likelihood_ is 0. Duplicated rows are allowed (B = I + W^1/2 K W^1/2 stays
    well conditioned).
    """

    def __init__(self, kernel="se", link="logistic", inference="laplace", ard=True, optimize=True,
                 lengthscale=None, signal_variance=None, standardize=True, n_restarts=0,
                 random_state=None, max_optimizer_iter=200, softmax_points=None):
        self.kernel = kernel
        self.link = link
        self.inference = inference
        self.ard = ard
        self.optimize = optimize
        self.lengthscale = lengthscale
        self.signal_variance = signal_variance
        self.standardize = standardize
        self.n_restarts = n_restarts
        self.random_state = random_state
        self.max_optimizer_iter = max_optimizer_iter
        self.softmax_points = softmax_points

    # ----------------------------------------------------------------------------- checks
    def _check_settings(self, n_classes):
        if self.kernel not in KERNELS:
            raise ValueError(f"kernel must be one of {sorted(KERNELS)}, got {self.kernel!r}")
        if self.link not in BINARY_LINKS:
            raise ValueError(f"link must be one of {sorted(BINARY_LINKS)} (multi-class models use "
                             f"softmax), got {self.link!r}")
        if self.inference not in INFERENCES:
            raise ValueError(f"inference must be one of {INFERENCES}, got {self.inference!r}")
        if self.inference == "ep" and self.link != "probit":
            raise ValueError(f"inference 'ep' needs link 'probit', got {self.link!r}")
        if self.inference == "ep" and n_classes > 2:
            raise ValueError(f"inference 'ep' is binary only, got {n_classes} classes")
        if int(self.n_restarts) < 0:
            raise ValueError(f"n_restarts must be >= 0, got {self.n_restarts!r}")

    def _check_fitted(self):
        if not hasattr(self, "classes_"):
            raise ValueError("this GPClassifier is not fitted yet; call fit(X, y) first")

    def _transform(self, X):
        self._check_fitted()
        X = _as_matrix(X)
        if X.shape[1] != self.x_mean_.shape[0]:
            raise ValueError(f"X has {X.shape[1]} features, the model was fitted with "
                             f"{self.x_mean_.shape[0]}")
        return (X - self.x_mean_) / self.x_scale_

    # ----------------------------------------------------------------------------- fit
    def _start_theta(self, Xs, d):
        """Data-driven start [log l..., log s2]: given values, else median distance and 1."""
        n_ls = d if self.ard else 1
        if self.lengthscale is None:
            seed = 0 if self.random_state is None else self.random_state
            ls = np.full(n_ls, median_distance(Xs, seed=seed))
        else:
            ls = np.ravel(np.asarray(self.lengthscale, dtype=float))
            if ls.size not in (1, n_ls):
                raise ValueError(f"lengthscale must be a scalar or have {n_ls} values, got "
                                 f"{self.lengthscale!r}")
            ls = np.broadcast_to(ls, (n_ls,)).copy()
        s2 = 1.0 if self.signal_variance is None else float(self.signal_variance)
        return make_kernel(self.kernel, ls, s2).theta

    def _targets(self, codes):
        if self.n_classes_ == 2:
            return np.where(codes == 1, 1.0, -1.0)
        return np.eye(self.n_classes_)[codes]

    def _row_keys(self, X, codes):
        return [row.tobytes() + b"|" + str(c).encode() for row, c in zip(X, codes)]

    def _warm_state(self, X, codes):
        """Engine start for the rows seen in the previous fit (matched by row bytes and label)."""
        old = getattr(self, "_state_by_row", None)
        if not old:
            return {}
        keys = self._row_keys(X, codes)
        names = next(iter(old.values())).keys()
        state = {}
        for name in names:
            template = np.asarray(next(iter(old.values()))[name])
            values = np.zeros((len(keys),) + template.shape)
            for i, key in enumerate(keys):
                if key in old:
                    values[i] = old[key][name]
            state[name] = values
        return state

    def _engine(self, kernel, Xs, T, start, with_gradient):
        K = kernel(Xs)
        if self.n_classes_ > 2:
            if with_gradient:
                return multiclass.lml_and_gradient(kernel, Xs, K, T, start.get("a"))
            return multiclass.fit(K, T, start.get("a"))
        if self.inference == "ep":
            if with_gradient:
                return ep.lml_and_gradient(kernel, Xs, K, T, start.get("tau"), start.get("nu"))
            return ep.fit(K, T, start.get("tau"), start.get("nu"))
        link = get_link(self.link)
        if with_gradient:
            return laplace.lml_and_gradient(kernel, Xs, K, T, link, start.get("a"),
                                            start.get("f"))
        return laplace.fit(K, T, link, start.get("a"))

    def fit(self, X, y, warm_start=False, classes=None):
        """Fit the model to X (n_samples, n_features) and labels y (n_samples,), any hashables.

        warm_start : start hyperparameters from the previous fit and the mode (or EP sites) from
            the previous values of rows seen before (same row bytes and label), zero elsewhere.
        classes : optional sequence declaring every class, including ones without labels yet.

        BLAS runs on one thread below `threads.BLAS_THREAD_THRESHOLD` training rows (measured
        faster there; labelq.gp.threads), and as configured above; the caller's limits are
        restored on return.
        """
        with blas_threads_for(len(y)):
            return self._fit(X, y, warm_start, classes)

    def _fit(self, X, y, warm_start, classes):
        X = _as_matrix(X)
        y_list = _label_list(y)
        if len(y_list) == 0:
            raise ValueError("y is empty: no labels to fit")
        if len(y_list) != X.shape[0]:
            raise ValueError(f"X has {X.shape[0]} rows but y has {len(y_list)} labels")
        labels = _class_list(y_list, classes)
        self._check_settings(len(labels))
        warm = bool(warm_start) and hasattr(self, "classes_") and list(self.classes_) == labels
        index = {lab: i for i, lab in enumerate(labels)}
        codes = np.array([index[lab] for lab in y_list])
        d = X.shape[1]
        x_mean = X.mean(0) if self.standardize else np.zeros(d)
        scale = X.std(0) if self.standardize else np.ones(d)
        x_scale = np.where(scale > 0, scale, 1.0)
        Xs = (X - x_mean) / x_scale
        theta_data = self._start_theta(Xs, d)
        self.x_mean_, self.x_scale_ = x_mean, x_scale
        previous = getattr(self, "theta_", None)
        warm_theta = warm and previous is not None and len(previous) == len(theta_data)
        theta = previous.copy() if warm_theta else theta_data
        start = self._warm_state(X, codes) if warm else {}
        self.classes_ = class_array(labels)
        self.n_classes_ = len(labels)
        self.fit_warnings_ = []
        self.X_train_, self.codes_, self._Xs = X, codes, Xs
        if self.n_classes_ == 1:
            self.fit_warnings_.append("only one class: predict_proba returns 1 for it")
            self._set_fit(theta, None, 0.0, 0)
            self._state_by_row = {}
            return self
        T = self._targets(codes)
        if self.optimize:
            theta = self._optimize(theta, bounds(theta_data), Xs, T, start)
            start = self._last_state
        post = self._engine(make_kernel(self.kernel, *self._split(theta)), Xs, T, start, False)
        self.fit_warnings_ += post.warnings
        self._set_fit(theta, post, post.log_marginal_likelihood, post.n_iter)
        self._remember_rows()
        return self

    def _posterior_from_state(self, state):
        """Rebuild the fitted posterior from stored mode weights or EP sites (no iteration)."""
        K = self.kernel_(self._Xs)
        T = self._targets(self.codes_)
        if self.n_classes_ > 2:
            return multiclass.posterior_from_mode(K, T, state["a"])
        if self.inference == "ep":
            return ep.posterior_from_sites(K, T, state["tau"], state["nu"])
        return laplace.posterior_from_mode(K, T, get_link(self.link), state["a"])

    def _remember_rows(self, state=None):
        state = self.posterior_.state if state is None else state
        self._state_by_row = {
            key: {name: value[i] for name, value in state.items()}
            for i, key in enumerate(self._row_keys(self.X_train_, self.codes_))}

    @property
    def posterior_(self):
        """The fitted latent posterior (None for a single class). A model rebuilt by
        `from_dict` factorises it on first use, so a warm refit from a stored model, which
        needs only its mode, never pays for it."""
        pending = getattr(self, "_pending_state", None)
        if pending is not None:
            self._posterior = self._posterior_from_state(pending)
            self._pending_state = None
        return getattr(self, "_posterior", None)

    @posterior_.setter
    def posterior_(self, value):
        self._posterior = value
        self._pending_state = None

    def _split(self, theta):
        return np.exp(theta[:-1]), np.exp(theta[-1])

    def _optimize(self, theta0, box, Xs, T, start):
        """Maximise the engine's LML from theta0 within `box` (bounds around the data-driven
        start, so repeated warm starts cannot drift); Newton/EP restart from the last state."""
        self._last_state = start
        best = {"value": -np.inf, "state": start}
        binary_laplace = self.n_classes_ == 2 and self.inference == "laplace"

        def objective(theta):
            kern = make_kernel(self.kernel, *self._split(theta))
            begin = self._last_state
            if binary_laplace and begin and best["state"] is not begin:
                # Newton starts from the best (at the new kernel) of the last evaluated mode,
                # the best one so far (after a rejected line-search trial the last mode is often
                # far from where the search goes next) and a Newton step from the last latent f
                begin = {"a": np.stack([begin["a"], best["state"]["a"]]), "f": begin.get("f")}
            value, grad, post = self._engine(kern, Xs, T, begin, True)
            self._last_state = post.state
            if value > best["value"]:
                best.update(value=value, state=post.state)
            return value, grad

        n_ls = len(theta0) - 1
        names = ([f"lengthscale[{j}]" for j in range(n_ls)] if self.ard else ["lengthscale"])
        theta, _, warnings = maximise(objective, theta0, box, int(self.n_restarts),
                                      self.random_state, int(self.max_optimizer_iter),
                                      names + ["signal_variance"])
        self.fit_warnings_ += warnings
        return theta

    def _set_fit(self, theta, post, lml, n_iter):
        self.theta_ = np.asarray(theta, dtype=float)
        ls, s2 = self._split(self.theta_)
        self.kernel_ = make_kernel(self.kernel, ls, s2)
        self.posterior_ = post
        self.log_marginal_likelihood_ = float(lml)
        self.n_iter_ = int(n_iter)
        self.hyperparameters_ = {
            "lengthscale": [float(v) for v in ls] if self.ard else float(ls[0]),
            "signal_variance": float(s2)}

    # ----------------------------------------------------------------------------- predict
    def _latent_scaled(self, Xs, precision="double", buffers=None):
        kss = self.kernel_.diag(Xs)
        if self.posterior_ is None:
            return np.zeros(len(Xs)), kss
        if buffers is None:
            return latent_moments(self.posterior_, self.kernel_(Xs, self._Xs), kss, precision)
        Ks = self.kernel_(Xs, self._Xs, out=buffers[0][:len(Xs)])
        return latent_moments(self.posterior_, Ks, kss, precision, buffers[1])

    @property
    def likelihood_(self):
        """The fitted model's likelihood object (labelq.gp.links): softmax for more than two
        classes, else the binary link."""
        self._check_fitted()
        return LIKELIHOODS["softmax"] if self.n_classes_ > 2 else get_link(self.link)

    def _proba_from_latent(self, mean, var):
        if self.n_classes_ == 1:
            return np.ones((len(mean), 1))
        p = self.likelihood_.average(mean, var, self.softmax_points)
        return p if self.n_classes_ > 2 else np.column_stack([1.0 - p, p])

    def latent(self, X):
        """Latent predictive (mean, variance): (n,) each for binary (latent of classes_[1],
        GPML Alg. 3.2 lines 4-6), (n, C) for multi-class (Alg. 3.4 lines 4-9, diagonal)."""
        return self._latent_scaled(self._transform(X))

    def predict_proba(self, X):
        """Averaged class probabilities (n, C) in classes_ order (GPML eq. 3.25, 3.82)."""
        return self._proba_from_latent(*self.latent(X))

    def predict(self, X):
        """Most probable class label for each row (n,)."""
        return self.classes_[np.argmax(self.predict_proba(X), axis=1)]

    def predict_pool(self, X, chunk_size=None, precision="mixed", n_jobs=1):
        """`Prediction(proba, mean, var)` for a large pool, computed chunk by chunk in one pass
        (memory bounded by chunk_size times the training size, per worker).

        chunk_size : rows per chunk; by default as many as fit POOL_CHUNK_BYTES of work arrays
            (4,194 rows at 1,000 training points). Chunks of a few thousand rows keep the work
            arrays small enough to be reused from chunk to chunk; 20,000-row chunks were a third
            slower on the benchmark machine.

        precision : "mixed" (default) forms the binary latent variance in single precision with
            double-precision refinement of rows at risk (see
            `labelq.gp.posterior.latent_moments`); "double" matches `latent` exactly.
        n_jobs : chunks scored at once in threads. NumPy's kernel and exp passes release the
            GIL; scipy's BLAS wrappers (the triangular product) hold it, so threads overlap only
            the former (about 15% faster with two workers here). Give BLAS one thread per worker
            (e.g. threadpoolctl) when n_jobs > 1; the rows come out the same either way, since
            each chunk is computed on its own.
        """
        Xs = self._transform(X)
        if chunk_size is None:
            n_train = max(1, len(self.codes_))
            chunk_size = min(65536, max(256, POOL_CHUNK_BYTES // (12 * n_train)))
        if int(chunk_size) < 1:
            raise ValueError(f"chunk_size must be >= 1, got {chunk_size!r}")
        if int(n_jobs) < 1:
            raise ValueError(f"n_jobs must be >= 1, got {n_jobs!r}")
        if len(Xs) == 0:
            shape = (0,) if self.n_classes_ <= 2 else (0, self.n_classes_)
            empty = np.zeros(shape)
            return Prediction(self._proba_from_latent(empty, empty), empty, empty.copy())
        chunk = min(int(chunk_size), len(Xs))
        starts = range(0, len(Xs), chunk)
        local = threading.local()

        def work(start):
            # one kernel buffer and one single-precision buffer per worker serve all its chunks:
            # fresh large allocations cost page faults on every chunk
            if not hasattr(local, "buffers"):
                local.buffers = self._pool_buffers(chunk, precision)
            mean, var = self._latent_scaled(Xs[start:start + chunk], precision, local.buffers)
            return self._proba_from_latent(mean, var), mean, var

        if int(n_jobs) > 1 and len(starts) > 1:
            with ThreadPoolExecutor(min(int(n_jobs), len(starts))) as pool:
                parts = list(pool.map(work, starts))
        else:
            parts = [work(start) for start in starts]
        proba, mean, var = (np.concatenate([part[i] for part in parts]) for i in range(3))
        return Prediction(proba, mean, var)

    def _pool_buffers(self, chunk, precision):
        if self.posterior_ is None:
            return None
        n_train = self._Xs.shape[0]
        single = np.empty((chunk, n_train), dtype=np.float32) if precision == "mixed" else None
        return np.empty((chunk, n_train)), single

    def latent_cross_cov(self, X, Z):
        """Posterior latent covariance between rows of X and of Z: (n, m) binary, (n, m, C)
        multi-class (per-class diagonal blocks of the joint posterior, GPML Alg. 3.4 line 9
        generalised to two point sets)."""
        same = Z is X
        Xs = self._transform(X)
        Zs = Xs if same else self._transform(Z)
        prior = self.kernel_(Xs, None if same else Zs)
        if self.posterior_ is None:
            return prior
        Kx = self.kernel_(Xs, self._Xs)
        return latent_cross_covariance(self.posterior_, prior, Kx,
                                       Kx if same else self.kernel_(Zs, self._Xs))

    # ----------------------------------------------------------------------------- storage
    def to_dict(self):
        """JSON-ready dict of the settings, hyperparameters, data and fitted mode or sites."""
        return model_to_dict(self)

    @classmethod
    def from_dict(cls, d):
        """Rebuild a fitted model from `to_dict` output (no refitting of hyperparameters)."""
        return model_from_dict(cls, d)

    def save(self, path):
        """Write `to_dict()` as JSON to path."""
        save_json(self.to_dict(), path)

    @classmethod
    def load(cls, path):
        """Read a model written by `save`."""
        return cls.from_dict(load_json(path))
