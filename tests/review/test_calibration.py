"""Audit figures (labelq.review.calibration): Wilson interval, reliability table, expected
calibration error, over/under-confidence flag, text and PNG reliability charts.

Sources are named beside each check. statsmodels is not in the ``test`` extra, so its checks are
skipped where it is missing; SciPy's ``binomtest(...).proportion_ci(method="wilson")`` (a
dependency of labelq) checks the same grid everywhere.
"""

import json
import sys

import numpy as np
import pytest

from labelq.review.calibration import (CURVE_COLOUR, MIN_RENDER_WIDTH, OVER_CONFIDENT, PNG_SIZE,
                                       UNDER_CONFIDENT, AuditSummary, bins_ece, calibration_flag,
                                       expected_calibration_error, reliability_table,
                                       render_reliability, summarise_audit, top_label,
                                       wilson_interval, write_reliability_png)
from labelq.review.png import PlotUnavailableError

# (k, n) grid: boundaries k = 0 and k = n, n = 1, small and large n.
GRID = [(0, 1), (1, 1), (0, 2), (1, 2), (2, 2), (0, 20), (1, 29), (3, 7), (15, 148), (81, 263),
        (50, 100), (99, 100), (100, 100), (0, 1000), (1, 1000), (999, 1000), (7, 100_000)]
LEVELS = [0.5, 0.8, 0.9, 0.95, 0.99, 0.999]


# --- Wilson interval -------------------------------------------------------------------------

@pytest.mark.parametrize("k, n, low, high", [
    (81, 263, 0.2553, 0.3662),
    (15, 148, 0.0624, 0.1605),
    (0, 20, 0.0, 0.1611),
    (1, 29, 0.0061, 0.1718),
])
def test_wilson_newcombe_worked_examples(k, n, low, high):
    """Newcombe (1998), "Two-sided confidence intervals for the single proportion: comparison of
    seven methods", Statistics in Medicine 17:857-872, Table I, method 3 (score interval, no
    continuity correction). The values are quoted from memory; all four agree at 4 decimals with
    statsmodels' proportion_confint(method="wilson") (the primary check, below)."""
    got = wilson_interval(k, n)
    assert got == pytest.approx((low, high), abs=5e-5)


@pytest.mark.parametrize("confidence", LEVELS)
def test_wilson_against_statsmodels(confidence):
    """statsmodels.stats.proportion.proportion_confint(k, n, alpha, method="wilson")."""
    proportion = pytest.importorskip("statsmodels.stats.proportion")
    for k, n in GRID:
        want = proportion.proportion_confint(k, n, alpha=1.0 - confidence, method="wilson")
        got = wilson_interval(k, n, confidence)
        assert got == pytest.approx(want, rel=1e-12, abs=1e-15), (k, n)


@pytest.mark.parametrize("confidence", LEVELS)
def test_wilson_against_scipy(confidence):
    """scipy.stats.binomtest(k, n).proportion_ci(confidence_level, method="wilson") (SciPy's
    Wilson interval without continuity correction; needs k >= 0, n >= 1)."""
    from scipy.stats import binomtest

    for k, n in GRID:
        ci = binomtest(k, n).proportion_ci(confidence_level=confidence, method="wilson")
        got = wilson_interval(k, n, confidence)
        assert got == pytest.approx((ci.low, ci.high), rel=1e-12, abs=1e-15), (k, n)


def test_wilson_exact_at_the_boundaries_and_empty():
    """Wilson (1927): k = 0 gives a lower bound of 0 and k = n an upper bound of 1, exactly; no
    observations leave the whole unit interval (common practice)."""
    for n in (1, 2, 29, 1000, 10**9):
        assert wilson_interval(0, n)[0] == 0.0
        assert wilson_interval(n, n)[1] == 1.0
        assert wilson_interval(0, n)[1] > 0.0 and wilson_interval(n, n)[0] < 1.0
    assert wilson_interval(0, 0) == (0.0, 1.0)


def test_wilson_symmetry_and_width_order():
    """Wilson (1927): the interval for n - k failures mirrors the one for k successes, and a
    higher confidence gives a wider interval."""
    for k, n in GRID:
        low, high = wilson_interval(k, n)
        mirror_low, mirror_high = wilson_interval(n - k, n)
        assert low == pytest.approx(1.0 - mirror_high, abs=1e-15)
        assert high == pytest.approx(1.0 - mirror_low, abs=1e-15)
        widths = [np.subtract(*wilson_interval(k, n, c)[::-1]) for c in LEVELS]
        assert np.all(np.diff(widths) > 0)


def test_wilson_small_proportion_keeps_relative_accuracy():
    """Closed form for k = 1 (the smaller root of Wilson's quadratic, hand algebra):
    low = 2 / (n (2 + z^2 + z sqrt(z^2 + 4 (n - 1) / n))) with z = 1.959963984540054 (the 97.5%
    normal quantile); the lower bound must keep its relative accuracy at huge n."""
    z = 1.959963984540054
    for n in (10**6, 10**12):
        want = 2.0 / (n * (2.0 + z * z + z * np.sqrt(z * z + 4.0 * (n - 1) / n)))
        assert wilson_interval(1, n)[0] == pytest.approx(want, rel=1e-13)


@pytest.mark.parametrize("args, error", [
    ((3, 2), ValueError), ((-1, 5), ValueError), ((1, -1), ValueError), ((2.5, 5), TypeError),
    ((1, 5, 1.0), ValueError), ((1, 5, 0.0), ValueError), ((1, 5, float("nan")), ValueError),
])
def test_wilson_rejects_bad_input(args, error):
    """Common practice, no published source: bad counts and levels are named errors."""
    with pytest.raises(error):
        wilson_interval(*args)


@pytest.mark.parametrize("n_audit, accuracy, seed", [(60, 0.8, 2026), (30, 0.95, 2027)])
def test_wilson_covers_the_pool_accuracy(n_audit, accuracy, seed):
    """The audit's acceptance wording: a 95% Wilson interval from N uniformly drawn items (without
    replacement, seeded) covers the pool's accuracy in at least 90 of 100 repetitions. The pool
    is a fixed seeded Bernoulli(accuracy) array of 5,000 outcomes; its mean is the truth."""
    rng = np.random.default_rng(seed)
    pool = rng.random(5000) < accuracy
    truth = pool.mean()
    # 100 seeded uniform samples without replacement: the first N of 100 random permutations.
    draws = np.argsort(rng.random((100, pool.size)), axis=1)[:, :n_audit]
    successes = pool[draws].sum(axis=1)
    covered = sum(low <= truth <= high
                  for low, high in (wilson_interval(int(k), n_audit) for k in successes))
    assert covered >= 90, covered


# --- audit summary and flag ------------------------------------------------------------------

def test_summary_figures_and_json():
    """Hand computation: 7 right of 10, Wilson interval as wilson_interval(7, 10); expected
    accuracy the mean of the model's own probabilities, (0.9*5 + 0.7*5) / 10 = 0.8."""
    correct = np.array([True] * 7 + [False] * 3)
    expected = np.array([0.9] * 5 + [0.7] * 5)
    summary = summarise_audit(correct, expected)
    assert (summary.n, summary.accuracy) == (10, 0.7)
    assert (summary.low, summary.high) == wilson_interval(7, 10)
    assert summary.expected == pytest.approx(0.8, abs=1e-15)
    as_dict = summary.to_dict()
    assert set(as_dict) == {"n", "accuracy", "low", "high", "expected"}
    assert json.loads(json.dumps(as_dict)) == as_dict
    assert all(type(as_dict[key]) is float for key in ("accuracy", "low", "high", "expected"))
    assert summarise_audit(correct, confidence=0.9).to_dict()["expected"] is None
    assert summarise_audit(correct, confidence=0.9).low == wilson_interval(7, 10, 0.9)[0]


def test_summary_of_nothing():
    """Common practice: no items, no accuracy; the interval is the whole unit interval."""
    assert summarise_audit([], []).to_dict() == {"n": 0, "accuracy": None, "low": 0.0,
                                                 "high": 1.0, "expected": None}


def test_summary_rejects_mismatched_or_out_of_range_input():
    """Common practice, no published source."""
    with pytest.raises(ValueError, match="items"):
        summarise_audit([True, False], [0.5])
    with pytest.raises(ValueError, match=r"\[0, 1\]"):
        summarise_audit([True], [1.5])
    with pytest.raises(ValueError, match="booleans"):
        summarise_audit([2, 0])


@pytest.mark.parametrize("k, expected, flag", [
    (40, 0.95, OVER_CONFIDENT),   # 40/60: Wilson 95% (0.540, 0.775); 0.95 above
    (40, 0.70, None),             # inside
    (40, 0.45, UNDER_CONFIDENT),  # below
    (60, 0.999, None),            # 60/60: high is exactly 1, nothing can lie above it
    (0, 0.01, None),              # 0/60: low is exactly 0, nothing can lie below it
])
def test_flag_compares_expected_with_the_interval(k, expected, flag):
    """Over-confident when the mean expected accuracy exceeds the Wilson upper bound,
    under-confident below the lower bound (common practice, no published source); the bounds of
    40/60 are from statsmodels' proportion_confint(40, 60, method="wilson") = (0.5402, 0.7746)."""
    correct = np.arange(60) < k
    summary = summarise_audit(correct, np.full(60, expected))
    assert calibration_flag(summary) == flag


def test_flag_at_the_bounds_and_without_expectation():
    """Common practice: a value on a bound is inside the interval; no expectation, no flag."""
    low, high = wilson_interval(40, 60)
    assert calibration_flag(AuditSummary(60, 40 / 60, low, high, high)) is None
    assert calibration_flag(AuditSummary(60, 40 / 60, low, high, low)) is None
    assert calibration_flag(AuditSummary(60, 40 / 60, low, high, None)) is None
    assert calibration_flag(summarise_audit([], [])) is None


# --- reliability table and ECE ---------------------------------------------------------------

def test_ece_hand_worked_example():
    """Guo et al. (2017) eq. 3, ECE = sum_b (n_b / N) |acc_b - conf_b|, worked by hand with
    M = 5 bins (0, 0.2], (0.2, 0.4], (0.4, 0.6], (0.6, 0.8], (0.8, 1] (right-closed, Guo et al.
    sec. 2), N = 10 items:

        bin (0.4, 0.6]: conf 0.5, 0.6 (0.6 is on the edge: this bin); right T, F
                        n = 2, conf = 0.55, acc = 1/2 = 0.5,  |gap| = 0.05
        bin (0.6, 0.8]: conf 0.7, 0.7, 0.8, 0.8; right T, T, T, F
                        n = 4, conf = 0.75, acc = 3/4 = 0.75, |gap| = 0
        bin (0.8, 1.0]: conf 0.9, 0.9, 1.0, 1.0; right T, F, T, F
                        n = 4, conf = 0.95, acc = 2/4 = 0.5,  |gap| = 0.45
        bins (0, 0.2] and (0.2, 0.4] are empty and skipped.

        ECE = (2 * 0.05 + 4 * 0 + 4 * 0.45) / 10 = (0.1 + 0 + 1.8) / 10 = 0.19

    (Left-closed bins would move 0.6 up and 0.8 up a bin and give (0.5 + 0 + 2.4) / 10 = 0.29.)
    """
    confidence = [0.5, 0.6, 0.7, 0.7, 0.8, 0.8, 0.9, 0.9, 1.0, 1.0]
    correct = [True, False, True, True, True, False, True, False, True, False]
    assert expected_calibration_error(confidence, correct, n_bins=5) == pytest.approx(0.19,
                                                                                      abs=1e-12)
    bins = reliability_table(confidence, correct, n_bins=5)
    assert [b.count for b in bins] == [0, 0, 2, 4, 4]
    assert [b.mean_confidence for b in bins[:2]] == [None, None]
    assert [b.observed_frequency for b in bins[:2]] == [None, None]
    assert [b.mean_confidence for b in bins[2:]] == pytest.approx([0.55, 0.75, 0.95])
    assert [b.observed_frequency for b in bins[2:]] == pytest.approx([0.5, 0.75, 0.5])


def test_table_edges_zero_one_and_on_an_edge():
    """Guo et al. (2017) sec. 2: bins ((m-1)/M, m/M]; we add 0 to the first bin. Hand placement
    with M = 10: 0.0 and 0.1 in bin 1, 0.3 in bin 3 (its right edge), nextafter(0.3, 1) in bin
    4, 0.95 in bin 10 and 1.0 in bin 10."""
    confidence = [0.0, 0.1, 0.3, np.nextafter(0.3, 1.0), 0.95, 1.0]
    bins = reliability_table(confidence, [True] * 6)
    assert [b.count for b in bins] == [2, 0, 1, 1, 0, 0, 0, 0, 0, 2]
    assert bins[0].low == 0.0 and bins[-1].high == 1.0
    assert [b.high for b in bins[:-1]] == [b.low for b in bins[1:]]
    assert [b.low for b in bins] == [m / 10 for m in range(10)]
    assert bins[0].mean_confidence == 0.05 and bins[-1].mean_confidence == 0.975
    one = reliability_table([1.0, 0.0], [True, False], n_bins=1)
    assert (one[0].low, one[0].high, one[0].count) == (0.0, 1.0, 2)


@pytest.mark.parametrize("n_bins", [1, 5, 10, 15, 20])
def test_table_against_scikit_learn(n_bins):
    """scikit-learn's calibration_curve(correct, confidence, n_bins, strategy="uniform") returns
    each non-empty bin's observed frequency and mean confidence (its bins are right-closed
    too); ECE against a slow per-bin loop of Guo et al. (2017) eq. 3."""
    from sklearn.calibration import calibration_curve

    rng = np.random.default_rng(7)
    confidence = rng.uniform(0.3, 1.0, 500)
    correct = rng.random(500) < confidence ** 2
    bins = reliability_table(confidence, correct, n_bins)
    full = [b for b in bins if b.count]
    observed, predicted = calibration_curve(correct.astype(int), confidence, n_bins=n_bins,
                                            strategy="uniform")
    np.testing.assert_allclose([b.observed_frequency for b in full], observed, rtol=1e-12)
    np.testing.assert_allclose([b.mean_confidence for b in full], predicted, rtol=1e-12)
    assert sum(b.count for b in bins) == 500

    ece = 0.0
    for b in full:
        inside = (confidence > b.low) & (confidence <= b.high)
        ece += inside.sum() / 500 * abs(correct[inside].mean() - confidence[inside].mean())
    assert expected_calibration_error(confidence, correct, n_bins) == pytest.approx(ece,
                                                                                    rel=1e-12)


def test_top_label_binary_and_multiclass():
    """Guo et al. (2017) sec. 2: confidence is the largest class probability, correct whether
    its class is the true one (hand values; a tie takes the first class)."""
    confidence, correct = top_label([[0.2, 0.8], [0.6, 0.4], [0.5, 0.5]], [1, 1, 0])
    np.testing.assert_array_equal(confidence, [0.8, 0.6, 0.5])
    np.testing.assert_array_equal(correct, [True, False, True])
    confidence, correct = top_label([[0.1, 0.7, 0.2], [0.3, 0.3, 0.4]], [1, 0])
    np.testing.assert_array_equal(confidence, [0.7, 0.4])
    np.testing.assert_array_equal(correct, [True, False])


def test_ece_and_table_reject_bad_input():
    """Common practice, no published source."""
    with pytest.raises(ValueError, match="at least one item"):
        expected_calibration_error([], [])
    with pytest.raises(ValueError, match=r"\[0, 1\]"):
        reliability_table([0.5, np.nan], [True, True])
    with pytest.raises(ValueError, match="items"):
        reliability_table([0.5], [True, False])
    with pytest.raises(ValueError, match="n_bins"):
        reliability_table([0.5], [True], n_bins=0)
    assert bins_ece(reliability_table([], [])) is None


# --- text chart ------------------------------------------------------------------------------

HAND_BINS = reliability_table([0.5, 0.6, 0.7, 0.7, 0.8, 0.8, 0.9, 0.9, 1.0, 1.0],
                              [True, False, True, True, True, False, True, False, True, False],
                              n_bins=5)


@pytest.mark.parametrize("width", [MIN_RENDER_WIDTH, 64, 72, 80])
def test_render_fits_the_width_without_colour(width):
    """Common practice, no published source: terminal output within the width, no colour codes."""
    for bins in (HAND_BINS, reliability_table(np.linspace(0, 1, 301), np.ones(301, bool), 15)):
        text = render_reliability(bins, width)
        assert all(len(line) <= width for line in text.splitlines())
        assert "\x1b" not in text


def test_render_content_of_the_hand_example():
    """The hand-worked example above (ECE 0.19) drawn on a 40-cell scale: bar length
    round(observed * 40), marker at round(predicted * 40)."""
    text = render_reliability(HAND_BINS)
    lines = text.splitlines()
    assert lines[0] == "Reliability: 10 items in 3 of 5 confidence bins"
    assert lines[1].split()[:4] == ["confidence", "items", "predicted", "observed"]
    rows = lines[2:5]
    assert [row.split()[:4] for row in rows] == [
        ["(0.40,0.60]", "2", "0.550", "0.500"],
        ["(0.60,0.80]", "4", "0.750", "0.750"],
        ["(0.80,1.00]", "4", "0.950", "0.500"],
    ]
    scale_start = lines[1].index("0 ")
    drawings = [row[scale_start:] for row in rows]
    # observed 0.5 -> '#' in cells 0-19, predicted 0.55 -> '|' in cell 22: cells 20-21 empty
    assert drawings[0] == "#" * 20 + "  |"
    # observed = predicted = 0.75 -> '#' in cells 0-29, '|' in cell 30, right after them
    assert drawings[1] == "#" * 30 + "|"
    # observed 0.5 -> cells 0-19, predicted 0.95 -> '|' in cell 38: cells 20-37 empty
    assert drawings[2] == "#" * 20 + " " * 18 + "|"
    assert lines[-1] == "expected calibration error (ECE): 0.190"
    assert "#" in lines[-2] and "|" in lines[-2]


def test_render_first_bin_is_closed_and_empty_table():
    """Guo et al. (2017) bins with 0 added to the first: shown as [0.00,0.10]."""
    text = render_reliability(reliability_table([0.0, 0.05], [False, True]))
    assert text.splitlines()[2].startswith("[0.00,0.10]")
    assert render_reliability(reliability_table([], [])).splitlines()[-1] == "(no items)"
    with pytest.raises(ValueError, match="width"):
        render_reliability(HAND_BINS, width=MIN_RENDER_WIDTH - 1)


# --- PNG -------------------------------------------------------------------------------------

def test_png_size_and_content(tmp_path):
    """PNG signature from the PNG specification (ISO/IEC 15948, sec. 5.2); pixel size as set
    (PNG_SIZE at the figure's dpi) and the curve colour present among many colours (common
    practice, no published source)."""
    pytest.importorskip("matplotlib")
    from matplotlib.image import imread

    path = tmp_path / "reliability.png"
    rng = np.random.default_rng(3)
    confidence = rng.uniform(0.4, 1.0, 200)
    write_reliability_png(reliability_table(confidence, rng.random(200) < confidence), path,
                          title="Audit")
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    pixels = np.rint(imread(path)[..., :3] * 255).astype(int)
    assert pixels.shape[:2] == (PNG_SIZE[1], PNG_SIZE[0]) == (720, 640)
    colours = {tuple(p) for p in pixels.reshape(-1, 3)}
    assert len(colours) > 20
    curve = tuple(int(CURVE_COLOUR[i:i + 2], 16) for i in (1, 3, 5))
    assert np.all(pixels == curve, axis=-1).sum() > 100


def test_png_of_an_empty_table(tmp_path):
    """Common practice, no published source: nothing audited still draws the axes."""
    pytest.importorskip("matplotlib")
    path = tmp_path / "empty.png"
    write_reliability_png(reliability_table([], []), path)
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_png_without_matplotlib(tmp_path, monkeypatch):
    """Common practice, no published source: a missing optional extra is a one-line user error
    (as labelq.review.write_png)."""
    for name in [m for m in sys.modules if m == "matplotlib" or m.startswith("matplotlib.")]:
        monkeypatch.setitem(sys.modules, name, None)
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(PlotUnavailableError, match=r"pip install 'labelq\[plot\]'"):
        write_reliability_png(HAND_BINS, tmp_path / "x.png")
    assert not (tmp_path / "x.png").exists()
