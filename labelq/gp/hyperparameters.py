"""Kernel hyperparameter learning by maximising an approximate log marginal likelihood.

The objective and its analytic gradient come from the inference engine (GPML Alg. 5.1 for
Laplace, the multi-class extension in `multiclass.py`, Alg. 5.2 for EP); here we only pick a
data-driven start, bound the search in log space and run L-BFGS-B (GPML sec. 5.4.1 recommends
gradient-based optimisation of the marginal likelihood in log hyperparameters).
"""
import numpy as np
from scipy.optimize import minimize

LENGTHSCALE_RANGE = 1e3  # bounds: start lengthscale times / divided by this
SIGNAL_VARIANCE_BOUNDS = (1e-4, 1e4)
MEDIAN_SUBSAMPLE = 1000
# L-BFGS-B stops when the LML changes by less than 1e-6 relative per iteration or the projected
# gradient is below 1e-3: hyperparameter differences below that are statistically irrelevant
# (common practice, no published source) and it halves the evaluations of scipy's defaults.
LBFGS_OPTIONS = {"ftol": 4e-6, "gtol": 1e-3}


def median_distance(X, seed=0):
    """Median Euclidean distance between distinct rows of X (at most 1000 rows, seeded subsample).

    Common practice ("median heuristic", no published source); 1.0 when all rows coincide.
    """
    X = np.asarray(X, dtype=float)
    if X.shape[0] > MEDIAN_SUBSAMPLE:
        rows = np.random.default_rng(seed).choice(X.shape[0], MEDIAN_SUBSAMPLE, replace=False)
        X = X[rows]
    sq = (X * X).sum(1)
    d2 = np.maximum(sq[:, None] + sq[None, :] - 2.0 * X @ X.T, 0.0)
    d = np.sqrt(d2[np.triu_indices(X.shape[0], k=1)])
    d = d[d > 1e-12]
    return float(np.median(d)) if d.size else 1.0


def bounds(theta0):
    """L-BFGS-B box in log space around the start theta0 = [log l..., log s2]."""
    width = np.log(LENGTHSCALE_RANGE)
    box = [(t - width, t + width) for t in theta0[:-1]]
    box.append(tuple(np.log(SIGNAL_VARIANCE_BOUNDS)))
    return box


def maximise(objective, theta0, box, n_restarts=0, seed=None, max_iter=200, names=None):
    """Maximise `objective(theta) -> (value, gradient)` by L-BFGS-B from theta0 and from
    `n_restarts` seeded random starts drawn uniformly in the box.

    Returns (best theta, best value, warnings) where warnings are one-line strings for optimiser
    stops that were not convergence and for hyperparameters that ended on a bound.
    """
    def negative(theta):
        value, grad = objective(theta)
        return -value, -grad

    lo, hi = np.array(box).T
    starts = [np.clip(theta0, lo, hi)]
    rng = np.random.default_rng(seed)
    starts += [rng.uniform(lo, hi) for _ in range(n_restarts)]
    best = None
    for start in starts:
        res = minimize(negative, start, jac=True, method="L-BFGS-B", bounds=box,
                       options={"maxiter": max_iter, **LBFGS_OPTIONS})
        if best is None or res.fun < best.fun:
            best = res
    warnings = []
    if not best.success:
        warnings.append(f"L-BFGS-B stopped without convergence: {best.message}")
    names = names or [f"theta[{j}]" for j in range(len(theta0))]
    for name, t, a, b in zip(names, best.x, lo, hi):
        if min(t - a, b - t) < 1e-6:
            warnings.append(f"hyperparameter {name} reached its bound {np.exp(t):.4g}")
    return best.x, -best.fun, warnings
