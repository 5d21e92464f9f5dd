"""Multi-class Laplace approximation with the softmax likelihood.

One latent GP per class with a shared kernel K (so the joint prior is block diagonal with C
copies of K), fitted jointly: GPML Alg. 3.3 (mode, log marginal likelihood), Alg. 3.4
(predictions) and the gradient of the approximate log marginal likelihood (GPML sec. 5.5.2,
Alg. 5.1 extended to the softmax Hessian W = D - Pi Pi^T, GPML eq. 3.38).
Targets are one-hot Y of shape (n, C); latent arrays are (n, C).
"""
import numpy as np
from scipy.linalg import cho_solve, solve_triangular
from scipy.special import logsumexp, softmax

from labelq.gp.posterior import (Posterior, b_matrix, class_factors, robust_cholesky,
                                 scaled_inverse)

TOLERANCE = 1e-10
MAX_ITER = 100
MAX_HALVINGS = 30


def _objective(A, F, Y):
    """Psi = -a^T f / 2 + y^T f - sum_i log sum_c exp f_i^c (the log q of GPML Alg. 3.3
    without the determinant terms)."""
    return -0.5 * (A * F).sum() + (Y * F).sum() - logsumexp(F, axis=1).sum()


def _blocks(K, F):
    """Per-class pieces of GPML Alg. 3.3 (pi, L, E_c, z_c, M) at latent F.

    Returns (Pi (n, C), E (C, n, n), M lower Cholesky of sum_c E_c, log|B|).
    """
    n, n_classes = F.shape
    Pi = softmax(F, axis=1)
    E = np.empty((n_classes, n, n))
    log_det = 0.0
    for c in range(n_classes):
        sD = np.sqrt(Pi[:, c])
        L, _ = robust_cholesky(b_matrix(K, sD))  # L := chol(I + D_c^1/2 K D_c^1/2)
        # E_c := D_c^1/2 L^T \ (L \ D_c^1/2)
        E[c] = scaled_inverse(L, sD)
        log_det += np.log(np.diag(L)).sum()  # z_c := sum log L_ii
    M, _ = robust_cholesky(E.sum(0))  # M := chol(sum_c E_c)
    log_det += np.log(np.diag(M)).sum()  # log|B| = sum_c z_c + sum_i log M_ii (log q line)
    return Pi, E, M, log_det


def _apply_blocks(E, Q):
    """Block-diagonal product: column c of the result is E_c @ Q[:, c]; E (C, n, n), Q (n, C)."""
    return np.matmul(E, Q.T[:, :, None])[:, :, 0].T


def _newton_target(K, Y, F):
    """Newton target A_new (GPML Alg. 3.3, the b, c and a updates)."""
    Pi, E, M, _ = _blocks(K, F)
    # b := (D - Pi Pi^T) f + y - pi (eq. 3.39)
    B = Pi * F - Pi * (Pi * F).sum(1, keepdims=True) + Y - Pi
    Cv = _apply_blocks(E, K @ B)  # c := E K b
    v = cho_solve((M, True), Cv.sum(1), check_finite=False)  # M^T \ (M \ R^T c)
    # a := b - c + E R v
    return B - Cv + _apply_blocks(E, np.repeat(v[:, None], E.shape[0], axis=1))


def find_mode(K, Y, A0=None):
    """Joint posterior mode by Newton's method with step halving; A0 optional warm start (n, C)
    with F0 = K A0, replaced by zeros if its objective is worse. Returns (A, n_iter, warnings)."""
    A = np.zeros(Y.shape)
    F = np.zeros(Y.shape)
    psi = _objective(A, F, Y)
    if A0 is not None:
        F0 = K @ A0
        psi0 = _objective(A0, F0, Y)
        if psi0 > psi:
            A, F, psi = A0.copy(), F0, psi0
    for it in range(1, MAX_ITER + 1):
        step = _newton_target(K, Y, F) - A
        t = 1.0
        for _ in range(MAX_HALVINGS):
            A_new = A + t * step
            F_new = K @ A_new  # f := K a
            psi_new = _objective(A_new, F_new, Y)
            if psi_new >= psi - 1e-12 * abs(psi):
                break
            t *= 0.5
        improvement = psi_new - psi
        A, F, psi = A_new, F_new, psi_new
        if improvement < TOLERANCE * max(1.0, abs(psi)) or np.max(np.abs(t * step)) < 1e-12:
            return A, it, []
    return A, MAX_ITER, [f"multi-class Laplace Newton did not converge in {MAX_ITER} steps"]


def _class_precisions(E, M):
    """P_c = E_c - E_c (sum E)^-1 E_c, the diagonal blocks of (K + W^-1)^-1 (GPML eq. 3.41-3.42),
    via V_c = M^-1 E_c. Returns P (C, n, n)."""
    V = np.stack([solve_triangular(M, Ec, lower=True, check_finite=False) for Ec in E])
    return E - np.matmul(V.transpose(0, 2, 1), V)


def posterior_from_mode(K, Y, A, n_iter=0, warnings=()):
    """Posterior for predictions (GPML Alg. 3.4): weights y - pi (mean mu*_c = (y_c - pi_c)^T k*),
    per-class precisions P_c such that Sigma_cc = k** - k*^T P_c k* (its b, c and Sigma steps)."""
    F = K @ A
    Pi, E, M, log_det = _blocks(K, F)
    P = _class_precisions(E, M)
    lml = _objective(A, F, Y) - log_det
    return Posterior(Y - Pi, P, float(lml), n_iter, {"a": A}, list(warnings),
                     class_factors=class_factors(P))


def fit(K, Y, A0=None):
    """Fit the multi-class Laplace posterior (GPML Alg. 3.3 then 3.4)."""
    A, n_iter, warnings = find_mode(K, Y, A0)
    return posterior_from_mode(K, Y, A, n_iter, warnings)


def lml_and_gradient(kernel, X, K, Y, A0=None):
    """Approximate log marginal likelihood and its gradient in the log hyperparameters.

    log q = Psi(f^) - log|I + K W| / 2. Its derivative (GPML sec. 5.5.2, eq. 5.22 generalised):
      explicit: 1/2 sum_c a_c^T dK a_c - 1/2 tr(sum_c R_cc dK), R = (K + W^-1)^-1 with blocks
                R_cc' = delta_cc' E_c - E_c (sum E)^-1 E_c';
      implicit: s^T df^/dtheta with df^/dtheta = (I + K W)^-1 dK a (eq. 5.24), and per point i,
                s_ic = -1/2 tr(Sigma_i dW_i / df_ic), Sigma_i the (C, C) posterior block of point i;
                for W_i = diag(pi) - pi pi^T this is
                -1/2 pi_c (S_cc - sum_a pi_a S_aa - 2 (S pi)_c + 2 pi^T S pi).
    Returns (lml, grad, posterior).
    """
    A, n_iter, warnings = find_mode(K, Y, A0)
    F = K @ A
    Pi, E, M, log_det = _blocks(K, F)
    P = _class_precisions(E, M)
    lml = _objective(A, F, Y) - log_det
    n, n_classes = Y.shape
    # per-point (C, C) blocks of Sigma = K - K R K
    KE = np.matmul(K, E)  # K E_c
    T = np.stack([solve_triangular(M, KEc.T, lower=True, check_finite=False) for KEc in KE])
    S = np.empty((n, n_classes, n_classes))
    for c in range(n_classes):  # + K E_c (sum E)^-1 E_c' K, diagonal entries
        S[:, c, :c + 1] = np.einsum("ki,bki->ib", T[c], T[:c + 1])
        S[:, :c, c] = S[:, c, :c]
        S[:, c, c] += np.diag(K) - (KE[c] * K).sum(1)
    S_pi = np.einsum("iab,ib->ia", S, Pi)
    diag_S = np.einsum("iaa->ia", S)
    s = -0.5 * Pi * (diag_S - (Pi * diag_S).sum(1, keepdims=True) - 2.0 * S_pi
                     + 2.0 * (Pi * S_pi).sum(1, keepdims=True))
    # u = s - R K s, with (R q)_c = E_c q_c - E_c (sum E)^-1 sum_c' E_c' q_c'
    Q = K @ s
    EQ = _apply_blocks(E, Q)
    w = cho_solve((M, True), EQ.sum(1), check_finite=False)
    U = s - (EQ - _apply_blocks(E, np.repeat(w[:, None], n_classes, axis=1)))
    G = 0.5 * A @ A.T - 0.5 * P.sum(0) + 0.5 * (U @ A.T + A @ U.T)
    grad = kernel.gradient_contractions(X, K, G)
    post = Posterior(Y - Pi, P, float(lml), n_iter, {"a": A}, warnings)
    return float(lml), grad, post
