"""Stationary covariance functions with ARD lengthscales and a signal variance.

Hyperparameters are held and differentiated in log space: theta = [log l_1, ..., log l_p,
log s2] with p = n_features (ARD) or p = 1 (one shared lengthscale).

Both families depend on the scaled squared distance r^2 = sum_k D_k with
D_k = (x_k - z_k)^2 / l_k^2, and their lengthscale derivatives have the form
dK / d log l_k = Q * D_k (elementwise), so every contraction sum(G * dK / d log l_k) with a
symmetric (n, n) matrix G reduces to 2 sum_i u_ik^2 (H 1)_i - 2 u_k^T H u_k with H = G * Q and
u_k = x_k / l_k: one (n, n) product and an (n, n) x (n, p) GEMM, never an (n, n, p) tensor.
"""
import numpy as np

_SQRT5 = np.sqrt(5.0)


def _scaled_sqdist(U, V, out=None):
    """Squared Euclidean distances between rows of U (n, p) and V (m, p), clipped at 0.

    Built in place in one (n, m) buffer (`out` if given): the pool hot path is memory bound.
    """
    d2 = np.matmul(U, V.T, out=out)
    d2 *= -2.0
    d2 += (U * U).sum(1)[:, None]
    d2 += (V * V).sum(1)[None, :]
    return np.maximum(d2, 0.0, out=d2)


class StationaryKernel:
    """Base class: k(x, z) = s2 * g(r), r the lengthscale-scaled distance.

    Subclasses give `_profile(r2)` -> g (may overwrite r2) and `_lengthscale_factor(r2)` -> Q / s2,
    or override `__call__` and `_lengthscale_weight` with closed forms (squared exponential).
    """

    name = ""

    def __init__(self, lengthscale, signal_variance):
        self.lengthscale = np.atleast_1d(np.asarray(lengthscale, dtype=float)).copy()
        self.signal_variance = float(signal_variance)
        if np.any(self.lengthscale <= 0) or not np.all(np.isfinite(self.lengthscale)):
            raise ValueError(f"lengthscale must be positive and finite, got {self.lengthscale}")
        if not (self.signal_variance > 0 and np.isfinite(self.signal_variance)):
            raise ValueError(f"signal_variance must be positive, got {self.signal_variance!r}")

    @property
    def theta(self):
        """Log hyperparameters [log l_1..log l_p, log s2], shape (p + 1,)."""
        return np.append(np.log(self.lengthscale), np.log(self.signal_variance))

    def with_theta(self, theta):
        """A new kernel of the same family with log hyperparameters `theta`."""
        theta = np.asarray(theta, dtype=float)
        return type(self)(np.exp(theta[:-1]), np.exp(theta[-1]))

    def _scale(self, X):
        return np.asarray(X, dtype=float) / self.lengthscale

    def __call__(self, X, Z=None, out=None):
        """Covariance matrix K(X, Z), shape (n, m); K(X, X) when Z is None. `out`: an optional
        C-contiguous float64 (n, m) buffer to fill (pools reuse one buffer chunk after chunk)."""
        U = self._scale(X)
        V = U if Z is None else self._scale(Z)
        K = self._profile(_scaled_sqdist(U, V, out))
        K *= self.signal_variance
        if Z is None:
            np.fill_diagonal(K, self.signal_variance)
        return K

    def diag(self, X):
        """Prior variances k(x, x) for the rows of X, shape (n,)."""
        return np.full(np.asarray(X).shape[0], self.signal_variance)

    def gradient_contractions(self, X, K, G):
        """Return sum(G * dK / d theta_j) for every log hyperparameter, shape (p + 1,).

        X : (n, d) inputs; K : (n, n) = self(X); G : (n, n) symmetric weight matrix.
        With G = a a^T this gives a^T dK a, with G = R it gives tr(R dK) (GPML Alg. 5.1 line 8).
        """
        U = self._scale(X)
        U = U - U.mean(0)  # translation invariant; centring limits cancellation
        H = G * self._lengthscale_weight(U, K)
        per_dim = 2.0 * ((U * U) * H.sum(1)[:, None]).sum(0) - 2.0 * (U * (H @ U)).sum(0)
        grad_ls = per_dim if self.lengthscale.size == U.shape[1] else np.array([per_dim.sum()])
        return np.append(grad_ls, (G * K).sum())  # dK / d log s2 = K

    def structured_gradient_contractions(self, X, K, outer_terms, s, M_lower, m_coef):
        """`gradient_contractions` for G = sum_r c_r v_r v_r^T + m_coef diag(s) M diag(s) given in
        parts, never forming G: `outer_terms` is a list of (c_r, v_r (n,)); M is symmetric and
        given by its lower triangle `M_lower` (n, n) with zeros above the diagonal.

        The contraction needs only H 1 and H U for H = G * Q, and (v v^T * Q) Y = v (Q (v Y)),
        (S M S * Q) Y = s ((M * Q) (s Y)) with (M * Q) Z = P Z + P^T Z - diag(P) Z for
        P = tril(M) * Q. That is one elementwise pass over (n, n) and a few (n, n) x (n, p + 1)
        products instead of building, symmetrising and scaling (n, n) matrices.
        """
        U = self._scale(X)
        U = U - U.mean(0)
        n = U.shape[0]
        Q = self._lengthscale_weight(U, K)

        def apply(Qm, Y):
            out = np.zeros_like(Y)
            for c, v in outer_terms:
                out += c * v[:, None] * (Qm @ (v[:, None] * Y))
            P = M_lower * Qm
            Z = s[:, None] * Y
            PZ = P @ Z
            PZ += P.T @ Z
            PZ -= np.diag(P)[:, None] * Z
            out += m_coef * s[:, None] * PZ
            return out

        HY = apply(Q, np.column_stack([np.ones(n), U]))
        H1, HU = HY[:, 0], HY[:, 1:]
        per_dim = 2.0 * ((U * U) * H1[:, None]).sum(0) - 2.0 * (U * HU).sum(0)
        grad_ls = per_dim if self.lengthscale.size == U.shape[1] else np.array([per_dim.sum()])
        signal = H1.sum() if Q is K else apply(K, np.ones((n, 1))).sum()  # dK / d log s2 = K
        return np.append(grad_ls, signal)

    def _lengthscale_weight(self, U, K):
        """Q with dK / d log l_k = Q * D_k, from the scaled inputs U (n, p) or from K."""
        return self.signal_variance * self._lengthscale_factor(_scaled_sqdist(U, U))


class SquaredExponential(StationaryKernel):
    """k(x, z) = s2 exp(-r^2 / 2) (GPML eq. 5.1 with ARD lengthscales); Q = K."""

    name = "se"

    def __call__(self, X, Z=None, out=None):
        """Covariance matrix K(X, Z), shape (n, m): s2 exp(u.v - |u|^2/2 - |v|^2/2) built in one
        buffer, `out` if given (the pool hot path is memory bound)."""
        U = self._scale(X)
        V = U if Z is None else self._scale(Z)
        if Z is not None and (out is not None or U.shape[0] > 4 * V.shape[0]):
            # a pool against the training set: the exponent u.v - |u|^2/2 - |v|^2/2 + log s2
            # comes out of one GEMM with two extra columns, then exp in place (one pass over
            # the (n, m) buffer instead of five). Rounding can lift an entry above s2 by a few
            # ulps where u = v; unlike K(X, X) no factorisation depends on that here.
            log_s2 = np.log(self.signal_variance)
            left = np.column_stack([U, 0.5 * (U * U).sum(1) - log_s2, np.ones(len(U))])
            right = np.column_stack([V, -np.ones(len(V)), -0.5 * (V * V).sum(1)])
            K = np.matmul(left, right.T, out=out)
            return np.exp(K, out=K)
        K = np.matmul(U, V.T, out=out)
        K -= (0.5 * (U * U).sum(1) - np.log(self.signal_variance))[:, None]
        K -= 0.5 * (V * V).sum(1)[None, :]
        np.minimum(K, np.log(self.signal_variance), out=K)
        K = np.exp(K, out=K)
        if Z is None:
            np.fill_diagonal(K, self.signal_variance)
        return K

    def _lengthscale_weight(self, U, K):
        """Q = K: d/d log l_k of exp(-sum_k D_k / 2) is exp(...) D_k."""
        return K


class Matern52(StationaryKernel):
    """k(x, z) = s2 (1 + sqrt5 r + 5 r^2 / 3) exp(-sqrt5 r) (GPML eq. 4.17 with nu = 5/2).

    dk/dr = -(5/3) s2 r (1 + sqrt5 r) exp(-sqrt5 r) and dr / d log l_k = -D_k / r, hence
    dK / d log l_k = (5/3) s2 (1 + sqrt5 r) exp(-sqrt5 r) D_k, finite at r = 0.
    """

    name = "matern52"

    def _profile(self, r2):
        """(1 + t + t^2 / 3) exp(-t) with t = sqrt5 r, overwriting r2."""
        t = np.sqrt(r2, out=r2)
        t *= _SQRT5
        decay = np.exp(-t)
        t *= (t / 3.0 + 1.0)
        t += 1.0
        t *= decay
        return t

    def _lengthscale_factor(self, r2):
        r = np.sqrt(r2)
        return (5.0 / 3.0) * (1.0 + _SQRT5 * r) * np.exp(-_SQRT5 * r)


KERNELS = {"se": SquaredExponential, "matern52": Matern52}


def make_kernel(name, lengthscale, signal_variance):
    """Build the kernel family `name` ("se" or "matern52"); ValueError for other names."""
    if name not in KERNELS:
        raise ValueError(f"kernel must be one of {sorted(KERNELS)}, got {name!r}")
    return KERNELS[name](lengthscale, signal_variance)
