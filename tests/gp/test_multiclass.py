"""Multi-class softmax Laplace (labelq.gp.multiclass, GPML Alg. 3.3, 3.4, sec. 5.5.2)."""
import numpy as np
import pytest
from scipy.special import softmax

from labelq.gp import laplace, multiclass
from labelq.gp.kernels import make_kernel
from labelq.gp.links import get_link
from labelq.gp.posterior import latent_moments


def _problem(n=36, seed=1):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    labels = (X[:, 0] + 0.5 * rng.normal(size=n) > 0).astype(int) + (X[:, 1] > 0.8)
    return X, labels


@pytest.mark.parametrize("kernel", ["se", "matern52"])
def test_gradient_matches_finite_differences(kernel):
    # Source: central finite differences of the multi-class Laplace LML (GPML Alg. 3.3 line 11)
    # against our analytic gradient (GPML sec. 5.5.2, Alg. 5.1 extended); common practice.
    X, labels = _problem()
    Y = np.eye(3)[labels]
    k = make_kernel(kernel, [0.7, 1.3, 2.0], 1.7)
    _, grad, _ = multiclass.lml_and_gradient(k, X, k(X), Y)
    h = 1e-5
    for j in range(4):
        e = np.zeros(4)
        e[j] = h
        kp, km = k.with_theta(k.theta + e), k.with_theta(k.theta - e)
        fd = (multiclass.fit(kp(X), Y).log_marginal_likelihood
              - multiclass.fit(km(X), Y).log_marginal_likelihood) / (2 * h)
        assert grad[j] == pytest.approx(fd, rel=1e-5, abs=1e-7)


def test_two_classes_equal_binary_logistic_with_twice_the_kernel():
    """Source: algebra on GPML sec. 3.5 (our derivation).

    softmax(f1, f2)_1 = sigma(f1 - f2). With independent priors f1, f2 ~ GP(0, k), the difference
    g = f1 - f2 and the sum h = f1 + f2 are independent GPs with covariance 2k each
    (cov(g, h) = k - k = 0). The likelihood depends on g only, so the joint posterior mode has
    h = 0 (its prior mode) and g at the binary logistic mode with kernel 2k. The Laplace evidence
    is invariant under this linear change of variables (f1, f2) -> (g, h): with T the map,
    |I + K W| = |I + (T K T^T)(T^-T W T^-1)| = |I + 2K W_g| * |I + 2K 0| since the Hessian in h
    is zero, and the quadratic terms match as well, so the h direction integrates out exactly
    (a Gaussian prior integral equal to 1) and the two approximate LMLs are identical.
    """
    X, labels = _problem()
    y = np.where(labels > 0, 1.0, -1.0)
    Y = np.eye(2)[(y > 0).astype(int)]
    K = make_kernel("se", [0.7, 1.3, 2.0], 1.7)(X)
    multi = multiclass.fit(K, Y)
    binary = laplace.fit(2.0 * K, y, get_link("logistic"))
    F = K @ multi.state["a"]
    np.testing.assert_allclose(F[:, 1] - F[:, 0], 2.0 * K @ binary.state["a"], atol=1e-9)
    np.testing.assert_allclose(F.sum(1), 0.0, atol=1e-9)
    assert multi.log_marginal_likelihood == pytest.approx(binary.log_marginal_likelihood,
                                                          rel=1e-10)
    # predictive of the difference: mean m1 - m0, and var v0 + v1 equals the binary variance only
    # up to the posterior covariance between classes, so compare the mean only
    Xt = np.random.default_rng(2).normal(size=(5, 3))
    k = make_kernel("se", [0.7, 1.3, 2.0], 1.7)
    mean, _ = latent_moments(multi, k(Xt, X), k.diag(Xt))
    bmean, _ = latent_moments(binary, 2.0 * k(Xt, X), 2.0 * k.diag(Xt))
    np.testing.assert_allclose(mean[:, 1] - mean[:, 0], bmean, atol=1e-9)


def test_predictive_variance_matches_dense_joint_formula():
    # Source: GPML eq. 3.43-3.44 / Alg. 3.4 written densely: Cov(f*) = k** I -
    # Q*^T (K + W^-1)^-1 Q*, with (K + W^-1)^-1 = W (I + K W)^-1 for the singular softmax W
    # (eq. 3.38); slow reference with full (C n, C n) matrices.
    X, labels = _problem(n=15)
    C, n = 3, 15
    Y = np.eye(C)[labels]
    k = make_kernel("se", [0.9], 1.5)
    K = k(X)
    post = multiclass.fit(K, Y)
    Pi = softmax(K @ post.state["a"], axis=1)
    W = np.zeros((C * n, C * n))
    for i in range(n):
        idx = np.arange(C) * n + i
        W[np.ix_(idx, idx)] = np.diag(Pi[i]) - np.outer(Pi[i], Pi[i])
    Kb = np.kron(np.eye(C), K)
    R = W @ np.linalg.solve(np.eye(C * n) + Kb @ W, np.eye(C * n))
    Xt = np.random.default_rng(9).normal(size=(4, 3))
    Ks = k(Xt, X)
    _, var = latent_moments(post, Ks, k.diag(Xt))
    for c in range(C):
        Q = np.zeros((C * n, len(Xt)))
        Q[c * n:(c + 1) * n] = Ks.T
        ref = k.diag(Xt) - np.einsum("ij,ik,kj->j", Q, R, Q)
        np.testing.assert_allclose(var[:, c], ref, rtol=1e-8)


def test_warm_start_reaches_the_cold_mode():
    # Source: the softmax Laplace objective is concave (GPML sec. 3.5), unique mode in f.
    X, labels = _problem()
    Y = np.eye(3)[labels]
    K = make_kernel("se", [1.0], 2.0)(X)
    A, _, _ = multiclass.find_mode(K, Y)
    A2, n_iter, _ = multiclass.find_mode(K, Y, A + 0.01)
    np.testing.assert_allclose(K @ A2, K @ A, atol=1e-7)
