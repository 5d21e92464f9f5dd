"""Expectation propagation for binary GP classification with the probit likelihood.

GPML Alg. 3.5 (EP sweeps and log Z_EP), Alg. 3.6 (predictions) and Alg. 5.2 (gradient of
log Z_EP). The sites are updated in parallel: every site is refreshed from its cavity at once,
then the posterior is recomputed with one Cholesky factorisation (the fixed points are those of
the sequential sweep of Alg. 3.5; parallel updates avoid a Python loop over points). Updates are
damped when the change in site parameters grows. Targets y are coded -1 / +1.
"""
import numpy as np
from scipy.linalg import cho_solve, solve_triangular
from scipy.special import log_ndtr

from labelq.gp.links import normal_hazard
from labelq.gp.posterior import Posterior, b_matrix, inverse_lower, robust_cholesky

TOLERANCE = 1e-10
MAX_ITER = 500
MIN_PRECISION = 1e-12


def _posterior_moments(K, tau, nu):
    """Posterior mean and marginal variances for sites (tau, nu) (GPML Alg. 3.5: Sigma and mu
    recomputed from L and V after a sweep).

    Returns (mu (n,), var (n,), sS = sqrt(tau), L = chol(I + sS K sS)).
    """
    sS = np.sqrt(tau)
    L, _ = robust_cholesky(b_matrix(K, sS))
    V = solve_triangular(L, sS[:, None] * K, lower=True, check_finite=False)
    var = np.diag(K) - (V * V).sum(0)
    mu = K @ nu - V.T @ (V @ nu)  # Sigma nu with Sigma = K - V^T V
    return mu, np.maximum(var, MIN_PRECISION), sS, L


def _cavity(mu, var, tau, nu):
    """Cavity parameters (GPML eq. 3.56), precisions guarded to stay positive."""
    tau_cav = np.maximum(1.0 / var - tau, MIN_PRECISION)
    nu_cav = mu / var - nu
    return tau_cav, nu_cav


def _site_update(y, tau_cav, nu_cav):
    """New site parameters from the tilted moments of the probit likelihood (GPML eq. 3.58, 3.59).

    Negative site precisions (impossible in exact arithmetic for the log-concave probit) are
    clipped to zero.
    """
    var_cav = 1.0 / tau_cav
    mu_cav = nu_cav * var_cav
    denom = np.sqrt(1.0 + var_cav)
    z = y * mu_cav / denom
    r = normal_hazard(z)  # N(z) / Phi(z) without underflow
    mu_hat = mu_cav + y * var_cav * r / denom
    var_hat = var_cav - var_cav**2 * r * (z + r) / (1.0 + var_cav)
    var_hat = np.maximum(var_hat, MIN_PRECISION * var_cav)
    tau_new = np.maximum(1.0 / var_hat - tau_cav, 0.0)
    nu_new = mu_hat / var_hat - nu_cav
    return tau_new, nu_new


def log_z(K, y, tau, nu):
    """EP approximation log Z_EP of the log marginal likelihood for sites (tau, nu).

    GPML eq. 3.65 in the stable form of eq. 3.73-3.74 (cavities from the posterior implied by the
    sites). With all sites zero this is n log(1/2). Returns (log Z, mu, var, sS, L).
    """
    mu, var, sS, L = _posterior_moments(K, tau, nu)
    tau_cav, nu_cav = _cavity(mu, var, tau, nu)
    var_cav = 1.0 / tau_cav
    log_phi = log_ndtr(y * nu_cav * var_cav / np.sqrt(1.0 + var_cav))  # log Z_i, no underflow
    sigma_nu = mu  # Sigma nu
    value = (
        log_phi.sum()
        - np.log(np.diag(L)).sum()  # -1/2 log|B| (eq. 3.73)
        + 0.5 * nu @ sigma_nu
        + 0.5 * nu_cav @ ((tau / tau_cav * nu_cav - 2.0 * nu) / (tau + tau_cav))  # eq. 3.74
        - 0.5 * (nu**2 / (tau_cav + tau)).sum()
        + 0.5 * np.log1p(tau / tau_cav).sum()  # eq. 3.73
    )
    return float(value), mu, var, sS, L


def find_sites(K, y, tau0=None, nu0=None):
    """Run EP to convergence of log Z_EP and the sites; returns (tau, nu, n_iter, warnings)."""
    n = len(y)
    tau = np.zeros(n) if tau0 is None else np.maximum(tau0, 0.0)
    nu = np.zeros(n) if nu0 is None else nu0.copy()
    mu, var, _, _ = _posterior_moments(K, tau, nu)
    damping = 1.0
    previous_change = np.inf
    for it in range(1, MAX_ITER + 1):
        tau_cav, nu_cav = _cavity(mu, var, tau, nu)
        tau_new, nu_new = _site_update(y, tau_cav, nu_cav)
        change = max(np.max(np.abs(tau_new - tau)), np.max(np.abs(nu_new - nu)))
        if change > previous_change:
            damping = max(0.5 * damping, 0.05)
        previous_change = change
        tau = (1.0 - damping) * tau + damping * tau_new
        nu = (1.0 - damping) * nu + damping * nu_new
        mu, var, _, _ = _posterior_moments(K, tau, nu)
        if change < TOLERANCE * 10.0:
            return tau, nu, it, []
    return tau, nu, MAX_ITER, [f"EP did not converge in {MAX_ITER} sweeps (change {change:.2e})"]


def _mean_weights(K, nu, sS, L):
    """Mean weights b = nu - sS B^-1 sS K nu (GPML Alg. 3.6 z and f*-bar; the b of Alg. 5.2)."""
    return nu - sS * cho_solve((L, True), sS * (K @ nu), check_finite=False)


def posterior_from_sites(K, y, tau, nu, n_iter=0, warnings=()):
    """The `Posterior` for given sites (used by `fit` and when reloading a model)."""
    value, _, _, sS, L = log_z(K, y, tau, nu)
    b = _mean_weights(K, nu, sS, L)
    # Alg. 3.6: v := L \ (S^1/2 k*)
    A = solve_triangular(L, np.diag(sS), lower=True, check_finite=False)
    return Posterior(b, None, value, n_iter, {"tau": tau, "nu": nu}, list(warnings), factor=A)


def fit(K, y, tau0=None, nu0=None):
    """Fit EP (GPML Alg. 3.5) and return the `Posterior` for predictions (Alg. 3.6)."""
    tau, nu, n_iter, warnings = find_sites(K, y, tau0, nu0)
    return posterior_from_sites(K, y, tau, nu, n_iter, warnings)


def lml_and_gradient(kernel, X, K, y, tau0=None, nu0=None):
    """log Z_EP and its gradient in the log hyperparameters (GPML Alg. 5.2:
    d log Z / d theta_j = 1/2 tr((b b^T - R) dK / d theta_j)). Returns (lml, grad, posterior)."""
    tau, nu, n_iter, warnings = find_sites(K, y, tau0, nu0)
    value, _, _, sS, L = log_z(K, y, tau, nu)
    b = _mean_weights(K, nu, sS, L)
    # Alg. 5.2: 1/2 tr((b b^T - R) dK) with R = S^1/2 B^-1 S^1/2, contracted from the lower
    # triangle of B^-1 without forming R or the weight matrix
    b_inv, _ = inverse_lower(L)
    grad = kernel.structured_gradient_contractions(X, K, [(0.5, b)], sS, b_inv, -0.5)
    post = Posterior(b, None, value, n_iter, {"tau": tau, "nu": nu}, warnings)
    return value, grad, post
