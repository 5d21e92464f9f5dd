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
