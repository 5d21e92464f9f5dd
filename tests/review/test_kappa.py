"""Cohen's kappa against a hand computation and against scikit-learn."""

import numpy as np
import pytest
from sklearn.metrics import cohen_kappa_score

from labelq.review import cohen_kappa


def _from_table(table, labels):
    """Two label vectors whose agreement table (rows: rater a, columns: rater b) is ``table``."""
    a, b = [], []
    for i, row in enumerate(table):
        for j, count in enumerate(row):
            a += [labels[i]] * count
            b += [labels[j]] * count
    return a, b


def test_two_by_two_worked_example():
    """Hand computation with Cohen's (1960) formula, kappa = (p_o - p_e) / (1 - p_e).

                  b: yes   b: no   | a total
        a: yes       20       5    |   25
        a: no        10      15    |   25
        b total      30      20    |   50

    p_o = (20 + 15) / 50 = 0.70
    p_e = (25 * 30 + 25 * 20) / 50**2 = 1250 / 2500 = 0.50
    kappa = (0.70 - 0.50) / (1 - 0.50) = 0.40
    """
    a, b = _from_table([[20, 5], [10, 15]], ["yes", "no"])
    assert cohen_kappa(a, b) == pytest.approx(0.40, abs=1e-12)


def test_three_by_three_worked_example():
    """Hand computation with Cohen's (1960) formula on three classes.

                   b: x   b: y   b: z  | a total
        a: x        10      2      3   |   15
        a: y         1     12      2   |   15
        a: z         4      1     15   |   20
        b total     15     15     20   |   50

    p_o = (10 + 12 + 15) / 50 = 37/50 = 0.74
    p_e = (15*15 + 15*15 + 20*20) / 2500 = 850 / 2500 = 0.34
    kappa = (0.74 - 0.34) / 0.66 = 0.40 / 0.66 = 20/33
    """
    a, b = _from_table([[10, 2, 3], [1, 12, 2], [4, 1, 15]], [0, 1, 2])
    assert cohen_kappa(a, b) == pytest.approx(20 / 33, abs=1e-12)


@pytest.mark.parametrize("seed", range(20))
def test_matches_scikit_learn_on_random_vectors(seed):
    """Reference: sklearn.metrics.cohen_kappa_score (unweighted), which implements Cohen (1960)."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(5, 400))
    k = int(rng.integers(2, 6))
    a = rng.integers(0, k, size=n)
    # b copies a with some probability so that kappa spans chance-level to high agreement
    b = np.where(rng.random(n) < rng.random(), a, rng.integers(0, k, size=n))
    if np.unique(np.concatenate([a, b])).size == 1:
        pytest.skip("constant vectors: sklearn returns nan, covered by the p_e == 1 test")
    assert cohen_kappa(a, b) == pytest.approx(cohen_kappa_score(a, b), abs=1e-12)


def test_string_labels_match_scikit_learn():
    """Reference: sklearn.metrics.cohen_kappa_score on string labels."""
    a = ["export", "local", "juice", "local", "export", "juice", "local"]
    b = ["export", "juice", "juice", "local", "local", "juice", "local"]
    assert cohen_kappa(a, b) == pytest.approx(cohen_kappa_score(a, b), abs=1e-12)


def test_constant_identical_raters_agree_fully():
    """p_e == 1 makes Cohen's formula 0/0; we define kappa = 1 there (documented in cohen_kappa;
    common practice, no published source)."""
    assert cohen_kappa(["a"] * 5, ["a"] * 5) == 1.0


def test_perfect_disagreement_on_two_balanced_classes_is_minus_one():
    """Cohen (1960): p_o = 0, p_e = 0.5 gives kappa = (0 - 0.5) / 0.5 = -1 (hand computation)."""
    assert cohen_kappa([0, 1, 0, 1], [1, 0, 1, 0]) == pytest.approx(-1.0)


@pytest.mark.parametrize("a, b", [([], []), ([1, 2], [1]), ([[1, 2]], [[1, 2]])])
def test_rejects_bad_input(a, b):
    """Common practice, no published source: empty, unequal or 2-D inputs are errors."""
    with pytest.raises(ValueError):
        cohen_kappa(a, b)


def _pairs(table):
    """Rater label pairs reproducing a contingency table (rows: rater a, columns: rater b)."""
    a, b = [], []
    for i, row in enumerate(table):
        for j, count in enumerate(row):
            a += [i] * count
            b += [j] * count
    return np.array(a), np.array(b)


def test_kappa_interval_worked_by_hand():
    """Fleiss, Cohen & Everitt (1969) standard error, worked by hand for the table
    [[20, 5], [10, 15]] (n = 50): p_o = 0.7, p_e = 0.5*0.6 + 0.5*0.4 = 0.5, kappa = 0.4;
    A = 0.4 (1 - 1.1*0.6)^2 + 0.3 (1 - 0.9*0.6)^2 = 0.04624 + 0.06348 = 0.10972;
    B = 0.36 (0.1*1.1^2 + 0.2*0.9^2) = 0.36 * 0.283 = 0.10188; C = (0.4 - 0.5*0.6)^2 = 0.01;
    var = (0.10972 + 0.10188 - 0.01) / (50 * 0.25) = 0.016128, se = 0.126996."""
    from labelq.review.kappa import kappa_interval

    kappa, se, low, high = kappa_interval(*_pairs([[20, 5], [10, 15]]))
    assert kappa == pytest.approx(0.4, abs=1e-12)
    assert se == pytest.approx(np.sqrt(0.016128), abs=1e-12)
    assert (low, high) == (pytest.approx(0.4 - 1.959964 * se, abs=1e-6),
                           pytest.approx(0.4 + 1.959964 * se, abs=1e-6))


@pytest.mark.parametrize("seed", range(5))
def test_kappa_interval_matches_statsmodels(seed):
    """statsmodels.stats.inter_rater.cohens_kappa (std_kappa, kappa_low, kappa_upp) on random
    3 x 3 tables."""
    from statsmodels.stats.inter_rater import cohens_kappa

    from labelq.review.kappa import kappa_interval

    rng = np.random.default_rng(seed)
    table = rng.integers(1, 30, size=(3, 3)) + np.diag(rng.integers(10, 60, size=3))
    ref = cohens_kappa(table)
    kappa, se, low, high = kappa_interval(*_pairs(table))
    assert kappa == pytest.approx(ref.kappa, abs=1e-12)
    assert se == pytest.approx(ref.std_kappa, abs=1e-12)
    assert low == pytest.approx(ref.kappa_low, abs=1e-9)
    assert high == pytest.approx(ref.kappa_upp, abs=1e-9)
