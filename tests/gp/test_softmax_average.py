"""Multi-class averaged probabilities E[softmax(f)], f ~ N(mean, diag(var)), and their error bound
(labelq.gp.predictive.softmax_quadrature, softmax_average)."""
import numpy as np
import pytest
from scipy import integrate
from scipy.special import expit, ndtr, ndtri
from scipy.stats import qmc

from labelq.gp import predictive_probability
from labelq.gp.predictive import (_U_GRID, SOFTMAX_TOL, _choose_rules, _gumbel_grid,
                                  _gumbel_group, _noise_rules, _one_dim_rules, _tensor_group,
                                  softmax_average, softmax_quadrature)


def _realistic(rng, n, n_classes):
    """Means uniform in [-6, 6], variances log-uniform in [1e-6, 25] (the brief's range)."""
    mean = rng.uniform(-6.0, 6.0, size=(n, n_classes))
    var = np.exp(rng.uniform(np.log(1e-6), np.log(25.0), size=(n, n_classes)))
    return mean, var


def _brute_force(mean, var, log2_points=15, replicates=4, seed=1000):
    """Reference by brute force: randomised quasi Monte Carlo, `replicates` independently
    scrambled Sobol sets of 2^log2_points points (scipy.stats.qmc.Sobol), softmax in float64.
    Returns (estimate, standard error) (n, C): the spread of independent randomisations gives
    an unbiased error estimate (Owen, "Monte Carlo theory, methods and examples", ch. 17)."""
    n, n_classes = mean.shape
    sd = np.sqrt(var)
    runs = np.empty((replicates, n, n_classes))
    for r in range(replicates):
        z = ndtri(qmc.Sobol(d=n_classes, scramble=True, seed=seed + r).random_base2(log2_points))
        zt = np.ascontiguousarray(z.T)[:, None, :]  # (C, 1, points): class planes contiguous
        for start in range(0, n, 4):
            rows = slice(start, start + 4)
            f = mean[rows].T[:, :, None] + sd[rows].T[:, :, None] * zt
            f -= f.max(axis=0)
            np.exp(f, out=f)
            f /= f.sum(axis=0)
            runs[r, rows] = f.mean(axis=2).T
    return runs.mean(axis=0), runs.std(axis=0, ddof=1) / np.sqrt(replicates)


@pytest.mark.slow
def test_error_bound_holds_against_brute_force():
    # Source: brute-force randomised QMC reference above (2^17 points per row). A seeded sample
    # of 2,000 rows over the brief's range: C = 3 (1,000 rows), 4 (600), 10 (400). The returned
    # bound must cover the real error on every row (slack: 4 reference standard errors); the
    # brief's target is max |error| <= 1e-3. Measured when written: max error 5e-5, mean 4e-6.
    rng = np.random.default_rng(20261202)
    for n, n_classes in ((1000, 3), (600, 4), (400, 10)):
        mean, var = _realistic(rng, n, n_classes)
        got = softmax_quadrature(mean, var)
        ref, ref_se = _brute_force(mean, var)
        err = np.abs(got.proba - ref)
        assert ref_se.max() < 3e-5
        assert np.all(got.error <= SOFTMAX_TOL)
        assert np.all(err <= got.error[:, None] + 4.0 * ref_se + 1e-12), n_classes
        assert err.max() <= 1e-3
        assert err.mean() <= 2e-5
        np.testing.assert_allclose(got.proba.sum(axis=1), 1.0, atol=1e-12)


def test_error_bound_holds_for_wide_latents():
    # Source: the brute-force reference above (2^18 points per row). Latent variances 30-200, as
    # a model far from its labels gives (a three-class GPClassifier fitted on 60 rows of
    # make_classification gave 57-156): these rows discretise the Gumbel noise instead of the
    # latents (see labelq.gp.predictive).
    rng = np.random.default_rng(31)
    for n_classes in (3, 4):
        mean = rng.uniform(-8.0, 8.0, size=(300, n_classes))
        var = rng.uniform(30.0, 200.0, size=(300, n_classes))
        got = softmax_quadrature(mean, var)
        ref, ref_se = _brute_force(mean, var, log2_points=16)
        err = np.abs(got.proba - ref)
        assert np.all(got.error <= SOFTMAX_TOL)
        assert np.all(err <= got.error[:, None] + 4.0 * ref_se + 1e-12), n_classes
        assert got.evaluations.mean() < 1000  # far below the 2048 points x C of the fixed rule


def test_two_classes_against_scipy_quad():
    # Source: softmax(f0, f1)_1 = sigma(f1 - f0) with f1 - f0 ~ N(m1 - m0, v0 + v1) (algebra);
    # the 1-D expectation by scipy.integrate.quad. The bound is a bound: no slack.
    rng = np.random.default_rng(7)
    mean = rng.uniform(-6.0, 6.0, size=(40, 2))
    var = np.exp(rng.uniform(np.log(1e-8), np.log(60.0), size=(40, 2)))
    got = softmax_quadrature(mean, var)
    def integrand(z, mu, s):
        return expit(mu + s * z) * np.exp(-0.5 * z * z) / np.sqrt(2.0 * np.pi)

    for (m0, m1), (v0, v1), p, bound in zip(mean, var, got.proba, got.error):
        mu, s = m1 - m0, np.sqrt(v0 + v1)
        ref = integrate.quad(integrand, -40.0, 40.0, args=(mu, s), points=[-mu / s], limit=400,
                             epsabs=1e-13)[0]
        assert abs(p[1] - ref) <= bound
        assert bound <= SOFTMAX_TOL


@pytest.mark.parametrize("tol_class", [7e-5, 2e-5])
def test_tabulated_bound_covers_the_one_dimensional_error(tol_class):
    # Source: the supremum over a of |rule(sigma(a + s z)) - E sigma(a + s Z)| computed here on a
    # finer grid of a (step 0.02) against a fine trapezoid rule in z (step 0.005 on [-12, 12];
    # the integrand is analytic, common practice), at values of s between the table's grid
    # points, for the rule the table picks.
    nodes, weights, _, _ = _one_dim_rules()
    z = np.arange(-12.0, 12.0 + 1e-9, 0.005)
    dens = np.exp(-0.5 * z * z)
    dens /= dens.sum()
    for s in np.random.default_rng(3).uniform(0.02, 12.0, size=8):
        rule, bound = _choose_rules(np.array([s]), tol_class)
        a = np.arange(-(16.0 + 6.7 * s), 0.0, 0.02)
        exact = expit(a[:, None] + s * z) @ dens
        t, w = nodes[rule[0]], weights[rule[0]]
        assert np.abs(expit(a[:, None] + s * t) @ w - exact).max() <= bound[0], s
        assert bound[0] <= tol_class


def test_gumbel_noise_rules():
    # Source: the standard Gumbel distribution has mean Euler's gamma 0.5772156649 and variance
    # pi^2 / 6 (common knowledge, values from memory), which a Gauss rule of two or more points
    # reproduces; and the tabulated e_u covers the rule's error at values of s between grid
    # points, the exact E[Phi((x - g) / s)] = E[G(x - s Z)] computed here the other way round,
    # by a fine trapezoid rule in z (step 0.2 / s on [-9, 9]; common practice).
    nodes, weights, sizes, table = _noise_rules()
    for u, w in zip(nodes[1:], weights[1:]):
        assert np.all(w > 0) and w.sum() == pytest.approx(1.0, abs=1e-12)
        assert w @ u == pytest.approx(0.5772156649, abs=1e-9)
        assert w @ (u - 0.5772156649) ** 2 == pytest.approx(np.pi ** 2 / 6, abs=1e-8)
    rng = np.random.default_rng(23)
    for s in rng.uniform(1.0, 20.0, size=6):
        k = np.searchsorted(_U_GRID, s, side="right") - 1
        z = np.arange(-9.0, 9.0, 0.2 / s)
        dens = np.exp(-0.5 * z * z)
        dens /= dens.sum()
        x = np.arange(-3.0 - 7.0 * s, 25.0 + 7.0 * s, 0.05)
        with np.errstate(over="ignore"):
            exact = np.exp(-np.exp(-(x[:, None] - s * z))) @ dens
        for r in rng.choice(len(sizes), size=4, replace=False):
            rule = ndtr((x[:, None] - nodes[r]) / s) @ weights[r]
            assert np.abs(rule - exact).max() <= table[r, k], (s, sizes[r])


def test_gumbel_factorisation_equals_the_tensor_product():
    # Source: the Gumbel-max identity softmax_c(f) = int g(t - f_c) prod_{j != c} G(t - f_j) dt
    # (algebra; e.g. Maddison, Tarlow & Minka 2014), so both forms compute the same tensor sum,
    # up to the t rule's allowance (trapezoid bound of Trefethen & Weideman 2014, Thm 5.1).
    rng = np.random.default_rng(11)
    mean = rng.uniform(-5.0, 5.0, size=(30, 3))
    sd = np.sqrt(np.exp(rng.uniform(np.log(0.01), np.log(16.0), size=(30, 3))))
    nodes, weights, sizes, _ = _one_dim_rules()
    rules = np.array([[r, r - 1, r - 2] for r in rng.integers(3, len(sizes), size=30)])
    rules = np.minimum(rules, 18)  # keep the tensor products small
    step, tail, allowance = _gumbel_grid(SOFTMAX_TOL)
    for row in range(30):
        m, s, r = mean[row:row + 1], sd[row:row + 1], rules[row]
        tensor = _tensor_group(m, s, [nodes[k] for k in r], [weights[k] for k in r], 1 << 16)
        reach = max(np.abs(nodes[k]).max() * s[0, c] for c, k in enumerate(r))
        n_t = int(np.ceil((2 * reach + 10.0 + 4.0 + tail) / step)) + 8
        gumbel = _gumbel_group(m, s, r[None, :], int(sizes[r].sum()), n_t, step, 1 << 16)
        np.testing.assert_allclose(gumbel, tensor, atol=allowance)


def test_rows_are_probabilities_and_independent_of_the_batch():
    # Source: labelq contract (rows sum to one, each row depends only on its own mean and var,
    # so chunked and threaded pool predictions agree with one call).
    rng = np.random.default_rng(5)
    mean, var = _realistic(rng, 3000, 4)
    whole = softmax_quadrature(mean, var)
    assert np.all(whole.proba >= 0.0) and np.all(whole.proba <= 1.0)
    np.testing.assert_allclose(whole.proba.sum(axis=1), 1.0, atol=1e-12)
    pick = rng.permutation(3000)[:37]
    part = softmax_quadrature(mean[pick], var[pick])
    np.testing.assert_allclose(part.proba, whole.proba[pick], rtol=0, atol=1e-13)
    np.testing.assert_array_equal(part.error, whole.error[pick])
    again = softmax_quadrature(mean, var, work=1000)
    np.testing.assert_allclose(again.proba, whole.proba, rtol=0, atol=1e-13)


def test_class_order_does_not_matter():
    # Source: softmax is symmetric in the classes (definition).
    rng = np.random.default_rng(9)
    mean, var = _realistic(rng, 500, 5)
    perm = np.array([3, 0, 4, 1, 2])
    a = softmax_quadrature(mean, var)
    b = softmax_quadrature(mean[:, perm], var[:, perm])
    np.testing.assert_allclose(b.proba, a.proba[:, perm], atol=1e-12)


def test_zero_variance_is_the_softmax_of_the_mean():
    # Source: N(m, 0) is a point mass (definition); scipy.special.softmax as the reference.
    from scipy.special import softmax

    mean = np.array([[0.3, -2.0, 1.5], [700.0, -700.0, 0.0]])
    got = softmax_quadrature(mean, np.zeros_like(mean))
    np.testing.assert_allclose(got.proba, softmax(mean, axis=1), rtol=0, atol=1e-12)
    assert np.all(got.error < 1e-5)


def test_extreme_means_and_variances_stay_finite():
    # Source: labelq contract (no overflow; rows beyond the table, sd > 16, get the fixed
    # 2048-point rule and the bound 1.0); large separations give the softmax of the means.
    mean = np.array([[1000.0, -1000.0, 0.0], [2.0, 0.0, -1.0], [0.0, 0.0, 0.0]])
    var = np.array([[1.0, 4.0, 9.0], [400.0, 1.0, 1e-9], [25.0, 25.0, 25.0]])
    got = softmax_quadrature(mean, var)
    assert np.all(np.isfinite(got.proba))
    np.testing.assert_allclose(got.proba.sum(axis=1), 1.0, atol=1e-12)
    np.testing.assert_allclose(got.proba[0], [1.0, 0.0, 0.0], atol=1e-12)
    assert got.error[1] == 1.0 and got.error[2] <= SOFTMAX_TOL
    np.testing.assert_allclose(got.proba[2], 1.0 / 3.0, atol=SOFTMAX_TOL)  # symmetry


def test_tolerance_trades_evaluations_for_accuracy():
    # Source: labelq contract (the bound meets tol; a tighter tol costs more evaluations).
    rng = np.random.default_rng(13)
    mean, var = _realistic(rng, 400, 3)
    loose, tight = softmax_quadrature(mean, var, tol=1e-3), softmax_quadrature(mean, var, tol=2e-5)
    assert np.all(loose.error <= 1e-3) and np.all(tight.error <= 2e-5)
    assert tight.evaluations.sum() > loose.evaluations.sum()
    assert np.abs(loose.proba - tight.proba).max() <= 1e-3 + 2e-5


def test_shapes_at_the_edges():
    # Source: labelq contract.
    assert softmax_quadrature(np.zeros((0, 3)), np.zeros((0, 3))).proba.shape == (0, 3)
    np.testing.assert_array_equal(softmax_quadrature(np.zeros((4, 1)), np.ones((4, 1))).proba, 1.0)


def test_softmax_average_dispatch():
    # Source: labelq contract: without n_points the bounded quadrature (also through
    # predictive_probability); with n_points the fixed quasi Monte Carlo rule of that many
    # points, error a few 1e-3 at 512 points (the brute-force reference above).
    rng = np.random.default_rng(17)
    mean, var = _realistic(rng, 200, 3)
    quad = softmax_quadrature(mean, var).proba
    np.testing.assert_array_equal(softmax_average(mean, var), quad)
    np.testing.assert_array_equal(predictive_probability(mean, var, "softmax"), quad)
    fixed = softmax_average(mean, var, n_points=512)
    assert np.abs(fixed - quad).max() < 1e-2
    assert np.abs(fixed - quad).max() > 1e-5  # a different rule
