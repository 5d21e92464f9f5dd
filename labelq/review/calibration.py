"""Audit figures: how often the model's predictions were right on a random sample, and whether
its own probabilities said as much.

An audit labels a seeded, uniformly random sample of unlabelled candidates; each label is scored
against the prediction the model made before it saw that label (test, then train). This module
turns those outcomes into a Wilson interval for the accuracy, a reliability table, the expected
calibration error, an over/under-confidence flag, a plain-text chart and a PNG reliability
diagram. Pure NumPy; it knows nothing of the store.

Sources: E. B. Wilson (1927), "Probable inference, the law of succession, and statistical
inference", JASA 22(158), 209-212; C. Guo, G. Pleiss, Y. Sun and K. Q. Weinberger (2017), "On
calibration of modern neural networks", ICML, sec. 2; M. P. Naeini, G. F. Cooper and
M. Hauskrecht (2015), "Obtaining well calibrated probabilities using Bayesian binning", AAAI.
"""

import math
from dataclasses import dataclass
from operator import index
from statistics import NormalDist
from typing import List, Optional, Sequence, Tuple

import numpy as np

from labelq.review.png import _save, agg_figure

OVER_CONFIDENT = "over-confident"
UNDER_CONFIDENT = "under-confident"

PNG_SIZE = (640, 720)
"""Pixel width and height of :func:`write_reliability_png`'s image."""

CURVE_COLOUR = "#1f5fa8"
"""Colour of the reliability curve in :func:`write_reliability_png`."""

MIN_RENDER_WIDTH = 56
"""Narrowest :func:`render_reliability` output: the table's columns and a scale of 14 cells."""


def wilson_interval(successes, n, confidence: float = 0.95) -> Tuple[float, float]:
    """Wilson (1927) score interval for a binomial proportion, without continuity correction.

    The bounds are the roots in p of ``(k/n - p)^2 = z^2 p (1 - p) / n``, i.e. of
    ``(n + z^2) p^2 - (2k + z^2) p + k^2/n = 0`` with ``z`` the two-sided normal quantile for
    ``confidence``. The larger root is formed with the sign that adds (no cancellation) and the
    smaller from the product of the roots, ``k^2 / (n (n + z^2))`` (Vieta; the stable quadratic
    formula); the upper bound is one minus the lower bound of the failures, as the interval is
    symmetric under k -> n - k. So k = 0 gives a lower bound of exactly 0 and k = n an upper
    bound of exactly 1.

    Parameters
    ----------
    successes, n : int, 0 <= successes <= n
    confidence : float in (0, 1), the nominal coverage

    Returns
    -------
    (low, high) : floats in [0, 1]; (0.0, 1.0) when n == 0 (nothing observed).
    """
    try:
        k, n = index(successes), index(n)
    except TypeError:
        raise TypeError(f"wilson_interval needs integer counts, got {successes!r} of {n!r}"
                        ) from None
    if n < 0 or not 0 <= k <= n:
        raise ValueError(f"wilson_interval needs 0 <= successes <= n, got {k} of {n}")
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must be strictly between 0 and 1, got {confidence!r}")
    if n == 0:
        return 0.0, 1.0
    z = NormalDist().inv_cdf(0.5 + confidence / 2.0)
    return _wilson_low(k, n, z), 1.0 - _wilson_low(n - k, n, z)


def _wilson_low(k: int, n: int, z: float) -> float:
    """Smaller root of Wilson's quadratic (see :func:`wilson_interval`) for k successes of n."""
    z2 = z * z
    spread = k * (n - k) / n
    upper = (2.0 * k + z2 + z * math.sqrt(z2 + 4.0 * spread)) / (2.0 * (n + z2))
    return k * k / n / ((n + z2) * upper)


@dataclass(frozen=True)
class AuditSummary:
    """Accuracy of the model's pre-label predictions on an audit sample.

    ``accuracy`` is None when nothing was audited (then ``low``, ``high`` = 0, 1, as
    :func:`wilson_interval`); ``expected`` is the mean of the model's own probability of being
    right, None when not given or nothing was audited.
    """

    n: int
    accuracy: Optional[float]
    low: float
    high: float
    expected: Optional[float]

    def to_dict(self) -> dict:
        """JSON-ready: keys n, accuracy, low, high, expected (floats, None where undefined)."""
        return {"n": self.n, "accuracy": self.accuracy, "low": self.low, "high": self.high,
                "expected": self.expected}


def summarise_audit(correct, expected=None, confidence: float = 0.95) -> AuditSummary:
    """Accuracy, its Wilson interval and the model's expected accuracy over an audit.

    Parameters
    ----------
    correct : array-like of bool, shape (n_items,), whether each pre-label prediction was right
    expected : array-like of float in [0, 1], shape (n_items,), optional: the model's probability
        of being right for each item (its largest class probability before the label)
    confidence : float in (0, 1), the interval's nominal coverage
    """
    correct = _outcomes(correct)
    n = int(correct.size)
    k = int(np.count_nonzero(correct))
    low, high = wilson_interval(k, n, confidence)
    mean_expected = None
    if expected is not None:
        expected = _probabilities(expected, "expected")
        if expected.shape != correct.shape:
            raise ValueError(f"expected has {expected.size} items but correct has {n}")
        mean_expected = float(expected.mean()) if n else None
    return AuditSummary(n=n, accuracy=k / n if n else None, low=low, high=high,
                        expected=mean_expected)


def calibration_flag(summary: AuditSummary) -> Optional[str]:
    """``"over-confident"`` when the model's mean expected accuracy lies above the upper Wilson
    bound of the measured accuracy, ``"under-confident"`` when below the lower bound, else None
    (also when there is no expected accuracy or nothing was audited).

    Common practice, no published source: a plain comparison, not a formal test. It errs on the
    side of silence: under perfect calibration the number right is a sum of independent
    Bernoulli(p_i), whose variance sum p_i (1 - p_i) is at most n pbar (1 - pbar) (Jensen's
    inequality), that of the binomial the interval assumes.
    """
    if summary.expected is None or summary.n == 0:
        return None
    if summary.expected > summary.high:
        return OVER_CONFIDENT
    if summary.expected < summary.low:
        return UNDER_CONFIDENT
    return None


@dataclass(frozen=True)
class ReliabilityBin:
    """One confidence bin of a reliability table: the interval (low, high] (the first bin also
    holds 0), its item count, mean predicted confidence and observed frequency of correct
    predictions (both None when the bin is empty)."""

    low: float
    high: float
    count: int
    mean_confidence: Optional[float]
    observed_frequency: Optional[float]


def top_label(proba, labels) -> Tuple[np.ndarray, np.ndarray]:
    """Top-label confidence and correctness from class probabilities.

    ``proba`` is (n_items, n_classes), ``labels`` (n_items,) the true class indices (columns of
    ``proba``). Returns (confidence, correct): each item's largest class probability and whether
    that class (the first one on a tie) is the true one (Guo et al. 2017, sec. 2). Binary models
    are the two-column case.
    """
    proba = np.asarray(proba, dtype=np.float64)
    labels = np.asarray(labels)
    if proba.ndim != 2 or labels.shape != (proba.shape[0],):
        raise ValueError(f"top_label needs proba (n, C) and labels (n,), got {proba.shape} "
                         f"and {labels.shape}")
    predicted = proba.argmax(axis=1)
    return proba[np.arange(proba.shape[0]), predicted], predicted == labels


def reliability_table(confidence, correct, n_bins: int = 10) -> List[ReliabilityBin]:
    """Equal-width reliability table on [0, 1] (Guo et al. 2017, sec. 2).

    Bin m (m = 1..n_bins) holds the confidences in ((m - 1)/M, m/M], Guo et al.'s right-closed
    intervals; the first bin also holds 0. Edges are the floats m/M, so a confidence equal to an
    edge falls in the bin below it.

    Parameters
    ----------
    confidence : array-like of float in [0, 1], shape (n_items,): predicted probability of the
        predicted class (top-label; see :func:`top_label`)
    correct : array-like of bool, shape (n_items,): whether that prediction was right
    n_bins : int >= 1

    Returns
    -------
    list of n_bins :class:`ReliabilityBin`, lowest first, empty bins included.
    """
    confidence = _probabilities(confidence, "confidence")
    correct = _outcomes(correct)
    if confidence.shape != correct.shape:
        raise ValueError(f"confidence has {confidence.size} items but correct has {correct.size}")
    if index(n_bins) < 1:
        raise ValueError(f"n_bins must be at least 1, got {n_bins}")
    edges = np.arange(n_bins + 1, dtype=np.float64) / n_bins
    # side="left": edges[m-1] < c <= edges[m] -> bin m-1; c == 0 gives -1, clipped into bin 0.
    which = np.clip(np.searchsorted(edges, confidence, side="left") - 1, 0, n_bins - 1)
    count = np.bincount(which, minlength=n_bins)
    conf_sum = np.bincount(which, weights=confidence, minlength=n_bins)
    right_sum = np.bincount(which, weights=correct.astype(np.float64), minlength=n_bins)
    return [
        ReliabilityBin(
            low=float(edges[m]), high=float(edges[m + 1]), count=int(count[m]),
            mean_confidence=float(conf_sum[m] / count[m]) if count[m] else None,
            observed_frequency=float(right_sum[m] / count[m]) if count[m] else None,
        )
        for m in range(n_bins)
    ]


def expected_calibration_error(confidence, correct, n_bins: int = 10) -> float:
    """ECE = sum_b (n_b / N) |acc_b - conf_b| over the non-empty bins of
    :func:`reliability_table` (Guo et al. 2017, eq. 3; Naeini et al. 2015).

    Raises ValueError when there are no items (the weights n_b / N are undefined).
    """
    ece = bins_ece(reliability_table(confidence, correct, n_bins))
    if ece is None:
        raise ValueError("expected_calibration_error needs at least one item, got none")
    return ece


def bins_ece(bins: Sequence[ReliabilityBin]) -> Optional[float]:
    """The expected calibration error of a reliability table (see
    :func:`expected_calibration_error`); None when every bin is empty."""
    full = [b for b in bins if b.count]
    total = sum(b.count for b in full)
    if not total:
        return None
    return float(sum(b.count * abs(b.observed_frequency - b.mean_confidence) for b in full)
                 / total)


def render_reliability(bins: Sequence[ReliabilityBin], width: int = 80) -> str:
    """A reliability table as plain text, every line at most ``width`` characters, no colour.

    One row per non-empty bin: its interval, items, mean predicted confidence, observed
    frequency, and a scale from 0 to 1 on which ``#`` fills up to the observed frequency and
    ``|`` marks the mean predicted confidence. A well-calibrated bin's bar ends just before its
    ``|``; a gap before the ``|`` means over-confident, a bar running past it under-confident.
    Then a key and the expected calibration error.

    Parameters
    ----------
    bins : sequence of :class:`ReliabilityBin` (as :func:`reliability_table` returns)
    width : int, 56..80 characters per line; the scale takes what is left, at most 40 cells
    """
    if not MIN_RENDER_WIDTH <= width <= 80:
        raise ValueError(f"width must be between {MIN_RENDER_WIDTH} and 80 characters, "
                         f"got {width}")
    full = [b for b in bins if b.count]
    total = sum(b.count for b in full)
    items = "item" if total == 1 else "items"
    lines = [f"Reliability: {total} {items} in {len(full)} of {len(bins)} confidence bins"[:width]]
    if not full:
        return "\n".join(lines + ["(no items)"]) + "\n"
    decimals = 2 if all(round(e, 2) == e for b in bins for e in (b.low, b.high)) else 3
    columns = 2 * decimals + 35  # interval, items, predicted, observed and a gap of 2
    scale = min(40, width - columns - 1)  # columns 0..scale: the last one is 1.0

    def row(interval, items, predicted, observed, drawing):
        return (f"{interval:<{2 * decimals + 8}}{items:>6}{predicted:>10}{observed:>9}  "
                f"{drawing}").rstrip()

    axis = [" "] * (scale + 1)
    for value, text in ((0.0, "0"), (0.5, "0.5"), (1.0, "1")):
        start = max(min(round(value * scale) - len(text) // 2, scale + 1 - len(text)), 0)
        axis[start:start + len(text)] = text
    lines.append(row("confidence", "items", "predicted", "observed", "".join(axis)))
    for i, b in enumerate(bins):
        if not b.count:
            continue
        interval = f"{'[' if i == 0 else '('}{b.low:.{decimals}f},{b.high:.{decimals}f}]"
        cells = (["#"] * round(b.observed_frequency * scale) + [" "] * (scale + 1))[:scale + 1]
        cells[round(b.mean_confidence * scale)] = "|"
        lines.append(row(interval, b.count, f"{b.mean_confidence:.3f}",
                         f"{b.observed_frequency:.3f}", "".join(cells)))
    lines.append("# observed frequency   | mean predicted confidence")
    lines.append(f"expected calibration error (ECE): {bins_ece(bins):.3f}")
    return "\n".join(lines) + "\n"


def write_reliability_png(bins: Sequence[ReliabilityBin], path, title: Optional[str] = None
                          ) -> None:
    """Write a reliability diagram of ``bins`` to a PNG file of :data:`PNG_SIZE` pixels.

    Top panel: the diagonal of perfect calibration, one bar per non-empty bin spanning the bin
    with the observed frequency as its height, and a point at (mean confidence, observed
    frequency) whose area grows with the bin's count, annotated with that count; the expected
    calibration error as the legend's title (placed where it hides least). Bottom panel: items
    per bin on the same confidence axis. Needs matplotlib (the ``[plot]`` extra); raises
    PlotUnavailableError without it.
    """
    fig = agg_figure(*PNG_SIZE)
    from matplotlib.ticker import MaxNLocator

    top, bottom = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3, 1]})
    full = [b for b in bins if b.count]
    lows = np.array([b.low for b in full])
    spans = np.array([b.high - b.low for b in full])
    counts = np.array([b.count for b in full])
    conf = np.array([b.mean_confidence for b in full])
    observed = np.array([b.observed_frequency for b in full])

    top.plot([0, 1], [0, 1], linestyle="--", color="#7a7a7a", linewidth=1.0,
             label="perfect calibration")
    if full:
        top.bar(lows, observed, width=spans, align="edge", color="#cfdcec", edgecolor="#8aa5c8",
                linewidth=0.8, label="observed frequency per bin")
        sizes = 20.0 + 180.0 * np.sqrt(counts / counts.max())
        top.plot(conf, observed, color=CURVE_COLOUR, linewidth=1.6, zorder=3)
        top.scatter(conf, observed, s=sizes, color=CURVE_COLOUR, zorder=4,
                    label="mean confidence, area ~ items")
        for x, y, c in zip(conf, observed, counts):
            top.annotate(str(c), (x, y), textcoords="offset points", xytext=(6, -12), fontsize=8)
        bottom.bar(lows, counts, width=spans, align="edge", color="#9fb3c8", edgecolor="#5f7892",
                   linewidth=0.8)
    top.set_xlim(0.0, 1.0)
    top.set_ylim(0.0, 1.05)
    top.set_ylabel("observed frequency")
    top.set_title(title or "Reliability diagram")
    top.grid(True, alpha=0.3)
    summary = f"ECE {bins_ece(bins):.3f}, {counts.sum()} items" if full else "no items"
    top.legend(loc="best", title=summary, title_fontsize=9, fontsize=8, framealpha=0.9)
    bottom.set_ylim(0.0, 1.1 * max(counts.max(initial=0), 1))
    bottom.yaxis.set_major_locator(MaxNLocator(integer=True))
    bottom.set_xlabel("predicted confidence")
    bottom.set_ylabel("items")
    bottom.grid(True, axis="y", alpha=0.3)
    fig.tight_layout()
    _save(fig, path)


def _probabilities(values, name: str) -> np.ndarray:
    """``values`` as a 1-D float64 array of finite numbers in [0, 1]."""
    values = np.asarray(values, dtype=np.float64)
    if values.ndim != 1:
        raise ValueError(f"{name} must be 1-D, got shape {values.shape}")
    bad = ~((values >= 0.0) & (values <= 1.0))  # also catches NaN
    if bad.any():
        raise ValueError(f"{name} must lie in [0, 1], got {values[bad][0]!r}")
    return values


def _outcomes(values) -> np.ndarray:
    """``values`` as a 1-D bool array; only booleans or 0/1 are accepted."""
    values = np.asarray(values)
    if values.ndim != 1:
        raise ValueError(f"correct must be 1-D, got shape {values.shape}")
    if values.dtype != bool:
        if values.size and not np.isin(values, (0, 1)).all():
            raise ValueError("correct must hold booleans (or 0/1)")
        values = values.astype(bool)
    return values
