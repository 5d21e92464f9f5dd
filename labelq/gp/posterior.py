"""The Gaussian latent posterior shared by every inference engine.

For Laplace (GPML Alg. 3.2, 3.4) and EP (GPML Alg. 3.6) alike, the latent predictive at test
inputs with cross-covariance K* (m, n) is

    mean = K* @ weights                       (weights (n,) or (n, C))
    var  = k** - rowsum((K* @ M) * K*)        (M = `precision`, (n, n) or (C, n, n))

so predictions need one GEMM per chunk and class instead of a triangular solve. Binary
engines also keep a lower-triangular `factor` A with M = A^T A (A = L^-1 W^1/2, GPML Alg. 3.2
line 5 applied once to the identity; Alg. 3.6 line 5 for EP), so var = k** - |A k*|^2 costs one
triangular matrix product (BLAS trmm, half the flops of the GEMM).
"""
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import LinAlgError, blas, cho_solve, cholesky, lapack

TINY_VARIANCE = 1e-12


@dataclass
class Posterior:
    """Fitted latent posterior.

    weights : (n,) binary or (n, C) multi-class, the predictive-mean weights.
    precision : (n, n) binary or (C, n, n) multi-class, the matrices M above (None when
        `factor` is given).
    log_marginal_likelihood : approximate log marginal likelihood.
    n_iter : Newton or EP sweeps used.
    state : the engine's own parameters (mode weights or EP sites) for warm starts and storage.
    warnings : one-line strings about non-fatal numerical trouble.
    """

    weights: np.ndarray
    precision: np.ndarray
    log_marginal_likelihood: float
    n_iter: int
    state: dict
    warnings: list = field(default_factory=list)
    factor: np.ndarray = None
    class_factors: tuple = None
    """Multi-class: per class (A_c (n, n) lower triangular, order_c (n,)) with
    k^T P_c k = |A_c k[order_c]|^2 (`class_factors`), so a class variance costs one triangular
    product like a binary one."""
    _factor32_cache: np.ndarray = field(default=None, repr=False, compare=False)
    _class32_cache: tuple = field(default=None, repr=False, compare=False)

    @property
    def multiclass(self):
        return self.weights.ndim == 2


MIXED_REFINE = 1.0
"""Rows whose estimated single-precision rounding error exceeds this fraction of their variance
are recomputed in double precision (see `latent_moments`)."""
_SINGLE_ROUNDOFF = 2.0 ** -24


def _factor32(post):
    if post._factor32_cache is None:
        post._factor32_cache = np.asfortranarray(post.factor, dtype=np.float32)
    return post._factor32_cache


def _class_factors32(post):
    if post._class32_cache is None:
        post._class32_cache = tuple(np.asfortranarray(A, dtype=np.float32)
                                    for A, _ in post.class_factors)
    return post._class32_cache


def class_factors(precision):
    """Per class (A_c, order_c) with P_c = R^T R in the order of a pivoted Cholesky
    factorisation (LAPACK pstrf: P_c[o][:, o] = L L^T), written as the lower-triangular
    A_c = J L^T J and order_c = o reversed (J reverses the order), so that
    k^T P_c k = |L^T k[o]|^2 = |A_c k[order_c]|^2. P_c is positive semi-definite (a diagonal
    block of (K + W^-1)^-1, GPML eq. 3.41-3.42); pstrf stops at its numerical rank r (LAPACK's
    default tolerance, n u max_i (P_c)_ii) and the columns past r are dropped, which changes
    k^T P_c k by at most that tolerance times |k|^2."""
    out = []
    for P in precision:
        L, piv, rank, info = lapack.dpstrf(P, lower=1)
        if info < 0:
            raise ValueError(f"pivoted Cholesky failed (LAPACK dpstrf info {info})")
        L = np.tril(L)
        L[:, rank:] = 0.0
        order = (piv.astype(np.int64) - 1)[::-1]
        out.append((np.asfortranarray(L.T[::-1, ::-1]), np.ascontiguousarray(order)))
    return tuple(out)


def _class_variances(post, Ks, kss, precision, scratch=None):
    """(m, C) k** - k^T P_c k per class through `class_factors`, double or mixed precision
    (refining in double the rows at risk, as for binary models in `latent_moments`)."""
    var = np.empty((Ks.shape[0], len(post.class_factors)))
    if precision != "mixed":
        for c, (A, order) in enumerate(post.class_factors):
            var[:, c] = _trmm_variance(A, np.take(Ks, order, axis=1), kss, single=False)
        return var
    single = _class_factors32(post)
    Ks32 = Ks.astype(np.float32)  # once; each class gathers its column order from it
    if scratch is None:
        scratch = np.empty(Ks.shape, dtype=np.float32)
    K32 = scratch.reshape(-1)[:Ks.size].reshape(Ks.shape)
    for c, (A, order) in enumerate(post.class_factors):
        np.take(Ks32, order, axis=1, out=K32)
        v, error = _trmm_variance(single[c], K32, kss, True, K32)
        low = np.flatnonzero(error > MIXED_REFINE * v)
        if low.size:
            v[low] = _trmm_variance(A, np.take(Ks[low], order, axis=1), kss[low], single=False)
        var[:, c] = v
    return var


def _trmm_variance(factor, Ks, kss, single, scratch=None):
    """kss - |A k*|^2 for the rows of Ks, with BLAS trmm in single or double precision; in
    single precision also an error estimate u |A k*| |k*| per row (u = 2^-24). `scratch`: an
    optional C-contiguous float32 array of at least Ks's shape, reused between chunks."""
    if single:
        if scratch is None:
            scratch = np.empty(Ks.shape, dtype=np.float32)
        K32 = scratch.reshape(-1)[:Ks.size].reshape(Ks.shape)
        if K32 is not Ks:  # (a caller may pass its single-precision rows as their own scratch)
            np.copyto(K32, Ks, casting="same_kind")
        k_norm = np.sqrt(np.einsum("ij,ij->i", K32, K32))  # only for the error estimate
        V = blas.strmm(1.0, factor, K32.T, lower=1, overwrite_b=1)  # in place: K32.T is F-order
        # |v|^2 by squaring in place and numpy's pairwise summation along the contiguous axis:
        # its single-precision rounding, about u log2(n) |v|^2, stays below the product's own
        Vt = V.T  # (m, n), C-contiguous
        np.square(Vt, out=Vt)
        v2 = Vt.sum(axis=1).astype(np.float64)
        return kss - v2, _SINGLE_ROUNDOFF * np.sqrt(v2) * k_norm
    V = blas.dtrmm(1.0, factor, np.asfortranarray(Ks.T), lower=1, overwrite_b=1)
    return kss - np.einsum("ij,ij->j", V, V)


def latent_moments(post, Ks, kss, precision="double", scratch=None):
    """Latent predictive mean and variance for test cross-covariance Ks (m, n), prior kss (m,).

    Returns (m,) arrays (binary) or (m, C) arrays (multi-class); variances are floored at a tiny
    positive value.

    precision : "double", or "mixed" for pools: binary models then form the variance product
    v = A k* in single precision (BLAS strmm: half the time of the n^2-per-row product that
    dominates prediction); the mean stays in double precision. The variance k** - |v|^2 cancels
    digits when it is small against k**; with unit roundoff u = 2^-24 (IEEE 754 single) the
    rounding error of |v|^2 is about u |v| |k*| times a constant that was at most 0.14 in our
    measurements. Rows where u |v| |k*| exceeds MIXED_REFINE times the variance (where single
    precision might leave no correct digit) are recomputed in double precision. Measured on
    breast cancer and synthetic pools (tests/gp/test_mixed_precision.py, and the benchmark
    problem with k** / var up to 4,400): variances within 2e-3 relative of double precision,
    probabilities within 2e-5, the same top 50 by every strategy.
    scratch : optional float32 work array for the mixed path (see `_trmm_variance`).
    """
    if precision not in ("double", "mixed"):
        raise ValueError(f"precision must be 'double' or 'mixed', got {precision!r}")
    mean = Ks @ post.weights
    if post.factor is not None:
        if precision == "double":
            var = _trmm_variance(post.factor, Ks, kss, single=False)
        else:
            var, error = _trmm_variance(_factor32(post), Ks, kss, True, scratch)
            low = np.flatnonzero(error > MIXED_REFINE * var)
            if low.size:
                var[low] = _trmm_variance(post.factor, Ks[low], kss[low], single=False)
        return mean, np.maximum(var, TINY_VARIANCE)
    if post.precision is None:
        raise ValueError("this posterior holds no predictive matrices (built for the optimiser)")
    if post.multiclass and post.class_factors is not None:
        var = _class_variances(post, Ks, kss, precision, scratch)
    elif post.multiclass:
        reduction = np.stack([((Ks @ M) * Ks).sum(1) for M in post.precision], axis=1)
        var = kss[:, None] - reduction
    else:
        var = kss - ((Ks @ post.precision) * Ks).sum(1)
    return mean, np.maximum(var, TINY_VARIANCE)


def latent_cross_covariance(post, Kxz, Kx, Kz):
    """Posterior latent covariance between two test sets.

    Kxz : (m, p) prior covariance between the test sets; Kx (m, n), Kz (p, n) cross-covariances
    with the training inputs. Returns (m, p) binary or (m, p, C) multi-class (diagonal blocks).
    """
    if post.factor is not None:
        left = post.factor @ Kx.T
        right = left if Kz is Kx else post.factor @ Kz.T
        return Kxz - left.T @ right
    if post.multiclass:
        return np.stack([Kxz - Kx @ M @ Kz.T for M in post.precision], axis=2)
    return Kxz - Kx @ post.precision @ Kz.T


def b_matrix(K, s):
    """B = I + S K S with S = diag(s) (GPML eq. 3.26 with s = W^1/2; Alg. 3.5 with s = sqrt(tau)),
    built in one buffer; its eigenvalues are >= 1, so its Cholesky factor is well conditioned."""
    B = K * s[:, None]
    B *= s[None, :]
    B[np.diag_indices_from(B)] += 1.0
    return B


def scaled_inverse(L, s):
    """S B^-1 S with S = diag(s), from the lower Cholesky factor L of B (n, n), as a full matrix.

    GPML forms this matrix explicitly where the algorithm needs it as a matrix (Alg. 3.3 line 6,
    Alg. 5.1 R, Alg. 5.2 R) as two triangular solves against the identity; LAPACK's potri
    computes the same B^-1 from L with about a third of the work (Golub & Van Loan, Matrix
    Computations, sec. 4.2, from memory). Nothing here solves a system by inversion.
    """
    inv, _ = inverse_lower(L)
    inv += inv.T  # mirror the lower triangle; the diagonal is counted twice
    inv[np.diag_indices_from(inv)] *= 0.5
    inv *= s[:, None]
    inv *= s[None, :]
    return inv


def inverse_lower(L):
    """Lower triangle of B^-1 (upper part zero) and its diagonal, from the lower Cholesky factor
    L of B with zeros above the diagonal (as `robust_cholesky` returns it): LAPACK potri leaves
    L's upper part, here zeros, in place. The result is left unsymmetrised for consumers that
    read one triangle (BLAS symv, `structured_gradient_contractions`)."""
    inv, info = lapack.dpotri(L, lower=1)
    if info != 0:  # a zero pivot cannot occur for B = I + S K S; keep the solve as a fallback
        inv = np.tril(cho_solve((L, True), np.eye(L.shape[0]), check_finite=False))
    return inv, np.diag(inv).copy()


def robust_cholesky(A):
    """Lower Cholesky factor of the symmetric positive definite A, adding growing jitter to the
    diagonal when the plain factorisation fails (common practice, no published source).

    Returns (L, jitter) with jitter = 0.0 when none was needed.
    """
    try:
        return cholesky(A, lower=True, check_finite=False), 0.0
    except LinAlgError:
        pass
    jitter = max(float(np.mean(np.diag(A))), 1e-300) * 1e-10
    for _ in range(9):
        try:
            return cholesky(A + jitter * np.eye(A.shape[0]), lower=True, check_finite=False), jitter
        except LinAlgError:
            jitter *= 10.0
    raise ValueError("matrix is not positive definite even with jitter 0.1 x its mean diagonal")
