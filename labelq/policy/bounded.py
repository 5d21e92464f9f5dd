"""Score a large pool exactly only where a row can reach the head of the queue.

`score_pool` computes every row's exact latent variance, n^2 / 2 flops a row. The queue needs
exact figures only for the rows that can be ranked into its head. For a binary model (Laplace
or EP; one model or a grid average of them; softmax Laplace models as `_SoftmaxBound` says)
this module

1. bounds every row's latent variance from above with the first LEAD_ROWS pseudo-observations
   in pivoted order (labelq.gp.bounds: the mean is exact, the bound costs LEAD_ROWS^2 flops a
   row; softmax models: `softmax_bounded_latent`, per class);
2. bounds each row's priority from above: at a fixed latent mean mu, a binary averaged
   probability p(v) = E[g(f)], f ~ N(mu, v) (GPML eq. 3.25 with the link's `average`) moves
   monotonically towards 1/2 as the variance v grows. For Gaussian smoothing
   dp/dv = E[g''(f)] / 2 (the heat equation; from memory), and for the logistic and the normal
   cdf g - 1/2 is odd with g'' < 0 on x > 0, so for mu > 0
   E[g''(f)] = int_{x > 0} g''(x) (N(x; mu, v) - N(x; -mu, v)) dx <= 0 (mirrored for mu < 0;
   for the probit also plain from Phi(mu / sqrt(1 + v)), GPML eq. 3.82). A variance in
   [0, var_upper] therefore puts each member's probability between its values at the two ends,
   and the mixture's in the weighted sum of those ranges. Margin (p1 - p2) and entropy are
   largest at the point of that range nearest 1/2. This is bounded first in a cheap form for every row (`_toward_half`), then with the logistic average for the
   rows whose cheap bound reaches the head;
3. scores exactly, in decreasing order of that upper bound, until the next row's bound is below
   the `head`-th largest exact priority found so far among the eligible rows. No row left out
   can then reach or tie the head.

The exact figures are `score_pool`'s own, computed by `score_pool` on those rows with every
member's `predict_pool` in double precision (so they equal a full double-precision
`score_pool` to rounding); the other rows keep approximations (`score_pool_bounded`).
"""
from __future__ import annotations

import numpy as np
from scipy.special import expit, ndtr

from labelq.acquire import priority
from labelq.acquire.entropy import entropy_last_axis
from labelq.gp.averaging import mix_predictions
from labelq.gp.bounds import bounded_prediction, softmax_bounded_latent
from labelq.gp.classifier import Prediction
from labelq.gp.predictive import SOFTMAX_TOL, logistic_average
from labelq.policy.scoring import PoolScores, members, score_pool
from labelq.policy.settings import PolicySettings

BOUNDED_STRATEGIES = ("entropy", "margin", "random")
"""Strategies whose priority is bounded here; the others (bald, epig) are scored exactly on
every row."""

LEAD_ROWS = 64
"""Pseudo-observations in the variance bound. Measured (make_classification, n = 1,000 labels,
d = 32, N = 100,000, head 300 by margin: the least possible share of exact rows is 0.30%):
32 rows 0.42% exact, 64 rows 0.36%, 128 rows 0.33%; the first rows of the label order instead of
the pivoted order needed 0.46% at 64 rows. The kernel row needed for the mean costs more than
the bound at every one of these sizes."""

P_SLACK = 1e-7
"""Absolute widening of each probability range before its point nearest 1/2 is taken: covers
the quadrature error of the logistic average (at most 4.2e-9 against scipy.integrate.quad on 400
(mean, variance) pairs, worst near standard deviation 1 where the rule changes), and the
rounding of the mixture."""

HOPELESS_SHARE = 0.5
"""For a model on fewer than REFINE_FROM labels: when more than this share of the eligible rows
can still reach the head after the first exact block, they are all scored exactly at once
instead of being bounded more tightly first (three grades of the orchard demo, 30,000
candidates, a grid average of nine members on 6 labels: 26,570 of 30,000 rows were scored
exactly anyway, and refining first took 3.3-3.6 s against 2.0-2.8 s for scoring every row)."""

REFINE_FROM = 300
"""Labels from which an exact softmax row costs enough (C n^2 flops of triangular products,
about 10 us a class at 300) that refining bounds pays even when most rows stay in reach (the
three-class benchmark at n = 1,000: 55% of rows exact after refining)."""

_FIGURES = ("proba", "mean", "var", "entropy", "margin", "bald")


def score_pool_bounded(model, X, settings: PolicySettings, strategy: str, unlabelled,
                       eligible, head: int, exact_rows=None, n_jobs: int = 1, full: bool = True):
    """`(PoolScores, exact)` for every row of X (N, d) standardised, exact where it matters.

    unlabelled : (N,) bool, as for `score_pool`.
    eligible : (N,) bool, the rows that may be ranked into the head (unlabelled, not skipped).
    head : rows of the head. `rank_pool` reads the `PolicySettings.batch_shortlist` rows of
        highest priority (the spread-out batch's shortlist; `head_size` for random), skipped
        rows only when fewer unskipped ones are left: pass those in `exact_rows` then.
    exact_rows : optional int array of rows that must be exact whatever their priority
        (labelled rows, audit items, a summary sample).
    n_jobs : worker threads for the pool's chunks (give BLAS one thread per worker).
    full : as for `score_pool`: False leaves BALD out (None) unless the strategy needs it (the
        loop's large pools; about 0.4 s per 1,000,000 rows).

    Guarantee: `exact` (N,) bool is True on every row of `exact_rows` and on every eligible row
    whose exact priority is at least the `head`-th largest exact priority among eligible rows
    (all of them when fewer are eligible), ties included. So the first `head` eligible rows by
    `labelq.acquire.rank_order` on the returned priority are the exact ones, in the exact order.

    Exact rows carry `score_pool`'s figures with every member's latent in double precision
    (`predict_pool(precision="double")`; `score_pool` itself uses "mixed", within 2e-5 in
    probability of double). Rows not exact, for margin, entropy and random:
    - mean : exact (to rounding);
    - var : an upper bound of the exact latent variance (each member's bound from
      `labelq.gp.bounds`, moment-matched as `score_pool` does, which is increasing in each
      member's variance);
    - proba, entropy, margin : approximations at the bounded variance, not bounds (binary: the
      probit's exact average, the logistic's probit approximation, `_approx_binary`; softmax:
      `moderated_softmax`); bald : NaN (None when not `full`);
    - priority : an upper bound of the exact priority (for random the exact priority, which
      does not depend on the model), strictly below the `head`-th largest exact priority among
      eligible rows, so such a row never ranks into the head or ties with it.
    For bald and epig every row is exact (`exact` all True), as the variance bound gives no
    priority bound: the BALD of a grid average is not monotone in a member's variance (two
    members at means +3 and -3: 0.724 bits at variance 0.01, 0.675 at 8, 0.702 at 128), and
    EPIG is computed on the rows of largest BALD. The margin of three softmax classes is not
    monotone in one class's variance either (means 1, 0.8, 0, variances 0.1, 0.1 and 0 to 64:
    margin 0.080, 0.076, 0.070, 0.003, 0.105), so softmax models take the inequalities of
    `_SoftmaxBound` instead; they prune little where the latent variances are large (a
    three-class model with latent variance about 14 left 55% of a 100,000-row pool to score
    exactly, against 0.4% (head search alone) to 4.3% (labelled and sample rows included) for
    binary models).
    """
    X = np.asarray(X, dtype=float)
    n_rows = X.shape[0]
    unlabelled = _mask(unlabelled, n_rows, "unlabelled")
    eligible = _mask(eligible, n_rows, "eligible")
    if int(head) != head or head < 0:
        raise ValueError(f"head must be a non-negative integer, got {head!r}")
    rows = np.zeros(0, dtype=np.int64) if exact_rows is None else np.asarray(exact_rows)
    if rows.ndim != 1 or not np.issubdtype(rows.dtype, np.integer) or (
            rows.size and (rows.min() < 0 or rows.max() >= n_rows)):
        raise ValueError(f"exact_rows must be a 1-D array of row indices in [0, {n_rows})")
    ms, w = members(model)
    if strategy in BOUNDED_STRATEGIES and ms and all(_softmax_laplace(m) for m in ms):
        return _score_softmax(model, ms, w, X, settings, strategy, unlabelled, eligible,
                              int(head), rows, n_jobs, full)
    if strategy not in BOUNDED_STRATEGIES or not all(_has_factor(m) for m in ms):
        scores = score_pool(in_double(model), X, settings, strategy, unlabelled, full=full,
                            n_jobs=n_jobs)
        return scores, np.ones(n_rows, dtype=bool)

    link = model.likelihood_
    bounds = [bounded_prediction(m, X, LEAD_ROWS, n_jobs=n_jobs, proba=False) for m in ms]
    mean, var = mix_predictions(bounds, w)[1:]
    p1 = sum(wk * _approx_binary(link, b.mean, b.var) for wk, b in zip(w, bounds))
    proba = _two_columns(p1)
    if strategy == "random":  # a seeded draw over the whole pool, whatever the model
        prio = priority(strategy, proba, None, None, link, settings.seed)
    else:
        prio = _priority_upper(strategy, bounds, w, link, settings.seed)
    bald = np.full(n_rows, np.nan) if full else None  # exact rows fill theirs in
    scores = PoolScores(proba, mean, var, prio, *_figures(proba), bald, link)
    upper = prio.copy()
    exact = np.zeros(n_rows, dtype=bool)
    refine = None if strategy == "random" or link.name == "probit" else (
        lambda r: _priority_upper(strategy, bounds, w, link, settings.seed, r))
    n_train = max(len(m.codes_) for m in ms)
    _Exact(model, X, settings, strategy, unlabelled, n_jobs, scores, exact, full).head(
        upper, eligible, int(head), rows, refine, refine_pays=n_train >= REFINE_FROM)
    if strategy != "random":
        scores.priority[~exact] = upper[~exact]
    return scores, exact


def _approx_binary(link, mean, var):
    """P(classes_[1]) (N,) kept for rows scored with bounds: exact at the bounded variance for
    the probit (GPML eq. 3.82), for the logistic the probit approximation
    sigma(mean / sqrt(1 + pi var / 8)) (MacKay 1992; GPML sec. 3.4, from memory), which is not
    a bound; `export predictions` computes those rows exactly."""
    if link.name == "probit":
        return link.average(mean, var)
    return expit(mean / np.sqrt(1.0 + (np.pi / 8.0) * var))


class _Exact:
    """Exact scoring of chosen rows into `scores` (marked in `exact`), and the head search."""

    def __init__(self, model, X, settings, strategy, unlabelled, n_jobs, scores, exact,
                 full=True):
        self.model, self.X, self.settings, self.strategy = in_double(model), X, settings, strategy
        self.unlabelled, self.n_jobs, self.scores, self.exact = unlabelled, n_jobs, scores, exact
        self.full = full

    def score(self, rows):
        """Score `rows` exactly (those not exact yet)."""
        rows = np.unique(rows)
        rows = rows[~self.exact[rows]]
        if rows.size == 0:
            return
        part = score_pool(self.model, self.X[rows], self.settings, self.strategy,
                          self.unlabelled[rows], full=self.full, n_jobs=self.n_jobs)
        for name in _FIGURES:
            if getattr(self.scores, name) is not None:
                getattr(self.scores, name)[rows] = getattr(part, name)
        if self.strategy != "random":  # a random priority is a draw over the whole pool
            self.scores.priority[rows] = part.priority
        self.exact[rows] = True

    def head(self, upper, eligible, head, rows, refine=None, refine_pays=True):
        """Score `rows` and the `head` eligible rows of largest `upper`, then the other eligible
        rows by decreasing `upper` (blocks of head, 2 head, ...) until none left can reach the
        `head`-th largest exact priority among eligible rows.

        refine : optional callable giving, for an array of rows, a tighter upper bound than
            `upper` (costlier, so asked only of rows whose `upper` reaches the floor); `upper`
            is lowered in place to it.
        refine_pays : False when an exact row costs little more than refining its bound (few
            labels): then rows left in reach of the head are scored at once, without refining,
            whenever they are more than HOPELESS_SHARE of the eligible rows."""
        free = np.flatnonzero(eligible)
        if head == 0 or free.size <= head:
            self.score(np.concatenate([rows, free]) if head else rows)
            return
        first = free[np.argpartition(-upper[free], head - 1)[:head]]
        self.score(np.concatenate([rows, first]))
        refined = np.zeros(upper.shape, dtype=bool)
        block = head
        while True:
            known = self.scores.priority[eligible & self.exact]  # holds `first`: >= head rows
            floor = np.partition(known, -head)[-head]
            reach = free[(upper[free] >= floor) & ~self.exact[free]]
            if (refine is not None and not refine_pays
                    and reach.size > HOPELESS_SHARE * free.size):
                # the cheap bound leaves most rows in reach: refining them costs more than
                # scoring them (a model still unsure of most of the pool); score them all
                self.score(reach)
                continue
            if refine is not None and not refined[reach].all():
                raw = reach[~refined[reach]]
                upper[raw] = np.minimum(upper[raw], refine(raw))
                refined[raw] = True
                continue
            if reach.size == 0:
                return
            self.score(reach[np.argsort(-upper[reach], kind="stable")[:block]])
            block *= 2


def _priority_upper(strategy, bounds, w, link, seed, rows=None):
    """Upper bound of the exact margin or entropy priority of a (mixture of) binary model(s),
    from each member's `Prediction` at its variance bound (mean, var; proba not read): the
    priority at the point nearest 1/2 of the range of the mixture probability over member
    variances in [0, var_upper], the range widened by P_SLACK.

    rows : None for every row, in the cheap form: for the logistic, the end p(var_upper) of a
        member's range is replaced by a point between it and 1/2 (`_toward_half`); or an
        array of rows, for those rows with
        the logistic average itself (labelq.gp.predictive.logistic_average, within 1e-8). The
        probit's average is closed form (GPML eq. 3.82) and exact in both."""
    sel = slice(None) if rows is None else rows
    cheap = rows is None and link.name != "probit"
    at_upper = [(_toward_half(b.mean[sel], b.var[sel]) if cheap
                 else link.average(b.mean[sel], b.var[sel])) for b in bounds]
    if len(bounds) == 1:  # one model: var_upper gives the end nearest 1/2
        low = high = at_upper[0]
    else:
        at_zero = [_at_zero_variance(link, b.mean[sel]) for b in bounds]
        low = sum(wk * np.minimum(a, b) for wk, a, b in zip(w, at_zero, at_upper))
        high = sum(wk * np.maximum(a, b) for wk, a, b in zip(w, at_zero, at_upper))
    nearest = np.clip(0.5, np.maximum(low - P_SLACK, 0.0), np.minimum(high + P_SLACK, 1.0))
    if strategy == "margin":  # priority() of acquire without its checks (a pool-sized pass)
        return 1.0 / (1.0 + np.abs(2.0 * nearest - 1.0))
    return entropy_last_axis(_two_columns(nearest))


def _figures(proba):
    """(entropy in bits, margin p_(1) - p_(2)) of rows on the simplex, as labelq.acquire
    computes them, without its per-call validation of a pool-sized array."""
    if proba.shape[1] == 2:
        gap = np.abs(proba[:, 1] - proba[:, 0])
    else:
        top = np.partition(proba, -2, axis=1)
        gap = top[:, -1] - top[:, -2]
    return entropy_last_axis(proba), gap


def _at_zero_variance(link, mean):
    """The link itself at the mean: the averaged probability at variance 0."""
    return ndtr(mean) if link.name == "probit" else expit(mean)


_SCALED_PROBITS = ((0.8, 0.7825), (0.95, 0.642), (0.99, 0.5544))
"""(a, b) with sigma(x) - 1/2 >= a (Phi(b x) - 1/2) for every x >= 0: the largest b for each a
found by bisection on a grid of x in (0, 80] (steps 1e-5 below 1 and 4e-5 above; beyond 80
both sides are within 1e-34 of their limits 1/2 > a/2), then lowered by 0.1%; checked again in
tests/policy/test_bounded.py. On 100,000-row pools (make_classification, three kernels) the
distance from 1/2 they give is 98.4-99.2% of the logistic average's; bounds of the form
Phi(t) sigma(|mean| - t sd) were never better there and were dropped."""


def _toward_half(mean, var):
    """A point between 1/2 and E[sigma(f)], f ~ N(mean, var), for every row (see
    `_priority_upper`): 1/2 + sign(mean) max_(a, b) a (Phi(b |mean| / sqrt(1 + b^2 var)) - 1/2)
    over `_SCALED_PROBITS`. For mean >= 0,
    E[sigma(f)] - 1/2 = int_{x > 0} g(x) (N(x; mean, var) - N(x; -mean, var)) dx with
    g = sigma - 1/2 odd, the density difference is >= 0 on x > 0, and g >= h there for
    h(x) = a (Phi(b x) - 1/2), so the integral is at least E[h(f)] = a (Phi(b mean /
    sqrt(1 + b^2 var)) - 1/2) (GPML eq. 3.82 for E[Phi])."""
    a = np.abs(mean)
    best = np.full(a.shape, 0.5)
    for scale, b in _SCALED_PROBITS:
        np.maximum(best, 0.5 + scale * (ndtr(b * a / np.sqrt(1.0 + b * b * var)) - 0.5),
                   out=best)
    return np.where(mean >= 0, best, 1.0 - best)


def _score_softmax(model, ms, w, X, settings, strategy, unlabelled, eligible, head, rows,
                   n_jobs, full):
    """`score_pool_bounded` for a multi-class Laplace model (or a grid average of them)."""
    link = model.likelihood_
    latents = [softmax_bounded_latent(m, X, LEAD_ROWS, n_jobs=n_jobs) for m in ms]
    bound = _SoftmaxBound(latents, w)
    mean, var = mix_predictions([Prediction(None, mu, v) for mu, v in latents], w)[1:]
    proba = sum(wk * moderated_softmax(mu, v) for wk, (mu, v) in zip(w, latents))
    if strategy == "random":  # a seeded draw over the whole pool, whatever the model
        prio = priority(strategy, proba, None, None, link, settings.seed)
    else:
        prio = bound.upper(strategy)
    bald = np.full(len(prio), np.nan) if full else None  # exact rows fill theirs in
    scores = PoolScores(proba, mean, var, prio, *_figures(proba), bald, link)
    upper = prio.copy()
    exact = np.zeros(len(prio), dtype=bool)
    refine = None if strategy == "random" else (lambda r: bound.upper(strategy, r, True))
    n_train = max(len(m.codes_) for m in ms)
    _Exact(model, X, settings, strategy, unlabelled, n_jobs, scores, exact, full).head(
        upper, eligible, head, rows, refine, refine_pays=n_train >= REFINE_FROM)
    if strategy != "random":
        scores.priority[~exact] = upper[~exact]
    return scores, exact


def moderated_softmax(mean, var):
    """softmax(mean_c / sqrt(1 + pi var_c / 8)) per row (N, C): the probit-scaled moderation of
    MacKay (1992) applied class by class, an approximation (not a bound) of E[softmax(f)] that
    large pools keep for rows scored with bounds; `export predictions` computes those rows
    exactly."""
    z = mean / np.sqrt(1.0 + (np.pi / 8.0) * var)
    z = z - z.max(axis=1, keepdims=True)
    e = np.exp(z)
    return e / e.sum(axis=1, keepdims=True)


SOFTMAX_SLACK = SOFTMAX_TOL + 1e-7
"""Absolute allowance on each softmax probability of an exact row: the bound on the error of the
quadrature that computes it (labelq.gp.predictive.SOFTMAX_TOL, for every row whose latent
standard deviations are at most SOFTMAX_TABLE_SD) plus the logistic average's error and the
rounding of the mixture (as P_SLACK)."""

SOFTMAX_TABLE_SD = 16.0
"""Latent standard deviation up to which every row of softmax_quadrature meets its tolerance
(above it a row may take the fixed Sobol rule without a bound: such rows get the largest
priority there is as their bound, so they are scored exactly when they may be queued)."""


class _SoftmaxBound:
    """Upper bounds of the margin and entropy priorities of a (mixture of) multi-class model(s)
    from each member's exact latent means and upper bounds of its class variances.

    For one member, fix a class k per row (the largest mixed mean). The softmax satisfies
    p_k(f) >= 1 - sum_{j != k} sigma(f_j - f_k), since a_j / (1 + a_j) >= a_j / (1 + sum a) for
    a_j = exp(f_j - f_k) >= 0, and p_j(f) = e^f_j / sum_c e^f_c <= sigma(f_j - f_k). Under the
    model's predictive the class latents are independent normals (GPML Alg. 3.4, diagonal), so
    f_j - f_k ~ N(mu_j - mu_k, v_j + v_k), and E[sigma(z)], z ~ N(a, s), is increasing in s when
    a <= 0 and decreasing when a > 0 (heat equation, d/ds = E[sigma''(z)] / 2, with sigma'' odd
    and negative on z > 0: the argument of the module docstring). With v_c at most the bound
    U_c, E[sigma(f_j - f_k)] <= b_j = E[sigma(N(a, U_j + U_k))] for a <= 0 and sigma(a) for
    a > 0. So the exact averaged probabilities obey p_k >= 1 - sum_j b_j and p_j <= b_j, the
    quadrature's within SOFTMAX_SLACK of them, and the mixture's in the weighted sums.

    The cheap form uses b_j <= min(1, exp(a + s / 2)) (sigma(z) <= e^z, and E e^z is the
    lognormal mean); `upper(..., refined=True)` uses the logistic average itself (the binary
    link's quadrature, within 1e-8).

    From P_k >= lo and P_j <= hi_j: margin p_(1) - p_(2) >= lo - max_j hi_j when that is
    positive (then k is the top class), so priority 1 / (1 + margin) <= 1 / (1 + lo - max hi);
    entropy -sum p log p <= max_{x in [lo, 1]} (-x log x) + the most that C - 1 terms summing to
    at most R = sum_j hi_j can give (-R log(R / (C - 1)), equal shares, while a share is below
    1/e, where -x log x is increasing; (C - 1) / e beyond).
    """

    def __init__(self, latents, w):
        self.latents, self.w = latents, np.asarray(w, dtype=float)
        mixed = sum(wk * mu for wk, (mu, _) in zip(self.w, latents))
        self.top = np.argmax(mixed, axis=1)
        sd_max = np.sqrt(np.max([v.max(axis=1) for _, v in latents], axis=0))
        self.wide = sd_max > SOFTMAX_TABLE_SD  # no quadrature error bound: scored exactly

    def upper(self, strategy, rows=None, refined=False):
        rows = np.arange(len(self.top)) if rows is None else np.asarray(rows)
        top = self.top[rows]
        n_classes = self.latents[0][0].shape[1]
        lo = np.zeros(rows.size)
        hi = np.zeros((rows.size, n_classes))
        for wk, (mu, v) in zip(self.w, self.latents):
            m, s = mu[rows], v[rows]
            a = m - np.take_along_axis(m, top[:, None], 1)  # mu_j - mu_k
            s = s + np.take_along_axis(s, top[:, None], 1)  # U_j + U_k
            b = _pair_bound(a, s, refined)
            b[np.arange(rows.size), top] = 0.0
            low = _jensen_low(m, v[rows])
            b = np.minimum(b, 1.0 - (low.sum(axis=1, keepdims=True) - low))
            hi += wk * b
            lo += wk * np.maximum(1.0 - b.sum(axis=1),
                                  np.take_along_axis(low, top[:, None], 1)[:, 0])
        lo -= SOFTMAX_SLACK
        hi = np.minimum(hi + SOFTMAX_SLACK, 1.0)
        hi[np.arange(rows.size), top] = -np.inf  # only the other classes count below
        if strategy == "margin":
            gap = np.maximum(lo - hi.max(axis=1), 0.0)
            bound = 1.0 / (1.0 + gap)
        else:  # entropy, in bits
            share = np.clip(hi, 0.0, None)
            share[np.arange(rows.size), top] = 0.0
            rest = share.sum(axis=1)
            each = rest / (n_classes - 1)
            with np.errstate(divide="ignore", invalid="ignore"):
                rest_term = np.where(each <= np.exp(-1.0),
                                     np.where(rest > 0, -rest * np.log(each), 0.0),
                                     (n_classes - 1) * np.exp(-1.0))
                lo_c = np.clip(lo, 0.0, 1.0)
                top_term = np.where(lo_c >= np.exp(-1.0), -lo_c * np.log(lo_c), np.exp(-1.0))
            bound = (top_term + rest_term) / np.log(2.0)
        bound = bound * (1.0 + 1e-12) + 1e-12  # rounding of the exact figures
        # rows without a quadrature error bound: the largest priority there is (finite, so the
        # queue can still order such a row when it is skipped and not scored exactly)
        bound[self.wide[rows]] = 1.0 + 1e-9 if strategy == "margin" else (
            np.log2(n_classes) + 1e-3)
        return bound


def _jensen_low(mu, v):
    """(r, C) lower bound of each averaged class probability: p_c = 1 / (1 + X) with
    X = sum_{c' != c} exp(f_c' - f_c), convex in X, so E p_c >= 1 / (1 + E X) (Jensen), and
    E exp(f_c' - f_c) = exp(mu_c' - mu_c + (v_c' + v_c) / 2) (the lognormal mean) only grows
    with the variances, so their upper bounds v keep it a lower bound."""
    d = mu[:, None, :] - mu[:, :, None] + 0.5 * (v[:, None, :] + v[:, :, None])
    with np.errstate(over="ignore"):
        e = np.exp(d)
    idx = np.arange(mu.shape[1])
    e[:, idx, idx] = 0.0
    return 1.0 / (1.0 + e.sum(axis=2))


def _pair_bound(a, s, refined):
    """(r, C) upper bound of E[sigma(z)], z ~ N(a, v) for every v in [0, s] (see _SoftmaxBound)."""
    if not refined:
        with np.errstate(over="ignore"):
            return np.minimum(np.exp(a + 0.5 * s), 1.0)
    out = expit(a)  # a > 0: the value at v = 0
    neg = a <= 0.0
    if neg.any():
        out[neg] = np.minimum(logistic_average(a[neg], s[neg]) + P_SLACK, 1.0)
    return out


def _softmax_laplace(m):
    """True for a fitted multi-class GPClassifier (softmax Laplace) averaging by the bounded
    quadrature (softmax_points None: the fixed Sobol rule has no error bound)."""
    post = getattr(m, "posterior_", None)
    return (post is not None and post.multiclass and "a" in post.state
            and post.precision is not None and getattr(m, "softmax_points", None) is None)


def _two_columns(p):
    """(N, 2) class probabilities from P(classes_[1]) (N,)."""
    return np.column_stack([1.0 - p, p])


def _has_factor(m):
    """True for a fitted binary GPClassifier (Laplace or EP) with a triangular factor."""
    post = getattr(m, "posterior_", None)
    return post is not None and post.factor is not None


def _mask(mask, n_rows, name):
    mask = np.asarray(mask)
    if mask.shape != (n_rows,) or mask.dtype != bool:
        raise ValueError(f"{name} must be a boolean array of shape ({n_rows},), got "
                         f"{mask.dtype} {mask.shape}")
    return mask


def in_double(model):
    """The model as `score_pool` reads it, each member predicting in double precision."""
    ms, w = members(model)
    return _Members([_Double(m) for m in ms], w, model.likelihood_)


class _Members:
    """What `score_pool` reads of a model: members_, weights_, likelihood_. Through it
    `score_pool`'s own code scores predictions made differently (double precision)."""

    def __init__(self, members_, weights, likelihood):
        self.members_, self.weights_, self.likelihood_ = members_, weights, likelihood


class _Double:
    """A fitted GPClassifier whose `predict_pool` computes in double precision; everything else
    (`latent`, `latent_cross_cov` for EPIG) is the model's."""

    def __init__(self, model):
        self._model = model

    def predict_pool(self, X, n_jobs=1):
        return self._model.predict_pool(X, precision="double", n_jobs=n_jobs)

    def __getattr__(self, name):
        return getattr(self._model, name)

