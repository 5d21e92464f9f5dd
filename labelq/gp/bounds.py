"""Cheap upper bounds on the binary latent variance, for scoring large pools.

For a binary posterior (Laplace, GPML Alg. 3.2; EP, Alg. 3.6) the latent predictive variance is

    var(x) = k(x, x) - |v|^2,   v = L^-1 S k_x,   L L^T = B = I + S K S,

with S = W^1/2 (Laplace) or the square roots of the EP site precisions. It is the variance of
f(x) given n Gaussian pseudo-observations of the training latents with precisions S^2. In any
order of the training rows, the first m components of v are L_m^-1 S_m k_m, with L_m the
leading m x m block of the Cholesky factor of B in that order (a leading block of a Cholesky
factor is the factor of the leading block), and

    var_m(x) = k(x, x) - sum_{i < m} v_i^2

is the variance of f(x) given the first m pseudo-observations only. Conditioning on fewer
Gaussian observations never lowers a variance, so var_m(x) >= var(x), falling monotonically
to var(x) at m = n, and it costs m^2 / 2 flops per row instead of n^2 / 2.

The order here is that of a pivoted Cholesky factorisation of B (LAPACK pstrf: at each step
the row with the largest remaining diagonal, 1 + S_i^2 var(f_i | rows before), i.e. the
pseudo-observation that is most informative about its own latent given those before), so that
few leading rows explain most of the variance of the pool.
"""
import threading
from collections import namedtuple
from concurrent.futures import ThreadPoolExecutor

import numpy as np
from scipy.linalg import cholesky, lapack, solve_triangular

from labelq.gp.classifier import POOL_CHUNK_BYTES, Prediction
from labelq.gp.posterior import TINY_VARIANCE, b_matrix

LeadingFactor = namedtuple("LeadingFactor", ["order", "factor", "scales"])
LeadingFactor.__doc__ = """The leading part of the pivoted factor of a binary posterior.

order (n,) int: the training rows in pivot order; factor (m, m) lower triangular
A_m = L_m^-1 S_m for the first m of them; scales (n,): S in training order."""

_UNIT_ROUNDOFF = 2.0 ** -53


def pseudo_observation_scales(model):
    """S (n,) of a fitted binary GPClassifier: W^1/2 at the Laplace mode (GPML Alg. 3.1 line 4,
    W = -grad grad log p(y | f) at f = K a) or the square roots of the EP site precisions
    (GPML Alg. 3.5, S~^1/2). ValueError for a multi-class or unfitted model."""
    model._check_fitted()
    post = model.posterior_
    if post is None or post.factor is None:
        raise ValueError("variance bounds need a binary model fitted on two classes")
    if "tau" in post.state:
        return np.sqrt(np.maximum(post.state["tau"], 0.0))
    f = model.kernel_(model._Xs) @ post.state["a"]
    d2 = model.likelihood_.derivatives(model._targets(model.codes_), f)[2]
    return np.sqrt(np.maximum(-d2, 0.0))


def leading_factor(model, m):
    """`LeadingFactor` of the first m (clipped to [0, n]) rows in pivoted-Cholesky order of B."""
    scales = pseudo_observation_scales(model)
    n = scales.size
    m = int(min(max(m, 0), n))
    L, piv, _, info = lapack.dpstrf(b_matrix(model.kernel_(model._Xs), scales), lower=1)
    if info < 0:
        raise ValueError(f"pivoted Cholesky failed (LAPACK dpstrf info {info})")
    # B has eigenvalues >= 1, so the factorisation runs to the full rank (info 0); pstrf leaves
    # the strict upper triangle as it found it, and only the leading block is read
    order = piv.astype(np.int64) - 1  # LAPACK's pivots count from 1
    factor = solve_triangular(np.tril(L[:m, :m]), np.diag(scales[order[:m]]), lower=True,
                              check_finite=False)  # A_m = L_m^-1 S_m (GPML Alg. 3.2 line 5)
    return LeadingFactor(order, factor, scales)


def rounding_allowance(kss, k_norm, scale_norm, n):
    """Per-row allowance (N,) added to var_m so that it still bounds the variance computed in
    floating point, by `bounded_prediction` and by `GPClassifier.predict_pool` in double
    precision.

    B >= I gives |(L^-1)_ij| <= 1, hence |A_ij| <= S_j and, by the error bound of a triangular
    product (Higham, Accuracy and Stability of Numerical Algorithms, sec. 3.5: |fl(A k) - A k|
    <= gamma_n |A| |k| with gamma_n about n u; section number from memory),
    |dv| <= n u sqrt(n) |S| |k| with unit roundoff u. The squared norm then errs by at most
    2 |v| |dv| plus n u |v|^2, with |v|^2 <= k(x, x). Doubled for the two computations
    compared, and doubled again.
    """
    v_norm = np.sqrt(kss)
    return 4.0 * n * _UNIT_ROUNDOFF * (2.0 * np.sqrt(n) * scale_norm * k_norm * v_norm + kss)


def _pool_shape(model, X, chunk_size, n_jobs):
    """(X as an array, training size n, rows per chunk), with the pool's shape checked now and
    its values chunk by chunk; chunks as for `GPClassifier.predict_pool` by default."""
    X = np.asarray(X)
    model._transform(X[:0] if X.ndim == 2 else X)
    n = model._Xs.shape[0]
    if chunk_size is None:
        chunk_size = min(65536, max(256, POOL_CHUNK_BYTES // (12 * n)))
    if int(chunk_size) < 1 or int(n_jobs) < 1:
        raise ValueError(f"chunk_size and n_jobs must be >= 1, got {chunk_size!r}, {n_jobs!r}")
    return X, n, max(1, min(int(chunk_size), len(X)))


def _map_chunks(model, X, train, chunk, n_jobs, rows):
    """[rows(K(x, train) (c, n), k(x, x) (c,)) for each chunk of c <= chunk rows of X], the
    chunks standardised one at a time (no second copy of a large pool) and, with n_jobs > 1,
    spread over worker threads, each with one kernel buffer for all its chunks."""
    local = threading.local()

    def work(start):
        if not hasattr(local, "kernel"):
            local.kernel = np.empty((chunk, train.shape[0]))
        try:
            Xc = model._transform(X[start:start + chunk])
        except ValueError:
            model._transform(X)  # the same message, with the row counted from the pool's start
            raise
        return rows(model.kernel_(Xc, train, out=local.kernel[:len(Xc)]), model.kernel_.diag(Xc))

    starts = range(0, len(X), chunk)
    if int(n_jobs) > 1 and len(starts) > 1:
        with ThreadPoolExecutor(min(int(n_jobs), len(starts))) as pool:
            return list(pool.map(work, starts))
    return [work(start) for start in starts]


def bounded_prediction(model, X, m, chunk_size=None, n_jobs=1, lead=None, proba=True):
    """`Prediction(proba, mean, var)` for the rows of X (N, d) under a fitted binary
    GPClassifier, with an upper bound in place of the latent variance.

    mean : k_x^T weights (GPML Alg. 3.2 line 4), exact to rounding (summed in pivot order).
    var : var_m(x) of the module docstring from the first m rows in pivot order, plus
        `rounding_allowance`, floored at the tiny variance of `latent_moments`: at least the
        variance of `predict_pool(precision="double")`, which m = n gives to rounding.
    proba : the model's averaged class probabilities (N, 2) at that mean and variance.
    lead : a `LeadingFactor` of this model with m rows, computed when not given.
    proba : False leaves the probabilities out (None): the averaged probability is the larger
        part of the cost of a row.
    chunk_size, n_jobs : as for `GPClassifier.predict_pool` (bounded memory, worker threads;
        give BLAS one thread per worker).
    """
    lead = leading_factor(model, m) if lead is None else lead
    m = lead.factor.shape[0]
    X, n, chunk = _pool_shape(model, X, chunk_size, n_jobs)
    train = model._Xs[lead.order]  # the leading rows first: their kernel columns are a slice
    weights = model.posterior_.weights[lead.order]
    scale_norm = float(np.linalg.norm(lead.scales))
    train_trace = float(model.kernel_.diag(train).sum())
    factor_t = np.ascontiguousarray(lead.factor.T)

    def rows(Ks, kss):
        mean = Ks @ weights
        V = Ks[:, :m] @ factor_t  # the first m components of v, one row per pool row
        k_norm = np.sqrt(kss * train_trace)  # |k_x| <= (k(x, x) tr K)^1/2 (Cauchy-Schwarz)
        var = kss - np.einsum("ij,ij->i", V, V) + rounding_allowance(kss, k_norm, scale_norm, n)
        var = np.maximum(var, TINY_VARIANCE)
        return (model._proba_from_latent(mean, var) if proba else None), mean, var

    parts = _map_chunks(model, X, train, chunk, n_jobs, rows)
    if not parts:
        empty = np.zeros(0)
        return Prediction(np.zeros((0, 2)) if proba else None, empty, empty.copy())
    return Prediction(np.concatenate([p[0] for p in parts]) if proba else None,
                      *(np.concatenate([p[i] for p in parts]) for i in (1, 2)))


# ------------------------------------------------------------------------------ softmax
# The multi-class Laplace posterior (GPML Alg. 3.3, 3.4; one latent per class, shared kernel)
# is the prior times Gaussian pseudo-observations of the n training points, point i with the
# (C, C) precision W_i = diag(pi_i) - pi_i pi_i^T (GPML eq. 3.38). W_i = F_i F_i^T with
# F_i = (I - pi_i 1^T) diag(pi_i)^1/2 (multiply out, using sum_c pi_ic = 1). The predictive
# covariance of the class latents at x given the pseudo-observations of a set S of points is
#
#     Sigma_S(x) = k(x, x) I - Q^T F (I + F^T K_S F)^-1 F^T Q,    (Woodbury; GPML eq. 3.43 in the
#                                                                   form of Alg. 3.2 line 5)
#
# with F the block-diagonal of the F_i over S, K_S = I_C (x) K(S, S) and Q = I_C (x) k_S(x). Its
# diagonal at S = all n points is the model's own per-class variance k** - k*^T P_c k*
# (`multiclass.posterior_from_mode`, GPML eq. 3.41-3.42), and conditioning on fewer Gaussian
# observations never lowers a variance (the precision K^-1 + sum_{i in S} W_i only grows with
# S), so the first m points of any order give an upper bound of every class's variance. Column
# c of F^T Q is sum_a F_i[c, a] k_i(x) in slot (a, i), i.e. Phi_c k_S(x) with Phi_c (mC, m), so
#
#     var_c(x) <= k(x, x) - |T_c k_S(x)|^2,   T_c = L^-1 Phi_c,   L L^T = I + F^T K_S F,
#
# m C^2 m flops per row for all classes (m = 64, C = 3: 37,000, against C n^2 = 3e6 at n = 1,000).

SoftmaxLead = namedtuple("SoftmaxLead", ["order", "maps"])
SoftmaxLead.__doc__ = """The leading points of a multi-class Laplace posterior: order (n,) the
training rows in the order used (the first m carry the bound), maps (C, m, m C) the matrices
T_c^T (`softmax_bounded_latent`)."""


def softmax_lead(model, m):
    """`SoftmaxLead` of a fitted multi-class GPClassifier (Laplace, softmax) with the first m
    (clipped to [0, n]) training points of a pivoted Cholesky order of I + S K S,
    S_i^2 = sum_c pi_ic (1 - pi_ic) (the trace of W_i; any order gives a bound, this one puts
    first the points whose pseudo-observations say most about their own latents)."""
    model._check_fitted()
    post = model.posterior_
    if post is None or not post.multiclass or "a" not in post.state:
        raise ValueError("softmax variance bounds need a multi-class Laplace model")
    K = model.kernel_(model._Xs)
    Pi = _softmax_rows(K @ post.state["a"])
    n, n_classes = Pi.shape
    m = int(min(max(m, 0), n))
    trace_w = np.sqrt(np.maximum((Pi * (1.0 - Pi)).sum(1), 0.0))
    _, piv, _, info = lapack.dpstrf(b_matrix(K, trace_w), lower=1)
    if info < 0:
        raise ValueError(f"pivoted Cholesky failed (LAPACK dpstrf info {info})")
    order = piv.astype(np.int64) - 1
    lead = order[:m]
    P = Pi[lead]  # (m, C)
    root = np.sqrt(P)
    # F_i[c, a] = (delta_ca - pi_ic) sqrt(pi_ia), (m, C, C)
    Fi = (np.eye(n_classes)[None] - P[:, :, None]) * root[:, None, :]
    Ks = K[np.ix_(lead, lead)]
    # I + F^T K_S F in slots (a, i): sum_c F_i[c, a] K_ij F_j[c, b]
    G = np.einsum("ica,jcb->aibj", Fi, Fi) * Ks[None, :, None, :]
    G = G.reshape(n_classes * m, n_classes * m)
    G[np.diag_indices_from(G)] += 1.0
    L = cholesky(G, lower=True, check_finite=False)  # eigenvalues >= 1: no jitter needed
    maps = np.empty((n_classes, m, n_classes * m))
    for c in range(n_classes):
        phi = np.zeros((n_classes, m, m))
        phi[:, np.arange(m), np.arange(m)] = Fi[:, c, :].T  # Phi_c[(a, i), i] = F_i[c, a]
        maps[c] = solve_triangular(L, phi.reshape(n_classes * m, m), lower=True,
                                   check_finite=False).T
    return SoftmaxLead(order, maps)


def _softmax_rows(F):
    F = F - F.max(axis=1, keepdims=True)
    E = np.exp(F)
    return E / E.sum(axis=1, keepdims=True)


def softmax_rounding_allowance(kss, k_norm2, n, n_classes):
    """Per-row allowance (N,) added to the softmax variance bound so that it still bounds the
    variance computed in floating point by `GPClassifier.predict_pool` (k** - k^T P_c k by one
    GEMM and a row sum) and by `softmax_bounded_latent`.

    0 <= P_c <= E_c <= D_c <= I (GPML eq. 3.41: E_c = D^1/2 B_c^-1 D^1/2 with B_c >= I), so
    || |P_c| ||_2 <= ||P_c||_F <= sqrt(n), and the error of k^T P_c k summed in floating point is
    at most gamma_2n |k|^T |P_c| |k| <= 2 n u sqrt(n) |k|^2 (Higham, Accuracy and Stability of
    Numerical Algorithms, sec. 3.5, from memory). The bound's |T_c k_S|^2 has entries of L^-1
    at most 1 (L L^T >= I) and of Phi_c at most 1, which gives a smaller figure of the same
    form with m C in place of n. Both, plus the subtraction from k**, doubled.
    """
    u = _UNIT_ROUNDOFF
    return 4.0 * n * u * (np.sqrt(n) * n_classes * k_norm2 + kss)


def softmax_bounded_latent(model, X, m=None, chunk_size=None, n_jobs=1, lead=None):
    """(mean, var_upper), (N, C) each, of a fitted multi-class Laplace GPClassifier at the rows of
    X (N, d): the exact latent mean k_x^T (y - pi) (GPML Alg. 3.4) and, per class, the variance
    given the first m leading points (see above) plus `softmax_rounding_allowance`, floored at
    the tiny variance of `latent_moments`: at least each class's variance from
    `predict_pool(precision="double")`.
    """
    if lead is None:
        lead = softmax_lead(model, 64 if m is None else m)
    n_classes, m = lead.maps.shape[0], lead.maps.shape[1]
    X, n, chunk = _pool_shape(model, X, chunk_size, n_jobs)
    train = model._Xs[lead.order]
    weights = model.posterior_.weights[lead.order]
    train_trace = float(model.kernel_.diag(train).sum())
    maps = [np.ascontiguousarray(lead.maps[c]) for c in range(n_classes)]

    def rows(Ks, kss):
        mean = Ks @ weights
        lead_k = Ks[:, :m]
        slack = softmax_rounding_allowance(kss, kss * train_trace, n, n_classes)
        var = np.empty_like(mean)
        for c in range(n_classes):
            V = lead_k @ maps[c]  # (rows, m C): T_c k_S(x), one row per pool row
            var[:, c] = kss - np.einsum("ij,ij->i", V, V) + slack
        return mean, np.maximum(var, TINY_VARIANCE)

    parts = _map_chunks(model, X, train, chunk, n_jobs, rows)
    if not parts:
        return np.zeros((0, n_classes)), np.zeros((0, n_classes))
    return tuple(np.concatenate([p[i] for p in parts]) for i in range(2))
