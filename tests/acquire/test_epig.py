"""Tests for labelq.acquire.epig against scipy, quadrature and independent Monte Carlo."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.polynomial.hermite_e import hermegauss
from scipy import integrate
from scipy.special import expit, ndtr, softmax
from scipy.stats import entropy, multivariate_normal, norm

from labelq.acquire import epig
from labelq.acquire.epig import (
    binary_joint,
    epig_bits,
    mutual_information_bits,
    orthant_probability,
    softmax_joint,
)


def _scipy_orthant(h, k, rho):
    """P(X <= h, Y <= k) from scipy.stats.multivariate_normal.cdf (standard margins)."""
    points = np.column_stack([np.ravel(h), np.ravel(k)])
    cov = [[1.0, rho], [rho, 1.0]]
    return np.atleast_1d(
        multivariate_normal.cdf(points, mean=[0.0, 0.0], cov=cov, abseps=1e-12, releps=1e-12)
    )


def _table(p_c, p_t):
    """Joint label table E[(1 - p_c, p_c) outer (1 - p_t, p_t)] over draws of the link values."""
    return np.array(
        [
            [np.mean((1 - p_c) * (1 - p_t)), np.mean((1 - p_c) * p_t)],
            [np.mean(p_c * (1 - p_t)), np.mean(p_c * p_t)],
        ]
    )


def _bivariate_draws(mean_c, var_c, mean_t, var_t, cov, n, seed):
    """n draws of (f_c, f_t) from the bivariate normal, by numpy's Cholesky factor."""
    chol = np.linalg.cholesky([[var_c, cov], [cov, var_t]])
    z = np.random.default_rng(seed).standard_normal((n, 2))
    f = z @ chol.T + [mean_c, mean_t]
    return f[:, 0], f[:, 1]


def _softmax_reference(mean_c, var_c, mean_t, var_t, cov, n, seed):
    """Joint C x C table E[softmax(f_c) outer softmax(f_t)] from n draws, classes independent.

    Written apart from labelq: per class, f_t = mu_t + sd_t (rho z1 + sqrt(1 - rho^2) z2).
    """
    rng = np.random.default_rng(seed)
    z1 = rng.standard_normal((n, len(mean_c)))
    z2 = rng.standard_normal((n, len(mean_c)))
    rho = cov / np.sqrt(var_c * var_t)
    p_c = softmax(mean_c + np.sqrt(var_c) * z1, axis=1)
    p_t = softmax(mean_t + np.sqrt(var_t) * (rho * z1 + np.sqrt(1 - rho**2) * z2), axis=1)
    return p_c.T @ p_t / n


def _binary_entropy(p):
    """h(p) = -p log2 p - (1 - p) log2(1 - p) in bits (Shannon 1948), 0 log 0 = 0."""
    return -sum(q * np.log2(q) for q in (p, 1.0 - p) if q > 0.0)


def _probit_bald(mean, var):
    """Exact I(y; f) = h(Phi(mu / sqrt(1 + v))) - E_f[h(Phi(f))], f ~ N(mean, var), by quadrature.

    Houlsby et al. 2011 (arXiv:1112.5745), the two terms computed with scipy.integrate.quad.
    """
    sd = np.sqrt(var)
    expected = integrate.quad(
        lambda f: _binary_entropy(ndtr(f)) * norm.pdf(f, mean, sd),
        mean - 12 * sd, mean + 12 * sd, epsabs=1e-12,
    )[0]
    return _binary_entropy(ndtr(mean / np.sqrt(1 + var))) - expected


def _logistic_table_by_quadrature(mean_c, var_c, mean_t, var_t, cov, n_nodes=80):
    """Exact logistic joint table by Gauss-Hermite quadrature (numpy hermegauss) in 2-D."""
    nodes, weights = hermegauss(n_nodes)
    weights = weights / np.sqrt(2 * np.pi)  # hermegauss weights integrate against exp(-x^2 / 2)
    chol = np.linalg.cholesky([[var_c, cov], [cov, var_t]])
    grid = np.stack(np.meshgrid(nodes, nodes, indexing="ij"), axis=-1) @ chol.T
    p_c, p_t = expit(grid[..., 0] + mean_c), expit(grid[..., 1] + mean_t)
    w = np.outer(weights, weights)
    return np.array(
        [
            [np.sum(w * (1 - p_c) * (1 - p_t)), np.sum(w * (1 - p_c) * p_t)],
            [np.sum(w * p_c * (1 - p_t)), np.sum(w * p_c * p_t)],
        ]
    )


# 1. orthant probability


@pytest.mark.parametrize("rho", [-0.99, -0.7, -0.3, 0.0, 0.3, 0.7, 0.99])
def test_orthant_matches_scipy_on_a_grid_with_zeros_and_ties(rho):
    # Reference: scipy.stats.multivariate_normal.cdf. The grid holds h = 0, k = 0 and, on its
    # diagonal, the ties h == k.
    grid = np.linspace(-4.0, 4.0, 17)
    h, k = np.meshgrid(grid, grid)
    got = orthant_probability(h, k, rho)
    np.testing.assert_allclose(got.ravel(), _scipy_orthant(h, k, rho), rtol=0, atol=1e-7)


@settings(max_examples=60, deadline=None)
@given(st.floats(-4.0, 4.0), st.floats(-4.0, 4.0), st.floats(-0.99, 0.99))
def test_orthant_matches_scipy_at_random_points(h, k, rho):
    # Reference: scipy.stats.multivariate_normal.cdf.
    assert orthant_probability(h, k, rho) == pytest.approx(_scipy_orthant(h, k, rho)[0], abs=1e-7)


def test_orthant_special_cases_match_closed_forms():
    # Sheppard's formula Phi2(0, 0; rho) = 1/4 + arcsin(rho) / (2 pi) (Sheppard 1899, from memory).
    rho = np.array([-0.9, -0.2, 0.0, 0.5, 0.999])
    np.testing.assert_allclose(
        orthant_probability(0.0, 0.0, rho), 0.25 + np.arcsin(rho) / (2 * np.pi), atol=1e-15
    )
    # Degenerate normal: X = Y gives Phi(min(h, k)); X = -Y gives max(Phi(h) - Phi(-k), 0).
    h, k = np.array([-1.0, 0.3, 2.0, 0.0]), np.array([0.5, 0.3, -3.0, 0.0])
    np.testing.assert_allclose(orthant_probability(h, k, 1.0), ndtr(np.minimum(h, k)), atol=1e-15)
    np.testing.assert_allclose(
        orthant_probability(h, k, -1.0), np.maximum(ndtr(h) - ndtr(-k), 0.0), atol=1e-15
    )
    # |rho| just below 1 approaches those limits (difference of order sqrt(1 - rho)).
    assert orthant_probability(0.3, 0.5, 1 - 1e-12) == pytest.approx(ndtr(0.3), abs=1e-6)
    # An infinite limit leaves the other marginal, or 0.
    assert orthant_probability(np.inf, 0.7, 0.4) == pytest.approx(ndtr(0.7), abs=1e-15)
    assert orthant_probability(0.7, -np.inf, 0.4) == 0.0
    # Continuity across h = 0 and k = 0 (Owen's beta switches there): compare with scipy.
    # (1e-300, -1e-300): h k underflows to zero, yet Owen's beta must see opposite signs.
    for h, k in [(0.0, 1.3), (0.0, -1.3), (1.3, 0.0), (-1.3, 0.0), (1e-300, -1e-300)]:
        assert orthant_probability(h, k, 0.6) == pytest.approx(
            _scipy_orthant(h, k, 0.6)[0], abs=1e-7
        )


# 2. binary EPIG against brute-force Monte Carlo


@pytest.mark.parametrize(
    "mean_c, var_c, mean_t, var_t, cov",
    [
        (0.0, 1.0, 0.0, 1.0, 0.9),
        (0.5, 2.0, -1.0, 0.5, -0.8),
        (1.5, 0.3, 1.0, 3.0, 0.5),
        (-2.0, 1.0, 2.0, 1.0, 0.2),
    ],
)
def test_binary_probit_epig_matches_brute_force_monte_carlo(mean_c, var_c, mean_t, var_t, cov):
    # Reference: a million joint draws of (f_c, f_t), the probit label noise integrated in
    # closed form per draw (P(y = 1 | f) = Phi(f)), then I = H(A) + H(B) - H(A, B) of the table
    # with scipy.stats.entropy. Measured over five seeds the Monte Carlo error is at most
    # 4e-4 bits for these settings.
    f_c, f_t = _bivariate_draws(mean_c, var_c, mean_t, var_t, cov, 1_000_000, seed=0)
    table = _table(ndtr(f_c), ndtr(f_t))
    reference = (
        entropy(table.sum(axis=1), base=2)
        + entropy(table.sum(axis=0), base=2)
        - entropy(table.ravel(), base=2)
    )
    joint = binary_joint([mean_c], [var_c], [mean_t], [var_t], [[cov]])
    assert epig_bits(joint)[0] == pytest.approx(reference, abs=1e-3)


def test_binary_joint_marginals_are_the_probit_predictive():
    # GPML eq. 3.82 (number from memory): P(y = 1) = Phi(mu / sqrt(1 + v)) for each point.
    rng = np.random.default_rng(1)
    mean_c, var_c = rng.normal(0, 2, 7), rng.uniform(0, 5, 7)
    mean_t, var_t = rng.normal(0, 2, 5), rng.uniform(0, 5, 5)
    cov = rng.uniform(-1, 1, (7, 5)) * np.sqrt(np.outer(var_c, var_t))
    joint = binary_joint(mean_c, var_c, mean_t, var_t, cov)
    assert joint.shape == (7, 5, 2, 2)
    np.testing.assert_allclose(joint.sum(axis=(2, 3)), 1.0, atol=1e-15)
    np.testing.assert_allclose(
        joint[..., 1, :].sum(axis=-1), np.broadcast_to(ndtr(mean_c / np.sqrt(1 + var_c))[:, None],
                                                       (7, 5)), atol=1e-15
    )
    np.testing.assert_allclose(
        joint[..., :, 1].sum(axis=-1), np.broadcast_to(ndtr(mean_t / np.sqrt(1 + var_t)), (7, 5)),
        atol=1e-15,
    )


def test_binary_logistic_joint_near_quadrature_of_the_exact_logistic():
    # Reference: 2-D Gauss-Hermite quadrature of E[sigma(f_c) sigma(f_t)] with the exact
    # logistic. The pi/8 probit rescaling (MacKay 1992) has no published error bound for the
    # joint; measured over 300 random settings (means in [-4, 4], variances in [0.01, 10]):
    # at most 0.024 in a table cell and 0.016 bits in the mutual information.
    rng = np.random.default_rng(2)
    for _ in range(20):
        var_c, var_t = rng.uniform(0.01, 10, 2)
        mean_c, mean_t = rng.uniform(-4, 4, 2)
        cov = rng.uniform(-1, 1) * np.sqrt(var_c * var_t)
        exact = _logistic_table_by_quadrature(mean_c, var_c, mean_t, var_t, cov)
        got = binary_joint([mean_c], [var_c], [mean_t], [var_t], [[cov]], link="logistic")[0, 0]
        assert np.abs(got - exact).max() < 0.025
        assert abs(mutual_information_bits(got) - mutual_information_bits(exact)) < 0.017


# 3. data-processing inequality


def test_epig_never_exceeds_bald_of_candidate_or_target():
    # Data-processing inequality (Cover & Thomas 2006, Elements of Information Theory, 2nd ed.,
    # Sec. 2.8, section number from memory): y* -> f(x) -> y is a Markov chain, so
    # I(y; y*) <= I(y; f(x)), and by symmetry <= I(y*; f(x*)). BALD is computed here by scipy
    # quadrature, not by labelq.
    rng = np.random.default_rng(3)
    n, m = 25, 4
    mean_c, var_c = rng.uniform(-3, 3, n), rng.uniform(0.01, 10, n)
    mean_t, var_t = rng.uniform(-3, 3, m), rng.uniform(0.01, 10, m)
    corr = rng.uniform(0, 1, (n, m)) ** 0.2 * rng.choice([-1, 1], (n, m))  # many near +-1
    corr[0] = 1.0  # exact Cauchy-Schwarz equality
    cov = corr * np.sqrt(np.outer(var_c, var_t))
    pair_information = mutual_information_bits(binary_joint(mean_c, var_c, mean_t, var_t, cov))
    bald_c = np.array([_probit_bald(mu, v) for mu, v in zip(mean_c, var_c)])
    bald_t = np.array([_probit_bald(mu, v) for mu, v in zip(mean_t, var_t)])
    assert (pair_information <= bald_c[:, None] + 1e-9).all()
    assert (pair_information <= bald_t[None, :] + 1e-9).all()
    assert (epig_bits(binary_joint(mean_c, var_c, mean_t, var_t, cov)) <= bald_c + 1e-9).all()


# 4. zero covariance


def test_zero_covariance_gives_zero_epig_binary():
    # Independent latents and independent label noise: y and y* are independent, I = 0.
    rng = np.random.default_rng(4)
    mean_c, var_c = rng.normal(0, 2, 30), rng.uniform(0, 5, 30)
    mean_t, var_t = rng.normal(0, 2, 6), rng.uniform(0, 5, 6)
    for link in ("probit", "logistic"):
        joint = binary_joint(mean_c, var_c, mean_t, var_t, np.zeros((30, 6)), link=link)
        assert np.abs(epig_bits(joint)).max() <= 1e-12


def test_zero_covariance_gives_zero_epig_multiclass_with_the_control_variate():
    rng = np.random.default_rng(5)
    n, m, c = 4, 3, 3
    mean_c, var_c = rng.normal(size=(n, c)), rng.uniform(0.1, 3, (n, c))
    mean_t, var_t = rng.normal(size=(m, c)), rng.uniform(0.1, 3, (m, c))
    zero = np.zeros((n, m, c))
    joint = softmax_joint(mean_c, var_c, mean_t, var_t, zero)
    baseline = softmax_joint(mean_c, var_c, mean_t, var_t, zero, independent=True)
    np.testing.assert_allclose(joint, baseline, rtol=0, atol=1e-15)
    assert np.abs(epig_bits(joint, baseline=baseline)).max() <= 1e-12
    # Without the control variate, finite draws show spurious information.
    assert (epig_bits(joint) > 0).all()
    # independent=True ignores whatever covariance it is given.
    cov = 0.5 * np.sqrt(var_c[:, None] * var_t[None])
    np.testing.assert_array_equal(
        softmax_joint(mean_c, var_c, mean_t, var_t, cov, independent=True), baseline
    )


# 5. softmax joint


def _three_class_pair(rho=0.95):
    """A strongly correlated candidate-target pair with three classes."""
    mean_c, var_c = np.array([0.5, 0.0, -0.5]), np.array([2.0, 2.0, 2.0])
    mean_t, var_t = np.array([0.3, 0.0, -0.2]), np.array([2.0, 2.0, 2.0])
    return mean_c, var_c, mean_t, var_t, rho * np.sqrt(var_c * var_t)


def test_softmax_marginals_match_the_averaged_softmax():
    # Reference: E[softmax(f)] per point from 400,000 independent draws (written in the test).
    # The row marginal of each table is the candidate's n-draw average, the same for every
    # target; a column marginal is an n-draw average whose draws depend on the correlation.
    # Monte Carlo error sd(p) / sqrt(n) <= 0.5 / sqrt(n): at the default n = 256 measured up to
    # 0.043 here, at n = 16,384 (sd <= 0.004) at most 0.003.
    rng = np.random.default_rng(6)
    mean_c, var_c = rng.normal(size=(3, 3)), rng.uniform(0.1, 2, (3, 3))
    mean_t, var_t = rng.normal(size=(2, 3)), rng.uniform(0.1, 2, (2, 3))
    cov = rng.uniform(-0.9, 0.9, (3, 2, 3)) * np.sqrt(var_c[:, None] * var_t[None])
    joint = softmax_joint(mean_c, var_c, mean_t, var_t, cov, n_samples=16_384)
    rows, cols = joint.sum(axis=3), joint.sum(axis=2)
    np.testing.assert_allclose(rows, np.broadcast_to(rows[:, :1], rows.shape), atol=1e-14)
    draws = np.random.default_rng(60).standard_normal((400_000, 3))
    for i in range(3):
        reference = softmax(mean_c[i] + np.sqrt(var_c[i]) * draws, axis=1).mean(axis=0)
        np.testing.assert_allclose(rows[i], np.broadcast_to(reference, (2, 3)), atol=0.01)
    for j in range(2):
        reference = softmax(mean_t[j] + np.sqrt(var_t[j]) * draws, axis=1).mean(axis=0)
        np.testing.assert_allclose(cols[:, j], np.broadcast_to(reference, (3, 3)), atol=0.01)


def test_two_class_softmax_is_the_logistic_joint_of_the_latent_difference():
    # Two independent class latents: P(class 1) = sigma(f1 - f0) and, per point, the difference
    # is Gaussian with mean m1 - m0, variance v0 + v1 and cross-covariance c0 + c1. Reference:
    # Gauss-Hermite quadrature of the exact logistic joint. Measured error at 20,000 draws:
    # 0.0013 in a cell, 4e-5 bits in the mutual information.
    mean_c, var_c = np.array([[0.2, 0.8]]), np.array([[0.6, 0.9]])
    mean_t, var_t = np.array([[0.0, -0.5]]), np.array([[1.2, 0.4]])
    cov = np.array([[[0.5, 0.5]]])
    exact = _logistic_table_by_quadrature(0.6, 1.5, -0.5, 1.6, 1.0)
    got = softmax_joint(mean_c, var_c, mean_t, var_t, cov, n_samples=20_000)[0, 0]
    np.testing.assert_allclose(got, exact, atol=0.005)
    assert mutual_information_bits(got) == pytest.approx(mutual_information_bits(exact), abs=0.002)


def test_control_variate_epig_of_a_correlated_pair_near_a_large_reference():
    # Reference: the mutual information of a 400,000-draw table written in the test (Monte
    # Carlo sd about 0.001 bits). Measured for this pair at 256 draws over 200 seeds: bias
    # -0.002 bits, sd 0.013 bits (value 0.133): 0.05 is about four standard deviations.
    pair = _three_class_pair()
    reference = mutual_information_bits(_softmax_reference(*pair, 400_000, seed=100))
    args = [x[None] for x in pair[:4]] + [pair[4][None, None]]
    values = []
    for seed in range(20):
        joint = softmax_joint(*args, seed=seed)
        baseline = softmax_joint(*args, seed=seed, independent=True)
        values.append(epig_bits(joint, baseline=baseline)[0])
    values = np.array(values)
    assert (values > 0).all()
    assert np.abs(values - reference).max() < 0.05
    assert abs(values.mean() - reference) < 0.01  # 20 seeds: sd of the mean about 0.003
    joint = softmax_joint(*args, n_samples=20_000)
    baseline = softmax_joint(*args, n_samples=20_000, independent=True)
    assert epig_bits(joint, baseline=baseline)[0] == pytest.approx(reference, abs=0.006)


def test_softmax_joint_independent_of_pool_and_blocking(monkeypatch):
    # Common random numbers: a pair's table depends on the seed only.
    rng = np.random.default_rng(7)
    n, m, c = 9, 5, 3
    mean_c, var_c = rng.normal(size=(n, c)), rng.uniform(0.1, 2, (n, c))
    mean_t, var_t = rng.normal(size=(m, c)), rng.uniform(0.1, 2, (m, c))
    cov = rng.uniform(-0.9, 0.9, (n, m, c)) * np.sqrt(var_c[:, None] * var_t[None])
    whole = softmax_joint(mean_c, var_c, mean_t, var_t, cov, n_samples=300)
    alone = softmax_joint(mean_c[-1:], var_c[-1:], mean_t[2:3], var_t[2:3], cov[-1:, 2:3],
                          n_samples=300)
    np.testing.assert_allclose(alone[0, 0], whole[-1, 2], rtol=0, atol=1e-15)
    baseline = softmax_joint(mean_c, var_c, mean_t, var_t, cov, n_samples=300, independent=True)
    monkeypatch.setattr(epig, "_BLOCK_ELEMENTS", 64)  # forces blocks of samples, rows and columns
    for independent, default in ((False, whole), (True, baseline)):
        tiny = softmax_joint(mean_c, var_c, mean_t, var_t, cov, n_samples=300,
                             independent=independent)
        np.testing.assert_allclose(tiny, default, rtol=0, atol=1e-14)


# 6. mutual information and mixtures


def test_mutual_information_of_a_worked_table():
    # Hand computation, table [[0.4, 0.1], [0.2, 0.3]]:
    #   H(A) = h(0.5) = 1;  H(B) = h(0.6) = 0.970951;
    #   H(A, B) = 0.4 log2(1/0.4) + 0.1 log2(10) + 0.2 log2(5) + 0.3 log2(1/0.3)
    #           = 0.528771 + 0.332193 + 0.464386 + 0.521090 = 1.846440;
    #   I = 1 + 0.970951 - 1.846440 = 0.124511 bits (I = H(A) + H(B) - H(A, B), Cover & Thomas
    #   2006, Sec. 2.4, from memory).
    assert mutual_information_bits(np.array([[0.4, 0.1], [0.2, 0.3]])) == pytest.approx(
        0.124511, abs=1e-6
    )


def test_mutual_information_matches_scipy_relative_entropy():
    # I(A; B) = D(p(a, b) || p(a) p(b)) (Cover & Thomas 2006, Sec. 2.3, from memory), via scipy.
    rng = np.random.default_rng(8)
    tables = rng.dirichlet(np.ones(12), size=20).reshape(20, 3, 4)
    reference = [
        entropy(t.ravel(), np.outer(t.sum(axis=1), t.sum(axis=0)).ravel(), base=2) for t in tables
    ]
    np.testing.assert_allclose(mutual_information_bits(tables), reference, atol=1e-12)


def test_mixture_is_taken_before_the_mutual_information():
    # Hand computation: copy [[.5, 0], [0, .5]] and swap [[0, .5], [.5, 0]] each carry 1 bit.
    # Mixed 3:1 they give [[.375, .125], [.125, .375]], the binary symmetric channel with
    # crossover 0.25 and uniform input: I = 1 - h(0.25) = 1 - 0.811278 = 0.188722 bits
    # (Cover & Thomas 2006, Sec. 7.1.4, from memory). Mixed 1:1 they give the uniform table,
    # I = 0, although each model alone has 1 bit.
    copy = np.array([[0.5, 0.0], [0.0, 0.5]])[None, None]
    swap = np.array([[0.0, 0.5], [0.5, 0.0]])[None, None]
    assert epig_bits([copy, swap], weights=[0.75, 0.25])[0] == pytest.approx(0.188722, abs=1e-6)
    assert epig_bits([copy, swap])[0] == pytest.approx(0.0, abs=1e-15)
    assert epig_bits(copy)[0] == pytest.approx(1.0, abs=1e-15)


def test_weighted_mixture_of_two_models_is_the_mutual_information_of_the_weighted_joint():
    rng = np.random.default_rng(9)
    models = []
    for _ in range(2):
        mean_c, var_c = rng.normal(size=5), rng.uniform(0.1, 3, 5)
        mean_t, var_t = rng.normal(size=4), rng.uniform(0.1, 3, 4)
        cov = rng.uniform(-1, 1, (5, 4)) * np.sqrt(np.outer(var_c, var_t))
        models.append(binary_joint(mean_c, var_c, mean_t, var_t, cov))
    weights = np.array([0.3, 0.7])
    expected = mutual_information_bits(0.3 * models[0] + 0.7 * models[1]).mean(axis=1)
    np.testing.assert_allclose(epig_bits(models, weights=weights), expected, atol=1e-15)
    baselines = [models[1], models[0]]
    expected_cv = np.maximum(
        mutual_information_bits(0.3 * models[0] + 0.7 * models[1])
        - mutual_information_bits(0.3 * models[1] + 0.7 * models[0]),
        0.0,
    ).mean(axis=1)
    np.testing.assert_allclose(
        epig_bits(models, weights=weights, baseline=baselines), expected_cv, atol=1e-15
    )


# 7. input errors


def _binary_args(**change):
    args = dict(
        mean_c=np.zeros(3), var_c=np.ones(3), mean_t=np.zeros(2), var_t=np.ones(2),
        cov_ct=np.zeros((3, 2)),
    )
    args.update(change)
    return args


def _softmax_args(**change):
    args = dict(
        mean_c=np.zeros((3, 3)), var_c=np.ones((3, 3)), mean_t=np.zeros((2, 3)),
        var_t=np.ones((2, 3)), cov_ct=np.zeros((3, 2, 3)),
    )
    args.update(change)
    return args


@pytest.mark.parametrize(
    "change, word",
    [
        (dict(link="cauchit"), "'cauchit'"),
        (dict(var_c=-np.ones(3)), "var_c"),
        (dict(var_t=np.array([1.0, np.inf])), "var_t"),
        (dict(mean_c=np.array([0.0, np.nan, 0.0])), "mean_c"),
        (dict(mean_t=np.zeros(3)), "var_t"),
        (dict(mean_c=np.zeros((3, 1))), "mean_c"),
        (dict(cov_ct=np.zeros((2, 3))), "cov_ct"),
        (dict(cov_ct=np.full((3, 2), 1.5)), "cov_ct"),
    ],
)
def test_binary_joint_rejects_bad_input(change, word):
    with pytest.raises(ValueError, match=word):
        binary_joint(**_binary_args(**change))


@pytest.mark.parametrize(
    "change, word",
    [
        (dict(n_samples=0), "n_samples"),
        (dict(n_samples=2.5), "n_samples"),
        (dict(mean_t=np.zeros((2, 4)), var_t=np.ones((2, 4))), "mean_t"),
        (dict(mean_c=np.zeros(3), var_c=np.ones(3)), "mean_c"),
        (dict(var_c=np.full((3, 3), -1.0)), "var_c"),
        (dict(cov_ct=np.zeros((3, 2))), "cov_ct"),
        (dict(cov_ct=np.full((3, 2, 3), -2.0)), "cov_ct"),
    ],
)
def test_softmax_joint_rejects_bad_input(change, word):
    with pytest.raises(ValueError, match=word):
        softmax_joint(**_softmax_args(**change))


def test_orthant_and_tables_reject_bad_input():
    with pytest.raises(ValueError, match="rho"):
        orthant_probability(0.0, 0.0, 1.5)
    with pytest.raises(ValueError, match="h"):
        orthant_probability(np.nan, 0.0, 0.5)
    with pytest.raises(ValueError, match="joint"):
        mutual_information_bits(np.array([[0.5, 0.6], [0.0, 0.0]]))
    with pytest.raises(ValueError, match="joint"):
        mutual_information_bits(np.array([[1.2, -0.2], [0.0, 0.0]]))
    table = np.full((2, 3, 2, 2), 0.25)
    with pytest.raises(ValueError, match="weights"):
        epig_bits([table, table], weights=[0.5, 0.6])
    with pytest.raises(ValueError, match="weights"):
        epig_bits([table, table], weights=[1.5, -0.5])
    with pytest.raises(ValueError, match="weights"):
        epig_bits([table, table], weights=[1.0])
    with pytest.raises(ValueError, match="baseline"):
        epig_bits(table, baseline=np.full((2, 2, 2, 2), 0.25))
    with pytest.raises(ValueError, match="joints"):
        epig_bits(np.full((2, 3, 2), 0.5))
    with pytest.raises(ValueError, match="joints"):
        epig_bits([table, np.full((2, 4, 2, 2), 0.25)])
    with pytest.raises(ValueError, match="joints"):
        epig_bits([])
