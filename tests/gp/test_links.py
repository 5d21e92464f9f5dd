"""Link functions: derivatives and stability (labelq.gp.links)."""
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import expit, ndtr

from labelq.gp.links import Logistic, Probit, get_link, normal_hazard

LINKS = [Logistic(), Probit()]


@pytest.mark.parametrize("link", LINKS, ids=lambda l: l.name)
@pytest.mark.parametrize("y", [-1.0, 1.0])
def test_derivatives_match_central_differences(link, y):
    # Source: central finite differences of each lower derivative (common practice, no published
    # source); step 1e-5, tolerance 1e-6 absolute.
    f = np.linspace(-8.0, 8.0, 33)
    h = 1e-5
    lo = link.derivatives(np.full_like(f, y), f - h)
    hi = link.derivatives(np.full_like(f, y), f + h)
    mid = link.derivatives(np.full_like(f, y), f)
    for k in range(3):
        fd = (hi[k] - lo[k]) / (2 * h)
        np.testing.assert_allclose(mid[k + 1], fd, atol=1e-6, rtol=1e-6)


def test_log_likelihood_values():
    # Source: GPML eq. 3.15/3.16 (definitions sigma(yf), Phi(yf)) evaluated with scipy.special.
    f = np.array([-2.0, 0.0, 1.5])
    y = np.array([1.0, -1.0, -1.0])
    np.testing.assert_allclose(Logistic().derivatives(y, f)[0], np.log(expit(y * f)), rtol=1e-14)
    np.testing.assert_allclose(Probit().derivatives(y, f)[0], np.log(ndtr(y * f)), rtol=1e-14)


@pytest.mark.parametrize("link", LINKS, ids=lambda l: l.name)
def test_stable_at_extreme_latents(link):
    # Source: limits of GPML eq. 3.15/3.16 as |f| -> inf: log p -> 0 (right side) and
    # d1 -> 0, W -> 0; on the wrong side log p ~ -|f| (logistic) or -f^2/2 (probit).
    f = np.array([-1e3, 1e3])
    y = np.array([1.0, 1.0])
    out = link.derivatives(y, f)
    for values in out:
        assert np.all(np.isfinite(values))
    log_p, d1, d2, _ = out
    assert log_p[1] == pytest.approx(0.0, abs=1e-300)
    assert np.all(d2 <= 0.0)
    if link.name == "logistic":
        assert log_p[0] == pytest.approx(-1e3, rel=1e-12)
        assert d1[0] == pytest.approx(1.0)
    else:
        # Mills-ratio asymptotics: log Phi(-x) ~ -x^2/2 - log(x sqrt(2 pi)) (from memory)
        assert log_p[0] == pytest.approx(-5e5 - np.log(1e3 * np.sqrt(2 * np.pi)), rel=1e-9)
        assert d1[0] == pytest.approx(1e3, rel=1e-5)
        assert d2[0] == pytest.approx(-1.0, rel=1e-4)


@settings(max_examples=50, deadline=None)
@given(st.floats(-1e3, 1e3))
def test_normal_hazard_finite_and_positive(z):
    # Source: N(z)/Phi(z) is positive and decreasing to 0 (common practice, no published source).
    r = normal_hazard(np.array([z]))[0]
    assert np.isfinite(r) and r >= 0.0
    if z < -5:
        assert r == pytest.approx(-z, rel=0.05)


def test_unknown_link_is_value_error():
    # Source: labelq contract (invalid input raises ValueError naming the value).
    with pytest.raises(ValueError, match="cauchit"):
        get_link("cauchit")


def test_fitted_models_hold_their_likelihood_object():
    """One likelihood object per family, held by the fitted model (GPflow's design; common
    practice): softmax for three classes, the binary link otherwise."""
    from labelq.gp import GPClassifier, predictive_probability
    from labelq.gp.links import Softmax

    rng = np.random.default_rng(0)
    X = rng.normal(size=(12, 2))
    three = GPClassifier(optimize=False).fit(X, np.arange(12) % 3)
    two = GPClassifier(optimize=False, link="probit").fit(X, np.arange(12) % 2)
    assert isinstance(three.likelihood_, Softmax) and isinstance(two.likelihood_, Probit)
    mean, var = two.latent(X)
    # the object and its name give the same averaged probability (GPML eq. 3.82 for the probit)
    np.testing.assert_allclose(predictive_probability(mean, var, two.likelihood_),
                               predictive_probability(mean, var, "probit"))
    with pytest.raises(ValueError, match="link"):
        GPClassifier(link="softmax").fit(X, np.arange(12) % 2)


def test_logistic_probit_scale():
    """sigma(f) ~ Phi(sqrt(pi/8) f) to within 0.018 everywhere (MacKay 1992; the bound is the
    known maximum error of this approximation, value from memory, checked here on a grid)."""
    from scipy.special import expit, ndtr

    f = np.linspace(-10, 10, 2001)
    assert np.abs(expit(f) - ndtr(get_link("logistic").probit_scale * f)).max() < 0.018
    assert get_link("probit").probit_scale == 1.0
