"""Averaged class probabilities from a Gaussian latent predictive distribution: the numerics.

Each likelihood object of labelq.gp.links integrates its link against N(mean, var) with one of
these (labelq.gp.predictive_probability dispatches on the likelihood):

- probit: closed form Phi(mean / sqrt(1 + var)) (GPML eq. 3.82);
- logistic: for standard deviations s <= 1, 40-node Gauss-Hermite quadrature of
  sigma(mean + s t) (GPML eq. 3.25 with a Gaussian q(f*)); for s > 1 the integrand becomes too
  steep for Gauss-Hermite, so we integrate by parts,
  E[sigma(f)] = int sigma'(g) Phi((mean - g) / s) dg, and use the trapezoid rule with step 0.75
  on g in [-36, 36] (the integrand is analytic in the strip |Im g| < pi, so the rule converges
  geometrically; error below 1e-8 in our tests against scipy.integrate.quad);
- softmax: (n, C) means and variances of independent Gaussian latents, probabilities
  E[softmax(f)] by a deterministic quadrature chosen per row, with a bound on its error
  (default 2e-4 per probability; softmax_quadrature and the section comment below); or, when a
  caller asks for a number of points, by quasi Monte Carlo with a fixed seeded scrambled Sobol
  set (2048 points: error below 1e-3, about 3e-4 at worst in our checks against quadrature).
"""
from typing import NamedTuple

import numpy as np
from numpy.polynomial.hermite import hermgauss
from scipy.special import expit, ndtr, ndtri

_GH_T, _GH_W = hermgauss(40)
_GH_W = _GH_W / np.sqrt(np.pi)
_GH_T = _GH_T * np.sqrt(2.0)
_TRAP_G = np.arange(-36.0, 36.0 + 0.375, 0.75)
_TRAP_W = 0.75 * expit(_TRAP_G) * expit(-_TRAP_G)
_TRAP_W /= _TRAP_W.sum()  # the weights of a density: sum to 1 exactly, so E[sigma] stays <= 1
SOFTMAX_POINTS = 2048
"""Quasi Monte Carlo points of the fixed-point softmax rule where no count is given (error
below 1e-3): rows beyond the quadrature's table (softmax_quadrature)."""
SOFTMAX_TOL = 2e-4
"""Default bound on the absolute error of each softmax probability (softmax_quadrature)."""
_SOFTMAX_SEED = 0
_sobol_cache = {}


def probit_average(mean, var):
    """E[Phi(f)], f ~ N(mean, var), in closed form Phi(mean / sqrt(1 + var)) (GPML eq. 3.82)."""
    return ndtr(mean / np.sqrt(1.0 + var))


def check_pair(mean, var):
    """mean and var as float arrays of one shape, finite, var >= 0; ValueError otherwise."""
    mean = np.asarray(mean, dtype=float)
    var = np.asarray(var, dtype=float)
    if mean.shape != var.shape:
        raise ValueError(f"mean shape {mean.shape} differs from var shape {var.shape}")
    if not (np.all(np.isfinite(mean)) and np.all(np.isfinite(var))):
        raise ValueError("mean and var must be finite (found NaN or inf)")
    if np.any(var < 0):
        raise ValueError(f"var must be >= 0, found minimum {var.min()!r}")
    return mean, var


def logistic_average(mean, var, block=20_000):
    """E[sigma(f)], f ~ N(mean, var), shape (n,); see the module docstring for the rule.

    Rows go in blocks so the (rows, nodes) work arrays stay small on large pools.
    """
    out = np.empty_like(mean)
    for start in range(0, mean.shape[0], block):
        sl = slice(start, start + block)
        out[sl] = _logistic_block(mean[sl], np.sqrt(var[sl]))
    return np.clip(out, 0.0, 1.0, out=out)


def _logistic_block(mean, s):
    out = np.empty_like(mean)
    narrow = s <= 1.0
    if np.any(narrow):
        m, sd = mean[narrow], s[narrow]
        out[narrow] = expit(m[:, None] + sd[:, None] * _GH_T) @ _GH_W
    wide = ~narrow
    if np.any(wide):
        m, sd = mean[wide], s[wide]
        out[wide] = ndtr((m[:, None] - _TRAP_G) / sd[:, None]) @ _TRAP_W
    return out


def _sobol_normals(n_classes, n_points):
    """Fixed (n_points, n_classes) standard normal quasi-random points (scrambled Sobol, seed 0)."""
    if (n_classes, n_points) not in _sobol_cache:
        from scipy.stats import qmc  # imported here: scipy.stats adds half a second to start-up

        u = qmc.Sobol(d=n_classes, scramble=True, seed=_SOFTMAX_SEED).random(n_points)
        _sobol_cache[n_classes, n_points] = ndtri(u)
    return _sobol_cache[n_classes, n_points]


def softmax_average(mean, var, n_points=None, block=256, tol=SOFTMAX_TOL):
    """E[softmax(f)], f_c ~ N(mean_c, var_c) independent, (n, C).

    Without ``n_points``: ``softmax_quadrature`` with absolute error at most ``tol`` per
    probability; its work arrays hold at most block * 256 row-point pairs. With ``n_points``:
    the fixed scrambled Sobol rule of that many points for every row (no error estimate), in
    blocks of ``block`` rows.
    """
    if n_points is None:
        return softmax_quadrature(mean, var, tol, work=block * 256).proba
    return _softmax_fixed_qmc(mean, var, n_points, block)


def _softmax_fixed_qmc(mean, var, n_points, block):
    """The fixed-point rule: one scrambled Sobol set of n_points for every row, (n, C).

    Work arrays are laid out (C, rows, points) so that the reductions over classes are
    element-wise operations on contiguous arrays.
    """
    n, n_classes = mean.shape
    z = np.ascontiguousarray(_sobol_normals(n_classes, n_points).T)[:, None, :]
    mean_t = np.ascontiguousarray(mean.T)[:, :, None]
    sd_t = np.ascontiguousarray(np.sqrt(var).T)[:, :, None]
    out = np.empty_like(mean)
    for start in range(0, n, block):
        sl = slice(start, start + block)
        f = mean_t[:, sl] + sd_t[:, sl] * z
        f -= f.max(axis=0)  # softmax in place, stable for any |f|
        np.exp(f, out=f)
        f /= f.sum(axis=0)
        out[sl] = f.mean(axis=2).T
    return out


# ------------------------------------------------------------------ softmax: bounded quadrature
#
# Along one class latent f_c, with the others held fixed, every softmax component is a scaled
# logistic: p_c = sigma(f_c - log A) and p_k = (e^f_k / A) sigma(log A - f_c) for k != c, where
# A = sum_{j != c} e^f_j and e^f_k / A <= 1 (algebra). A one-dimensional rule with nodes z_q and
# positive weights w_q summing to 1 therefore integrates f_c ~ N(m_c, s_c^2) with an error of
# at most
#     e(rule, s_c) = sup_a | sum_q w_q sigma(a + s_c z_q) - E[sigma(a + s_c Z)] |
# for every component and every value of the other latents (sigma(-x) = 1 - sigma(x) and the
# symmetric rules make the sign irrelevant). The tensor product of one rule per class then
# errs by at most sum_c e(rule_c, s_c): write I - Q_1 x ... x Q_C as a telescoping sum of terms
# with one factor (I_c - Q_c) and positive, unit-mass operators elsewhere (the classical
# tensor-product error decomposition). e is tabulated once per process on a grid of s (the
# supremum over a on a fine grid, against the logistic-normal average above, raised by a safety
# factor and made non-decreasing in s); each class gets the cheapest rule whose e meets its
# share of tol.
#
# The rules: Gauss-Hermite (numpy's hermgauss), best for small s, and Gaussian-weighted
# trapezoid rules in z on [-L, L], which need far fewer nodes for large s (the logistic is
# analytic in a strip of half-width pi in f, so pi / s in z).
#
# Rows whose tensor product is costly are computed through the Gumbel-max identity instead
# (softmax_c(f) = P(argmax_j (f_j + g_j) = c), g_j iid standard Gumbel; e.g. Maddison, Tarlow &
# Minka 2014, "A* sampling"): with G(x) = exp(-e^-x) the Gumbel cdf and g = G' its density,
#     softmax_c(f) = int g(t - f_c) prod_{j != c} G(t - f_j) dt,
# so the tensor sum factorises into one-dimensional mixtures per class,
#     p_c = int D_c(t) prod_{j != c} Psi_j(t) dt,  Psi_j = sum_q w_jq G(t - a_jq),
#     D_c = sum_q w_cq g(t - a_cq),  a_jq = m_j + s_j z_q,
# which costs (t nodes) x sum_c Q_c instead of prod_c Q_c. The t integral is taken by the
# trapezoid rule of step h: the integrand is entire, and in the strip |Im t| < d < pi / 2 each
# tensor term has |G| <= 1 and int |g| dx = 1 / cos d, so the rule errs by at most
# 2 / (cos d (exp(2 pi d / h) - 1)) (Trefethen & Weideman 2014, "The exponentially convergent
# trapezoidal rule", SIAM Review 56, Thm 5.1). The grid starts 4 below the largest lowest node
# (every integrand there is below exp(-e^4) ~ 2e-24) and ends `tail` above the highest node
# (what the rule leaves beyond is below e^-tail h / (1 - e^-h) < 1.6 e^-tail). Rows are
# renormalised to sum to one. Per tensor node the class integrands add up to
# d/dt prod_j G(t - a_j) = g(t - log sum_j e^a_j), one Gumbel density, so the sum's rule error
# has the same bound as one class's, and renormalising moves each probability by at most that
# much again: the Gumbel rows' allowance is twice (trapezoid + tail) bound, a little raised.
# h and tail are the coarsest that keep this allowance within a tenth of tol.
#
# Rows whose latents are all wide (s >= 1, e.g. a model far from its labels) are cheaper the
# other way round: keep each f_j ~ N(m_j, s_j^2) exact and discretise its Gumbel noise g_j
# instead, by a Gauss rule (u_k, omega_k) for the standard Gumbel distribution (Golub-Welsch on
# the recurrence of its orthogonal polynomials, found by the discretised Stieltjes procedure;
# Gautschi 2004, "Orthogonal polynomials: computation and approximation", sec. 2.2). Then
#     p_c = int dens_c(t) prod_{j != c} cdf_j(t) dt,
#     cdf_j = sum_k omega_k Phi((t - m_j - u_k) / s_j),  dens_c = d cdf_c / dt,
# is P(argmax_j (f_j + U_j) = c) for the discretised noise U_j, an exact probability vector.
# Replacing one g_j at a time, everything else held fixed, changes the event's probability by a
# rule error for u -> Phi((x - u) / s_j) (the indicator of f_j + u being above or below the
# rest, averaged over f_j), so the error is at most sum_j e_u(rule_j, s_j), with
#     e_u(rule, s) = sup_x | sum_k omega_k Phi((x - u_k) / s) - E[Phi((x - g) / s)] |,
# tabulated on its own grid of s (it falls fast as s grows: one more point per class buys
# about a decade). The t rule has step eta * min_j s_j: in the strip |Im t| < delta min s,
# |Phi((t - mu) / s_j)| <= e^{delta^2 / 2} and int |dens_c| <= e^{delta^2 / 2}, so the
# trapezoid errs by at most 2 e^{C delta^2 / 2} / (exp(2 pi delta / eta) - 1) per class
# (Trefethen & Weideman, Thm 5.1), and C times that for the sum used to renormalise.

_GH_SIZES = (1, 2, 3, 4, 5, 6, 8, 10, 12, 16)
_TRAP_SIZES = (8, 10, 12, 16, 20, 24, 32, 40, 48, 64, 96, 128)
_TRAP_HALF_WIDTHS = (4.0, 4.0, 4.0, 4.0, 4.0, 4.0, 4.5, 4.5, 4.5, 5.0, 5.0, 5.0)
_S_GRID = np.geomspace(1e-3, 16.0, 120)
_BOUND_SAFETY = 1.15
_REFERENCE_ERROR = 3e-7
"""Added to every tabulated bound: logistic_average's own error (1e-8) and what lies beyond the
tabulated range of a (every node's sigma below e^-16, and so the exact value, up to 1e-11)."""
_GUMBEL_STEPS = (0.6, 0.5, 0.45, 0.4, 0.35, 0.3, 0.25, 0.2)
_NOISE_SIZES = (1, 2, 3, 4, 5, 6, 8, 10, 12, 16, 20)
_U_GRID = np.geomspace(1.0, 256.0, 40)
_NOISE_STEPS = (1.0, 0.8, 0.7, 0.6, 0.5, 0.4, 0.35, 0.3, 0.25, 0.2)
_GUMBEL_COST = 3.0
"""Work of one Gumbel-factor evaluation (an exp, running sums) in tensor points (measured)."""
_NOISE_COST = 4.0
"""Work of one noise evaluation (a Phi at 13 ns and an exp at 1 ns here) in tensor points
(about 5 ns each, measured)."""
_rule_cache = {}


class SoftmaxAverage(NamedTuple):
    """Result of softmax_quadrature."""

    proba: np.ndarray
    """(n, C) averaged class probabilities, rows summing to one."""
    error: np.ndarray
    """(n,) bound on the absolute error of every probability of the row (1.0 for rows beyond the
    tables, see softmax_quadrature)."""
    evaluations: np.ndarray
    """(n,) work per row: tensor points, or t nodes x rule nodes (Gumbel and noise ways), or
    2048 for the fixed rule."""


def _one_dim_rules():
    """The 1-D rules sorted by size: (nodes list, weights list, sizes (R,), bound table (R, S)).

    Tabulated once per process: see the section comment above. A rule is tabulated only on the
    part of the s grid where it can be the cheapest choice (Gauss-Hermite for s <= 4, trapezoid
    rules of q nodes for s >= max(0.7, q / 16)); elsewhere its entry is the trivial bound 1. The
    supremum over a is taken on a grid of step 0.1: the error oscillates with period s * (node
    gap) in a, with an amplitude of order exp(-2 pi^2 / (s gap)) (the logistic's poles at
    +-i pi), so any oscillation above 1e-14 is sampled at least six times per period (hence the
    safety factor 1.15).
    """
    if "rules" not in _rule_cache:
        rules = []
        for q in _GH_SIZES:
            t, w = hermgauss(q)
            rules.append((t * np.sqrt(2.0), w / np.sqrt(np.pi), _S_GRID <= 4.0))
        for q, half in zip(_TRAP_SIZES, _TRAP_HALF_WIDTHS):
            t = np.linspace(-half, half, q)
            w = np.exp(-0.5 * t * t)
            rules.append((t, w / w.sum(), _S_GRID >= max(0.7, q / 16.0)))
        rules.sort(key=lambda r: r[0].size)
        bound = np.zeros((len(rules), _S_GRID.size))
        used = np.array([rule[2] for rule in rules])
        for k, s in enumerate(_S_GRID):
            reach = 16.0 + 6.7 * s  # beyond, every node's sigma and the exact value are < 1e-7
            a = np.linspace(-reach, 0.0, int(reach / 0.1) + 2)
            exact = logistic_average(a, np.full_like(a, s * s))  # |error| is symmetric in a
            for r in np.flatnonzero(used[:, k]):
                t, w, _ = rules[r]
                bound[r, k] = np.abs(expit(a[:, None] + s * t) @ w - exact).max()
        bound = (np.maximum.accumulate(bound, axis=1) + _REFERENCE_ERROR) * _BOUND_SAFETY
        bound = np.where(used, np.minimum(bound, 1.0), 1.0)
        sizes = np.array([t.size for t, _, _ in rules])
        _rule_cache["rules"] = ([t for t, _, _ in rules], [w for _, w, _ in rules], sizes, bound)
    return _rule_cache["rules"]


def _gumbel_trapezoid_bound(h):
    """Bound on the trapezoid error of the Gumbel-factorised integral with step h (see above)."""
    d = np.linspace(0.05, np.pi / 2 - 0.01, 200)
    return float(np.min(2.0 / (np.cos(d) * np.expm1(2.0 * np.pi * d / h))))


def _gumbel_grid(tol):
    """(step h, tail, allowance) of the Gumbel rows' t grid: the coarsest step of _GUMBEL_STEPS
    and the shortest tail whose allowance 2.2 (trapezoid + 1.6 e^-tail) is within tol / 10."""
    share = tol / 10.0 / 2.2 / 2.0
    step = next((h for h in _GUMBEL_STEPS if _gumbel_trapezoid_bound(h) <= share),
                _GUMBEL_STEPS[-1])
    tail = max(np.log(1.6 / share), 8.0)
    return step, tail, 2.2 * (_gumbel_trapezoid_bound(step) + 1.6 * np.exp(-tail))


def _choose_rules(sd, tol_class):
    """Rule index and error bound per latent, (n, C) each: the smallest rule whose tabulated
    bound at the next grid value of s >= sd meets tol_class."""
    bound = _one_dim_rules()[3]
    meets = bound <= tol_class
    cheapest = np.where(meets.any(axis=0), meets.argmax(axis=0), bound.argmin(axis=0))
    k = np.searchsorted(_S_GRID, sd)
    inside = k < _S_GRID.size
    k = np.minimum(k, _S_GRID.size - 1)
    rule = cheapest[k]
    return rule, np.where(inside, bound[rule, k], 1.0)


def _padded_rules():
    """The rules as zero-padded tables: nodes and weights (R, largest size), node reach (R,)."""
    if "padded" not in _rule_cache:
        nodes, weights, sizes, _ = _one_dim_rules()
        table_z = np.zeros((sizes.size, sizes.max()))
        table_w = np.zeros_like(table_z)
        for r, (t, w) in enumerate(zip(nodes, weights)):
            table_z[r, :t.size], table_w[r, :t.size] = t, w
        _rule_cache["padded"] = table_z, table_w, np.abs(table_z).max(axis=1)
    return _rule_cache["padded"]


def softmax_quadrature(mean, var, tol=SOFTMAX_TOL, work=1 << 16):
    """E[softmax(f)], f_c ~ N(mean_c, var_c) independent, with an error bound per row.

    mean, var : (n, C) finite, var >= 0.
    tol : bound on the absolute error of each probability (bounds below about 1e-5 may not be
        reached: the returned error says what was).
    work : row-point pairs per work array (memory bound).
    Returns SoftmaxAverage(proba (n, C), error (n,), evaluations (n,)). Deterministic; each row
    depends on its own mean and var only. Each row takes the cheapest of three ways (see the
    comment above): the tensor product of one 1-D rule per class, the same rules through the
    Gumbel factorisation, or discretised Gumbel noise (all latents wide); each class's rule is
    the cheapest meeting (tol - the way's t-rule allowance) / C. Rows are grouped so that each
    group is one vectorised computation. Rows beyond every table (a latent standard deviation
    above 16 next to a narrow one, or above 256) take the fixed 2048-point scrambled Sobol rule
    and the bound 1.0.
    """
    mean = np.asarray(mean, dtype=float)
    var = np.asarray(var, dtype=float)
    sd = np.sqrt(var)
    n, n_classes = mean.shape
    proba = np.empty((n, n_classes))
    error = np.ones(n)
    evaluations = np.zeros(n)
    if n == 0:
        return SoftmaxAverage(proba, error, evaluations)
    nodes, weights, sizes, _ = _one_dim_rules()
    step, tail, extra = _gumbel_grid(tol)
    rule, bound = _choose_rules(sd, (tol - extra) / n_classes)
    q = sizes[rule]
    half = _padded_rules()[2][rule] * sd
    t_nodes = np.ceil(((mean + half).max(axis=1) - (mean - half).max(axis=1) + 4.0
                       + tail) / step).astype(int) + 1
    in_table = sd.max(axis=1) <= _S_GRID[-1]
    tensor_cost = np.where(in_table, np.prod(q.astype(float), axis=1) * n_classes, np.inf)
    gumbel_cost = np.where(in_table, _GUMBEL_COST * t_nodes * q.sum(axis=1), np.inf)
    noise = _noise_plan(mean, sd, tol)
    way = np.argmin(np.column_stack([tensor_cost, gumbel_cost, noise.cost]), axis=1)
    way[~np.isfinite(np.minimum(np.minimum(tensor_cost, gumbel_cost), noise.cost))] = 3
    rows = np.flatnonzero(way == 0)
    # Tensor rows: classes sorted by rule within each row (softmax is symmetric), grouped by the
    # sorted rules.
    order = np.argsort(-rule[rows], axis=1, kind="stable")
    groups, members = _group_rows(np.take_along_axis(rule[rows], order, axis=1))
    for rules, member in zip(groups, members):
        idx, perm = rows[member], order[member]
        p = _tensor_group(np.take_along_axis(mean[idx], perm, axis=1),
                          np.take_along_axis(sd[idx], perm, axis=1),
                          [nodes[r] for r in rules], [weights[r] for r in rules], work)
        out = np.empty_like(p)
        np.put_along_axis(out, perm, p, axis=1)
        proba[idx] = out
        evaluations[idx] = np.prod(sizes[rules])
        error[idx] = bound[idx].sum(axis=1)
    # Gumbel rows: grouped by their padded node count and t grid.
    rows = np.flatnonzero(way == 1)
    slots = q[rows].sum(axis=1)
    groups, members = _group_rows(np.column_stack([-(-slots // 8), -(-t_nodes[rows] // 8)]))
    for (slots_8, t_8), member in zip(groups, members):
        idx = rows[member]
        proba[idx] = _gumbel_group(mean[idx], sd[idx], rule[idx], 8 * slots_8, 8 * t_8, step,
                                   work)
        error[idx] = bound[idx].sum(axis=1) + extra
        evaluations[idx] = 8 * t_8 * slots[member]
    # Noise rows: grouped by their rule and t grid.
    rows = np.flatnonzero(way == 2)
    groups, members = _group_rows(np.column_stack([noise.rule[rows],
                                                   -(-noise.t_nodes[rows] // 4)]))
    for (noise_rule, t_4), member in zip(groups, members):
        idx = rows[member]
        proba[idx] = _noise_group(mean[idx], sd[idx], noise_rule, 4 * t_4, noise.eta,
                                  noise.reach, work)
        error[idx] = noise.bound[idx].sum(axis=1) + noise.extra
        evaluations[idx] = 4 * t_4 * n_classes * noise.sizes[idx]
    beyond = way == 3
    if beyond.any():
        proba[beyond] = _softmax_fixed_qmc(mean[beyond], var[beyond], SOFTMAX_POINTS, 256)
        evaluations[beyond] = SOFTMAX_POINTS
    return SoftmaxAverage(proba, np.minimum(error, 1.0), evaluations)


class _NoisePlan(NamedTuple):
    reach: float  # t range: every class's noise nodes +- reach * s
    rule: np.ndarray  # (n,) the noise rule of every latent of the row
    bound: np.ndarray  # (n, C) its tabulated error per latent
    sizes: np.ndarray  # (n,) its size
    t_nodes: np.ndarray  # (n,) t nodes
    cost: np.ndarray  # (n,) cost in exp-equivalents, inf where the way does not apply
    eta: float  # t step / smallest latent standard deviation of the row
    extra: float  # the t rule's allowance


def _noise_plan(mean, sd, tol):
    """Rules, t grid and cost of the discretised-noise way for every row (see above)."""
    n, n_classes = mean.shape
    smallest = sd.min(axis=1)
    usable = smallest >= _U_GRID[0]
    if not usable.any():
        none = np.zeros(n, dtype=int)
        return _NoisePlan(0.0, none, np.ones((n, n_classes)), none, none, np.full(n, np.inf),
                          1.0, 0.0)
    reach, eta, extra = _noise_grid(tol, n_classes)
    nodes, _, sizes, table = _noise_rules()
    meets = table <= (tol - extra) / n_classes
    cheapest = np.where(meets.any(axis=0), meets.argmax(axis=0), table.argmin(axis=0))
    k = np.clip(np.searchsorted(_U_GRID, sd, side="right") - 1, 0, _U_GRID.size - 1)
    rule = cheapest[k].max(axis=1)  # one rule for the row: the largest its latents need
    usable &= sd.max(axis=1) <= _U_GRID[-1]
    low = np.array([u.min() for u in nodes])[rule]
    high = np.array([u.max() for u in nodes])[rule]
    span = ((mean + reach * sd).max(axis=1) - (mean - reach * sd).max(axis=1) + high - low)
    t_nodes = np.ceil(span / (eta * np.maximum(smallest, _U_GRID[0]))).astype(int) + 1
    cost = np.where(usable, _NOISE_COST * t_nodes * n_classes * sizes[rule], np.inf)
    t_nodes = np.where(usable, t_nodes, 0)
    return _NoisePlan(reach, rule, table[rule[:, None], k], sizes[rule], t_nodes, cost, eta,
                      extra)


def _noise_rules():
    """Gauss rules for the standard Gumbel distribution, sorted by size, with their error table
    on _U_GRID: (nodes list, weights list, sizes (R,), bound (R, S)), made once per process.

    The recurrence comes from the discretised Stieltjes procedure on the Gumbel density sampled
    with step 0.005 on [-4, 40] (mass outside below 1e-17). e_u is the supremum over x on a grid
    of step 0.1 max(1, s / 2) of |rule - exact|, the exact value by the trapezoid rule in u
    (step 0.1 on [-3.5, 30]; the integrand is analytic), made non-increasing in s by a running
    maximum from the right (the table is read at the grid value just below s), plus the same
    allowances as the other table.
    """
    if "noise" not in _rule_cache:
        u = np.arange(-4.0, 40.0, 0.005)
        w = np.exp(-u - np.exp(-u))
        w /= w.sum()
        alpha, beta = [], []
        q_prev, q_k, b = np.zeros_like(u), np.ones_like(u), 0.0
        for _ in range(max(_NOISE_SIZES)):  # orthonormal polynomials in the discrete measure
            alpha.append(w @ (u * q_k * q_k))
            r = (u - alpha[-1]) * q_k - b * q_prev
            b = np.sqrt(w @ (r * r))
            beta.append(b)
            q_prev, q_k = q_k, r / b
        rules = []
        for q in _NOISE_SIZES:  # Golub-Welsch
            jacobi = np.diag(alpha[:q]) + np.diag(beta[:q - 1], 1) + np.diag(beta[:q - 1], -1)
            x, vectors = np.linalg.eigh(jacobi)
            rules.append((x, vectors[0] ** 2 / (vectors[0] ** 2).sum()))
        fine = np.arange(-3.5, 30.0, 0.1)
        dens = np.exp(-fine - np.exp(-fine))
        dens /= dens.sum()
        bound = np.empty((len(rules), _U_GRID.size))
        for k, s in enumerate(_U_GRID):
            x = np.arange(-3.0 - 7.0 * s, 25.0 + 7.0 * s, 0.1 * max(1.0, s / 2.0))
            exact = ndtr((x[:, None] - fine) / s) @ dens
            for r, (nodes, weights) in enumerate(rules):
                bound[r, k] = np.abs(ndtr((x[:, None] - nodes) / s) @ weights - exact).max()
        bound = np.maximum.accumulate(bound[:, ::-1], axis=1)[:, ::-1]
        bound = np.minimum((bound + _REFERENCE_ERROR) * _BOUND_SAFETY, 1.0)
        _rule_cache["noise"] = ([x for x, _ in rules], [w for _, w in rules],
                                np.array(_NOISE_SIZES), bound)
    return _rule_cache["noise"]


def _noise_trapezoid_bound(eta, n_classes):
    """Bound on one class's t-rule error of the noise way with step eta * min s (see above)."""
    delta = np.linspace(0.02, 4.0, 400)
    return float(np.min(2.0 * np.exp(n_classes * delta ** 2 / 2.0)
                        / np.expm1(2.0 * np.pi * delta / eta)))


def _noise_grid(tol, n_classes):
    """(reach, eta, allowance) of the noise way's t grid: the range reaches `reach` standard
    deviations beyond every class's noise nodes, the cut tails (4 Phi(-reach): each class's
    integral and the sum, both sides) within tol / 100; the step is the coarsest of
    _NOISE_STEPS whose allowance, (C + 1) times the trapezoid bound plus the tails, a little
    raised, is within tol / 10."""
    reach = -ndtri(tol / 400.0)

    def allowance(eta):
        return 1.1 * ((n_classes + 1) * _noise_trapezoid_bound(eta, n_classes)
                      + 4.0 * ndtr(-reach))
    eta = next((h for h in _NOISE_STEPS if allowance(h) <= tol / 10.0), _NOISE_STEPS[-1])
    return reach, eta, allowance(eta)


def _group_rows(key):
    """Groups of equal rows of a non-negative int matrix key (n, k): (distinct rows (G, k), list
    of the row indices of each), like np.unique(axis=0) but through one int64 code where it
    fits."""
    if key.shape[0] == 0:
        return key[:0], []
    base = key.max(axis=0).astype(float) + 1.0
    if np.log2(base).sum() < 62:
        radix = np.concatenate([[1], np.cumprod(base[:-1])]).astype(np.int64)
        _, first, inverse = np.unique(key @ radix, return_index=True, return_inverse=True)
        groups = key[first]
    else:
        groups, inverse = np.unique(key, axis=0, return_inverse=True)
    inverse = inverse.ravel()
    by_group = np.argsort(inverse, kind="stable")
    ends = np.cumsum(np.bincount(inverse, minlength=len(groups)))
    return groups, np.split(by_group, ends[:-1])


def _tensor_group(m, s, nodes, weights, work):
    """Tensor-product rule for rows sharing one rule per class: (rows, C)."""
    grid = np.meshgrid(*nodes, indexing="ij")
    z = np.stack([g.ravel() for g in grid])[:, None, :]  # (C, 1, P)
    w = np.prod(np.meshgrid(*weights, indexing="ij"), axis=0).ravel()
    mean_t = np.ascontiguousarray(m.T)[:, :, None]
    sd_t = np.ascontiguousarray(s.T)[:, :, None]
    out = np.empty_like(m)
    step = max(1, work // w.size)
    for start in range(0, len(m), step):
        sl = slice(start, start + step)
        f = mean_t[:, sl] + sd_t[:, sl] * z
        f -= f.max(axis=0)  # softmax in place, stable for any |f|
        np.exp(f, out=f)
        f /= f.sum(axis=0)
        out[sl] = (f @ w).T
    return out


def _slots(rule, sizes, table_z, table_w, n_slots):
    """Lay each row's rule nodes class after class in n_slots slots: (class (rows, L), node
    (rows, L), weight (rows, L) with 0 in unused slots, class starts and ends (rows, C))."""
    ends = np.cumsum(sizes, axis=1)
    starts = ends - sizes
    slot = np.arange(n_slots)
    cls = np.minimum((slot[None, :, None] >= ends[:, None, :]).sum(axis=2), sizes.shape[1] - 1)
    local = slot - np.take_along_axis(starts, cls, axis=1)
    used = local < np.take_along_axis(sizes, cls, axis=1)
    owner = np.take_along_axis(rule, cls, axis=1)
    local = np.where(used, local, 0)
    return (cls, table_z[owner, local], np.where(used, table_w[owner, local], 0.0), starts,
            ends)


def _gumbel_group(m, s, rule, n_slots, n_t, step, work):
    """Gumbel-factorised rule, (rows, C): each row's class mixtures Psi_c and D_c on n_t points
    of the given step (see the comment above)."""
    table_z, table_w, table_reach = _padded_rules()
    sizes = _one_dim_rules()[2]
    decay = np.exp(-step * np.arange(n_t))[None, :, None]  # e^{-(t - t_lo)}
    out = np.empty_like(m)
    rows = max(1, work // (n_t * n_slots))
    for start in range(0, len(m), rows):
        sl = slice(start, start + rows)
        mm, ss, rr = m[sl], s[sl], rule[sl]
        cls, z, w, starts, ends = _slots(rr, sizes[rr], table_z, table_w, n_slots)
        a = np.take_along_axis(mm, cls, axis=1) + np.take_along_axis(ss, cls, axis=1) * z
        t_lo = (mm - table_reach[rr] * ss).max(axis=1, keepdims=True) - 4.0
        x = np.exp(a - t_lo)[:, None, :] * decay  # e^{a - t}
        cdf = np.exp(-x)  # G(t - a)
        cdf *= w[:, None, :]
        psi = _class_sums(cdf, starts, ends)
        cdf *= x  # w g(t - a) = w e^{a - t} G(t - a)
        out[sl] = _t_integral(_class_sums(cdf, starts, ends), psi)
    return out


def _noise_group(m, s, rule, n_t, eta, reach, work):
    """Discretised-noise rule ``rule`` for every latent, (rows, C): each row's class cdfs and
    densities (Gaussian mixtures) on n_t points of step eta * (the row's smallest s)."""
    nodes, weights, _, _ = _noise_rules()
    u, w = nodes[rule], weights[rule]
    inv_s = 1.0 / s
    low = (m + u.min() - reach * s).max(axis=1)
    h = eta * s.min(axis=1)
    out = np.empty_like(m)
    rows = max(1, work // (n_t * m.shape[1]))
    for start in range(0, len(m), rows):
        sl = slice(start, start + rows)
        t = low[sl, None] + h[sl, None] * np.arange(n_t)  # (rows, T)
        scaled = t[:, :, None] * inv_s[sl, None, :]  # (rows, T, C)
        cdf = np.zeros_like(scaled)
        dens = np.zeros_like(scaled)
        for node, weight in zip(u, w):  # a few noise nodes; rows, t and classes vectorised
            x = scaled - ((m[sl] + node) * inv_s[sl])[:, None, :]
            cdf += weight * ndtr(x)
            x *= x
            x *= -0.5
            np.exp(x, out=x)
            dens += weight * x
        out[sl] = _t_integral(dens * inv_s[sl, None, :], cdf)  # phi's 1 / sqrt(2 pi) cancels
    return out


def _t_integral(dens, cdf):
    """sum_t dens_c prod_{j != c} cdf_j over the t axis of (rows, T, C), rows normalised to sum
    to one (the step cancels)."""
    others = np.ones_like(cdf)  # prod_{j != c} cdf_j, by running products from both ends
    for c in range(1, cdf.shape[2]):
        others[..., c] = others[..., c - 1] * cdf[..., c - 1]
    after = np.ones_like(cdf[..., 0])
    for c in range(cdf.shape[2] - 2, -1, -1):
        after *= cdf[..., c + 1]
        others[..., c] *= after
    p = (dens * others).sum(axis=1)
    return p / p.sum(axis=1, keepdims=True)


def _class_sums(values, starts, ends):
    """Sums of values (rows, T, slots) over each class's slots [starts, ends) (rows, C)."""
    running = np.zeros(values.shape[:2] + (values.shape[2] + 1,))
    np.cumsum(values, axis=2, out=running[..., 1:])
    return (np.take_along_axis(running, ends[:, None, :], axis=2)
            - np.take_along_axis(running, starts[:, None, :], axis=2))
