"""Binary Laplace approximation: mode, marginal likelihood, gradient and predictive weights.

GPML Alg. 3.1 (mode by Newton's method in the stable form with B = I + W^1/2 K W^1/2),
Alg. 3.2 (predictions) and Alg. 5.1 (gradient of the approximate log marginal likelihood).
Targets y are coded -1 / +1.
"""
import numpy as np
from scipy.linalg import cho_solve, solve_triangular

from labelq.gp.posterior import Posterior, b_matrix, robust_cholesky, scaled_inverse

TOLERANCE = 1e-10
MAX_ITER = 100
MAX_HALVINGS = 30


def _objective(a, f, y, link):
    """Psi(f) = log p(y | f) - a^T f / 2 with f = K a (GPML eq. 3.12 in the a-parametrisation)."""
    return link.derivatives(y, f)[0].sum() - 0.5 * a @ f


def _newton_direction(K, y, f, link):
    """Newton target a_new for the current f (GPML Alg. 3.1 lines 4-7)."""
    _, d1, d2, _ = link.derivatives(y, f)
    W = np.maximum(-d2, 0.0)  # line 4; W >= 0 for log-concave links, guard rounding
    sW = np.sqrt(W)
    L, _ = robust_cholesky(b_matrix(K, sW))  # line 5
    b = W * f + d1  # line 6
    return b - sW * cho_solve((L, True), sW * (K @ b), check_finite=False)  # line 7


def find_mode(K, y, link, a0=None):
    """Posterior mode by damped Newton iterations in the a-parametrisation.

    K : (n, n) prior covariance; y : (n,) in {-1, +1}; a0 : optional start (n,), f0 = K a0 so that
    f = K a holds exactly. A start worse than a = 0 is replaced by 0. The step is halved while the
    objective drops (GPML sec. 3.4.1 suggests this safeguard). Returns (a, n_iter, warnings).
    """
    n = len(y)
    a = np.zeros(n)
    f = np.zeros(n)
    psi = _objective(a, f, y, link)
    if a0 is not None:
        f0 = K @ a0
        psi0 = _objective(a0, f0, y, link)
        if psi0 > psi:
            a, f, psi = a0.copy(), f0, psi0
    for it in range(1, MAX_ITER + 1):
        step = _newton_direction(K, y, f, link) - a
        t = 1.0
        for _ in range(MAX_HALVINGS):
            a_new = a + t * step
            f_new = K @ a_new  # line 8
            psi_new = _objective(a_new, f_new, y, link)
            if psi_new >= psi - 1e-12 * abs(psi):
                break
            t *= 0.5
        improvement = psi_new - psi
        a, f, psi = a_new, f_new, psi_new
        if improvement < TOLERANCE * max(1.0, abs(psi)) or np.max(np.abs(t * step)) < 1e-12:
            return a, it, []
    return a, MAX_ITER, [f"Laplace Newton iteration did not converge in {MAX_ITER} steps"]


def _state(K, y, link, a):
    """Quantities at the mode f = K a shared by the likelihood, gradient and predictions."""
    f = K @ a
    log_p, d1, d2, d3 = link.derivatives(y, f)
    sW = np.sqrt(np.maximum(-d2, 0.0))
    L, _ = robust_cholesky(b_matrix(K, sW))
    # GPML Alg. 3.1 line 10: log q(y|X) = -a^T f / 2 + sum log p(y|f) - sum log L_ii
    lml = -0.5 * a @ f + log_p.sum() - np.log(np.diag(L)).sum()
    return d1, d3, sW, L, lml


def fit(K, y, link, a0=None):
    """Fit the binary Laplace posterior; returns a `Posterior` (weights = grad log p at the mode,
    GPML Alg. 3.2 line 4; factor A = L^-1 W^1/2 so that W^1/2 B^-1 W^1/2 = A^T A, line 5)."""
    a, n_iter, warnings = find_mode(K, y, link, a0)
    return posterior_from_mode(K, y, link, a, n_iter, warnings)


def posterior_from_mode(K, y, link, a, n_iter=0, warnings=()):
    """Build the `Posterior` from mode weights a (used by `fit` and when reloading a model)."""
    d1, _, sW, L, lml = _state(K, y, link, a)
    A = solve_triangular(L, np.diag(sW), lower=True, check_finite=False)  # Alg. 3.2 line 5
    return Posterior(d1, None, float(lml), n_iter, {"a": a}, list(warnings), factor=A)


def lml_and_gradient(kernel, X, K, y, link, a0=None):
    """Approximate log marginal likelihood and its gradient in the log hyperparameters.

    GPML Alg. 5.1. Returns (lml, grad (p + 1,), posterior).
    """
    a, n_iter, warnings = find_mode(K, y, link, a0)
    d1, d3, sW, L, lml = _state(K, y, link, a)
    R = scaled_inverse(L, sW)  # Alg. 5.1: R = W^1/2 B^-1 W^1/2
    C = solve_triangular(L, sW[:, None] * K, lower=True, check_finite=False)  # Alg. 5.1: C
    # Alg. 5.1 s2, implicit part: d log q / d f_i = -1/2 Sigma_ii dW_ii/df_i with W = -d2, hence
    # +1/2 Sigma_ii d3_i, Sigma = (K^-1 + W)^-1 (GPML eq. 5.23; sign from W = -grad grad log p)
    s2 = 0.5 * (np.diag(K) - (C * C).sum(0)) * d3
    u = s2 - R @ (K @ s2)  # s2^T (b - K R b) = (s2 - R K s2)^T dK d1 (Alg. 5.1 s3)
    # Alg. 5.1 s1 + s2^T s3
    G = 0.5 * np.outer(d1, d1) - 0.5 * R + 0.5 * (np.outer(u, d1) + np.outer(d1, u))
    grad = kernel.gradient_contractions(X, K, G)
    post = Posterior(d1, R, float(lml), n_iter, {"a": a}, warnings)
    return float(lml), grad, post
