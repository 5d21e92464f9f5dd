"""Cohen's kappa: chance-corrected agreement between two label vectors.

Source: J. Cohen (1960), "A coefficient of agreement for nominal scales", Educational and
Psychological Measurement 20(1), 37-46.
"""

import numpy as np


def cohen_kappa(a, b) -> float:
    """Cohen's (1960) kappa between two raters' labels of the same items.

    ``kappa = (p_o - p_e) / (1 - p_e)`` where ``p_o`` is the observed proportion of items on which
    the raters agree and ``p_e = sum_k p_a(k) p_b(k)`` the agreement expected by chance from each
    rater's own class proportions (Cohen 1960, eqs. 1-2).

    Parameters
    ----------
    a, b : array-like of shape (n_items,)
        Labels of any hashable, mutually sortable kind (ints, strings).

    Returns
    -------
    float
        1.0 for perfect agreement, 0.0 for agreement at chance level, negative below chance.
        When ``p_e == 1`` the formula is 0/0: that happens only when both raters give every item
        the same single class, so they agree completely and we return 1.0.
    """
    a = np.asarray(a)
    b = np.asarray(b)
    if a.ndim != 1 or b.ndim != 1:
        raise ValueError(f"cohen_kappa needs 1-D label vectors, got shapes {a.shape} and {b.shape}")
    if a.shape != b.shape:
        raise ValueError(f"cohen_kappa needs equal lengths, got {a.size} and {b.size}")
    n = a.size
    if n == 0:
        raise ValueError("cohen_kappa needs at least one item, got empty label vectors")
    _, codes = np.unique(np.concatenate([a, b]), return_inverse=True)
    codes = codes.reshape(-1)
    k = int(codes.max()) + 1
    code_a, code_b = codes[:n], codes[n:]
    # Cohen (1960): p_o from the diagonal of the k x k agreement table, p_e from its margins.
    agree = int(np.count_nonzero(code_a == code_b))
    chance = int(np.dot(np.bincount(code_a, minlength=k), np.bincount(code_b, minlength=k)))
    if chance == n * n:  # p_e == 1: both raters constant on the same class
        return 1.0
    p_o = agree / n
    p_e = chance / (n * n)
    return float((p_o - p_e) / (1.0 - p_e))


def kappa_interval(a, b, confidence: float = 0.95) -> tuple[float, float, float, float]:
    """Cohen's kappa between two raters with its large-sample standard error and a normal
    confidence interval: ``(kappa, se, low, high)``, the interval clipped to [-1, 1].

    The standard error is the non-null asymptotic one of J. L. Fleiss, J. Cohen & B. S. Everitt
    (1969), "Large sample standard errors of kappa and weighted kappa", Psychological Bulletin
    72(5), 323-327: with the table of proportions p_ij, margins p_i. and p_.j, chance agreement
    p_e and kappa k,

        var = (A + B - C) / (n (1 - p_e)^2),
        A = sum_i p_ii [1 - (p_i. + p_.i)(1 - k)]^2,
        B = (1 - k)^2 sum_{i != j} p_ij (p_.i + p_j.)^2,
        C = [k - p_e (1 - k)]^2.

    With p_e == 1 (both raters constant on one class) kappa is 1 by convention and the standard
    error 0. For fewer than about 30 items the normal interval is rough; it is reported anyway,
    with n, by the caller.
    """
    from statistics import NormalDist

    a = np.asarray(a)
    b = np.asarray(b)
    kappa = cohen_kappa(a, b)  # validates the inputs
    n = a.size
    _, codes = np.unique(np.concatenate([a, b]), return_inverse=True)
    codes = codes.reshape(-1)
    k = int(codes.max()) + 1
    table = np.zeros((k, k))
    np.add.at(table, (codes[:n], codes[n:]), 1.0)
    p = table / n
    rows, cols = p.sum(axis=1), p.sum(axis=0)
    p_e = float(rows @ cols)
    if p_e >= 1.0:
        return 1.0, 0.0, 1.0, 1.0
    diag = np.diag(p)
    A = float(np.sum(diag * (1.0 - (rows + cols) * (1.0 - kappa)) ** 2))
    off = p.copy()
    np.fill_diagonal(off, 0.0)
    B = (1.0 - kappa) ** 2 * float(np.sum(off * (cols[:, None] + rows[None, :]) ** 2))
    C = (kappa - p_e * (1.0 - kappa)) ** 2
    se = float(np.sqrt(max(A + B - C, 0.0) / (n * (1.0 - p_e) ** 2)))
    z = NormalDist().inv_cdf(0.5 + confidence / 2.0)
    return kappa, se, max(-1.0, kappa - z * se), min(1.0, kappa + z * se)
