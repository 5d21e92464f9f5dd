"""Tests for labelq.acquire.select_batch."""

import numpy as np
import pytest

import labelq.gp
from labelq.acquire import priority, select_batch
from labelq.acquire.batch import _greedy_picks
from labelq.gp import predictive_probability

N_COPIES = 10


def _se(A, B, lengthscale):
    """Squared-exponential covariance (GPML eq. 2.16), unit signal variance."""
    d2 = ((A[:, None, :] - B[None, :, :]) ** 2).sum(axis=-1)
    return np.exp(-0.5 * d2 / lengthscale**2)


class _Posterior:
    """GP regression posterior covariance on a few fake observations (GPML eq. 2.24)."""

    def __init__(self, X_train, lengthscale, noise=0.1):
        self.X_train, self.lengthscale = X_train, lengthscale
        K = _se(X_train, X_train, lengthscale) + noise * np.eye(len(X_train))
        self.chol = np.linalg.cholesky(K)

    def cov(self, A, B):
        Va = np.linalg.solve(self.chol, _se(self.X_train, A, self.lengthscale))
        Vb = np.linalg.solve(self.chol, _se(self.X_train, B, self.lengthscale))
        return _se(A, B, self.lengthscale) - Va.T @ Vb


def _pool_with_copies_of_the_top(strategy, n_classes, seed=0):
    """A pool whose top candidate (by ``strategy``) appears N_COPIES times, exact copies."""
    rng = np.random.default_rng(seed)
    X = rng.uniform(-3.0, 3.0, (300, 2))
    lengthscales = (1.0,) if n_classes == 2 else (1.0, 1.3, 0.8)
    posteriors = [_Posterior(rng.uniform(-3, 3, (6, 2)), ls) for ls in lengthscales]
    link = "probit" if n_classes == 2 else "softmax"

    def latent(X):
        if link == "probit":
            return 1.5 * X[:, 0], np.diag(posteriors[0].cov(X, X)).copy()
        mean = np.stack([X[:, 0], X[:, 1], -X[:, 0] - X[:, 1]], axis=1)
        return mean, np.stack([np.diag(post.cov(X, X)) for post in posteriors], axis=1)

    def proba_of(mean, var):
        p = predictive_probability(mean, var, link)
        return p if link == "softmax" else np.stack([1 - p, p], axis=1)

    mean, var = latent(X)
    top = np.argmax(priority(strategy, proba_of(mean, var), mean, var, link))
    X = np.vstack([X, np.repeat(X[top : top + 1], N_COPIES - 1, axis=0)])
    mean, var = latent(X)

    def cross_cov(rows, j):
        columns = [post.cov(X[rows], X[[j]])[:, 0] for post in posteriors]
        return columns[0] if link == "probit" else np.stack(columns, axis=1)

    copies = np.r_[top, np.arange(300, 300 + N_COPIES - 1)]
    return proba_of(mean, var), mean, var, link, cross_cov, copies


@pytest.mark.parametrize("n_classes", [2, 3])
@pytest.mark.parametrize("strategy", ["entropy", "margin", "bald"])
def test_batch_holds_at_most_one_of_ten_exact_copies_of_the_top(strategy, n_classes):
    # Acceptance test of the brief (common practice: batch diversity). SE prior/posterior
    # covariance computed here; see the GPClassifier test below for a fitted model.
    proba, mean, var, link, cross_cov, copies = _pool_with_copies_of_the_top(strategy, n_classes)
    ids = np.arange(len(proba))
    # Sanity: a plain top-10 would take all ten copies (they tie at the top).
    top_ten = np.argsort(-priority(strategy, proba, mean, var, link), kind="stable")[:10]
    assert np.isin(copies, top_ten).all()
    batch = select_batch(strategy, proba, mean, var, link, 10, cross_cov, ids, shortlist=200)
    assert len(batch) == 10 and len(np.unique(batch)) == 10
    assert np.isin(batch, copies).sum() <= 1
    assert batch[0] in copies  # the head of the queue is still asked first


@pytest.mark.parametrize("n_classes", [2, 3])
@pytest.mark.parametrize("strategy", ["entropy", "margin", "bald"])
def test_batch_with_a_fitted_classifier_holds_at_most_one_copy(strategy, n_classes):
    # Acceptance test of the brief on a real fitted labelq.gp.GPClassifier.
    rng = np.random.default_rng(1)
    X_train = rng.uniform(-3.0, 3.0, (40, 2))
    cuts = [0.0] if n_classes == 2 else [-1.0, 1.0]
    y = np.digitize(X_train[:, 0], cuts)
    model = labelq.gp.GPClassifier(optimize=False, lengthscale=1.0, signal_variance=1.0)
    model.fit(X_train, y)
    link = "softmax" if n_classes > 2 else model.link
    pool = rng.uniform(-3.0, 3.0, (300, 2))

    def predict(X):
        mean, var = model.latent(X)
        return model.predict_proba(X), mean, var

    proba, mean, var = predict(pool)
    top = np.argmax(priority(strategy, proba, mean, var, link))
    pool = np.vstack([pool, np.repeat(pool[top : top + 1], N_COPIES - 1, axis=0)])
    proba, mean, var = predict(pool)
    copies = np.r_[top, np.arange(300, 300 + N_COPIES - 1)]

    def cross_cov(rows, j):
        return model.latent_cross_cov(pool[rows], pool[[j]])[:, 0]

    ids = np.arange(len(pool))
    batch = select_batch(strategy, proba, mean, var, link, 10, cross_cov, ids, shortlist=200)
    assert len(np.unique(batch)) == 10
    assert np.isin(batch, copies).sum() <= 1


def test_downdates_are_exact_gaussian_conditioning():
    # Reference: Gaussian conditioning (GPML eq. A.6, from memory):
    # var_i | picks = K_ii - K_iP (K_PP + noise I)^-1 K_Pi.
    rng = np.random.default_rng(2)
    X = rng.normal(size=(40, 2))
    K = _se(X, X, 0.9)
    noise = 1e-3
    seen = []

    def score(var_t):
        seen.append(var_t.copy())
        return np.arange(40.0)[::-1] * var_t  # any score; picks depend on var_t

    ids, skipped = np.arange(40), np.zeros(40, bool)
    picks = _greedy_picks(score, np.diag(K).copy(), 5, lambda j: K[:, j], ids, skipped, noise)
    for t in range(1, 5):
        P = picks[:t]
        inverse = np.linalg.inv(K[np.ix_(P, P)] + noise * np.eye(t))
        expected = np.diag(K) - np.einsum("ip,pq,qi->i", K[:, P], inverse, K[P, :])
        np.testing.assert_allclose(seen[t], expected, atol=1e-10)


def test_random_is_a_seeded_sample_without_replacement_with_skipped_last():
    proba = np.full((50, 2), 0.5)
    skipped = np.zeros(50, bool)
    skipped[:45] = True
    ids = np.arange(50)
    batch = select_batch("random", proba, None, None, "probit", 8, None, ids, skipped, seed=3)
    assert len(np.unique(batch)) == 8
    assert not skipped[batch[:5]].any() and skipped[batch[5:]].all()
    again = select_batch("random", proba, None, None, "probit", 8, None, ids, skipped, seed=3)
    np.testing.assert_array_equal(batch, again)


def test_skipped_candidates_only_when_unskipped_run_out_and_length_is_capped():
    proba, mean, var, link, cross_cov, _ = _pool_with_copies_of_the_top("bald", 2)
    ids = np.arange(len(proba))
    skipped = np.ones(len(proba), bool)
    skipped[[5, 17, 250]] = False
    batch = select_batch("bald", proba, mean, var, link, 5, cross_cov, ids, skipped, shortlist=50)
    assert set(batch[:3]) == {5, 17, 250} and skipped[batch[3:]].all()
    head = slice(0, 4)
    tiny = select_batch(
        "entropy", proba[head], mean[head], var[head], link, 10, cross_cov, ids[head]
    )
    assert sorted(tiny) == [0, 1, 2, 3]


def test_bad_cross_cov_and_noise_are_named():
    proba, mean, var, link, cross_cov, _ = _pool_with_copies_of_the_top("entropy", 2)
    ids = np.arange(len(proba))
    with pytest.raises(ValueError, match="cross_cov returned shape"):
        select_batch("entropy", proba, mean, var, link, 3, lambda rows, j: np.zeros(3), ids)
    with pytest.raises(ValueError, match="-1"):
        select_batch("entropy", proba, mean, var, link, 3, cross_cov, ids, noise=-1.0)
    with pytest.raises(ValueError, match="'best'"):
        select_batch("best", proba, mean, var, link, 3, cross_cov, ids)
    with pytest.raises(ValueError, match="latent mean and var are needed"):
        select_batch("entropy", proba, None, None, link, 3, cross_cov, ids)
