"""Binary Laplace approximation: mode, marginal likelihood, gradient and predictive weights.

GPML Alg. 3.1 (mode by Newton's method in the stable form with B = I + W^1/2 K W^1/2),
Alg. 3.2 (predictions) and Alg. 5.1 (gradient of the approximate log marginal likelihood).
Targets y are coded -1 / +1.
"""
import numpy as np
from scipy.linalg import blas, cho_solve, solve_triangular

from labelq.gp.posterior import Posterior, b_matrix, inverse_lower, robust_cholesky

TOLERANCE = 1e-10
"""Newton stops when the predicted gain of the next full step is below TOLERANCE max(1, |Psi|)
while hyperparameters are searched: the marginal likelihood is then within about that much of
its value at the exact mode, far below what moves the optimiser."""
FINAL_TOLERANCE = 1e-20
"""The same for the posterior kept for predictions: with quadratic convergence this costs at
most one more iteration and gives the mode to about machine precision."""
MAX_ITER = 100
MAX_HALVINGS = 30


def _objective(a, f, y, link):
    """Psi(f) = log p(y | f) - a^T f / 2 with f = K a (GPML eq. 3.12 in the a-parametrisation)."""
    return link.derivatives(y, f)[0].sum() - 0.5 * a @ f


class _Point:
    """Link derivatives and the Cholesky factor of B at one latent vector f (GPML Alg. 3.1
    lines 4-5); reused for the Newton step from f and, when f is returned as the mode, for the
    marginal likelihood, gradient and predictions, so the mode costs no extra factorisation."""

    def __init__(self, K, y, f, link):
        self.log_p, self.d1, d2, self.d3 = link.derivatives(y, f)
        self.W = np.maximum(-d2, 0.0)  # line 4; W >= 0 for log-concave links, guard rounding
        self.sW = np.sqrt(self.W)
        self.L, _ = robust_cholesky(b_matrix(K, self.sW))  # line 5

    def newton_target(self, K, f):
        """a_new of GPML Alg. 3.1 lines 6-7 (the full Newton step gives f_new = K a_new)."""
        b = self.W * f + self.d1  # line 6
        return b - self.sW * cho_solve((self.L, True), self.sW * (K @ b), check_finite=False)


def _mode(K, y, link, a0=None, tolerance=FINAL_TOLERANCE, f_hint=None):
    """Posterior mode by damped Newton iterations in the a-parametrisation.

    a0 : None, one start (n,) or candidate starts (k, n); the one with the highest objective is
    used if it beats a = 0. f_hint : optional latent vector (n,), typically the mode under the
    previous hyperparameters; lines 4-7 of Alg. 3.1 need only f, so one Newton step from it gives
    one more consistent candidate start (its f = K a). Under new hyperparameters the latent mode
    moves less than K a_old does, and this start saved a sixth of the factorisations of a
    hyperparameter search in our benchmark. Returns (a, f, point at f, n_iter, warnings). Convergence is tested before stepping, by the
    Newton decrement: the full step from f would raise Psi by about
    lambda^2 / 2 = (df^T (K^-1 + W) df) / 2 = (step^T df + df^T W df) / 2 with df = K step
    (Boyd & Vandenberghe, Convex Optimization, sec. 9.5.1). Stopping there, rather than after
    a last negligible step, leaves the factor at the returned mode already computed.
    """
    n = len(y)
    a = np.zeros(n)
    f = np.zeros(n)
    psi = _objective(a, f, y, link)
    starts = [] if a0 is None else list(np.atleast_2d(a0))
    extra = 0
    if f_hint is not None:
        starts.append(_Point(K, y, f_hint, link).newton_target(K, f_hint))
        extra = 1
    for start in starts:
        f0 = K @ start
        psi0 = _objective(start, f0, y, link)
        if psi0 > psi:
            a, f, psi = start.copy(), f0, psi0
    gain = np.inf
    for it in range(MAX_ITER + 1):
        point = _Point(K, y, f, link)
        step = point.newton_target(K, f) - a
        df = K @ step
        decrement = 0.5 * (step @ df + (point.W * df) @ df)
        scale = max(1.0, abs(psi))
        # Converged when the next step would gain almost nothing, or when the last one did (on
        # badly conditioned K, e.g. a huge signal variance, rounding in K step keeps the computed
        # decrement above any tight tolerance while Psi no longer moves).
        if (decrement < tolerance * scale or gain < TOLERANCE * scale
                or np.max(np.abs(step)) < 1e-12):
            return a, f, point, it + 1 + extra, []  # iterations of Alg. 3.1 lines 4-7
        if it == MAX_ITER:
            break
        t = 1.0
        for _ in range(MAX_HALVINGS):
            a_new = a + t * step
            f_new = K @ a_new  # line 8
            psi_new = _objective(a_new, f_new, y, link)
            if psi_new >= psi - 1e-12 * abs(psi):
                break
            t *= 0.5
        gain = psi_new - psi
        a, f, psi = a_new, f_new, psi_new
    return a, f, point, MAX_ITER, [
        f"Laplace Newton iteration did not converge in {MAX_ITER} steps"]


def find_mode(K, y, link, a0=None):
    """Posterior mode weights by Newton's method (GPML Alg. 3.1 lines 2-8) with step halving.

    K : (n, n) prior covariance; y : (n,) in {-1, +1}; a0 : optional start (n,), f0 = K a0 so that
    f = K a holds exactly. A start worse than a = 0 is replaced by 0. The step is halved while the
    objective drops (GPML sec. 3.4.1 suggests this safeguard). Returns (a, n_iter, warnings).
    """
    a, _, _, n_iter, warnings = _mode(K, y, link, a0)
    return a, n_iter, warnings


def _lml(a, f, point):
    """GPML Alg. 3.1 line 10: log q(y|X) = -a^T f / 2 + sum log p(y|f) - sum log L_ii."""
    return -0.5 * a @ f + point.log_p.sum() - np.log(np.diag(point.L)).sum()


def fit(K, y, link, a0=None):
    """Fit the binary Laplace posterior; returns a `Posterior` (weights = grad log p at the mode,
    GPML Alg. 3.2 line 4; factor A = L^-1 W^1/2 so that W^1/2 B^-1 W^1/2 = A^T A, line 5)."""
    a, f, point, n_iter, warnings = _mode(K, y, link, a0)
    return _posterior(a, f, point, n_iter, warnings)


def posterior_from_mode(K, y, link, a, n_iter=0, warnings=()):
    """Build the `Posterior` from mode weights a (used when reloading a model)."""
    f = K @ a
    return _posterior(a, f, _Point(K, y, f, link), n_iter, warnings)


def _posterior(a, f, point, n_iter, warnings):
    A = solve_triangular(point.L, np.diag(point.sW), lower=True, check_finite=False)  # line 5
    return Posterior(point.d1, None, float(_lml(a, f, point)), n_iter, {"a": a},
                     list(warnings), factor=A)


def lml_and_gradient(kernel, X, K, y, link, a0=None, f_hint=None):
    """Approximate log marginal likelihood and its gradient in the log hyperparameters.

    GPML Alg. 5.1. Returns (lml, grad (p + 1,), posterior); the posterior carries the mode
    (state "a", and "f" as the next call's f_hint) and the LML for warm starts, not predictive
    matrices (use `fit` for those).
    """
    a, f, point, n_iter, warnings = _mode(K, y, link, a0, TOLERANCE, f_hint)
    d1, d3, W, sW = point.d1, point.d3, point.W, point.sW
    # Alg. 5.1: R = W^1/2 B^-1 W^1/2, held as the lower triangle of B^-1 and applied as
    # R x = sW (B^-1 (sW x)) (BLAS symv)
    b_inv, b_inv_diag = inverse_lower(point.L)
    # Alg. 5.1 s2, implicit part: d log q / d f_i = -1/2 Sigma_ii dW_ii/df_i with W = -d2, hence
    # +1/2 Sigma_ii d3_i, Sigma = (K^-1 + W)^-1 (GPML eq. 5.23; sign from W = -grad grad log p).
    # GPML takes diag(Sigma) = diag(K) - colsum(C^2), C = L \ (W^1/2 K), a triangular solve with
    # n right-hand sides. Woodbury gives B^-1 = I - W^1/2 Sigma W^1/2, so
    # Sigma_ii = (1 - (B^-1)_ii) / W_ii from the inverse we already hold. Its rounding error,
    # eps cond(B) / W_ii, is multiplied by |d3_i| <= W_ii (logistic) or <= W_ii (|f| + 2) (probit),
    # so s2 keeps an absolute error of order eps cond(B); where W_ii = 0 the term is 0.
    K_diag = np.diag(K)
    positive = W > 0
    sigma = np.where(positive, (1.0 - b_inv_diag) / np.where(positive, W, 1.0), K_diag)
    s2 = 0.5 * np.clip(sigma, 0.0, K_diag) * d3
    # s2^T (b - K R b) = (s2 - R K s2)^T dK d1 (Alg. 5.1 s3)
    u = s2 - sW * blas.dsymv(1.0, b_inv, sW * (K @ s2), lower=1)
    # Alg. 5.1 s1 + s2^T s3: G = (d1 d1^T - R + u d1^T + d1 u^T) / 2
    #                          = ((d1 + u)(d1 + u)^T - u u^T - W^1/2 B^-1 W^1/2) / 2
    grad = kernel.structured_gradient_contractions(
        X, K, [(0.5, d1 + u), (-0.5, u)], sW, b_inv, -0.5)
    post = Posterior(d1, None, float(_lml(a, f, point)), n_iter, {"a": a, "f": f}, warnings)
    return float(post.log_marginal_likelihood), grad, post
