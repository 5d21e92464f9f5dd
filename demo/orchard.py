"""The orchard demo: an invented apple-grading scenario with a hidden true grade.

A fruit-growers' cooperative grades apples off a sorting-line sensor into ``export``, ``local``
and ``juice``. Every number here - the ranges, the correlations, the grading rule, the label
noise, the bins and the picking week - is invented for the demo; none describes a real orchard,
sensor or grading standard.

The hidden grade is a smooth nonlinear score of the sensor readings (size best near 76 mm, red
hue preferred, firmer and sweeter fruit better, blemishes worse) cut at two fixed thresholds,
with about 4% of grades then replaced at random by another grade (grader disagreement). With
the default seed the shares come out near 45% export, 35% local and 20% juice.
"""

from __future__ import annotations

import csv
import datetime
import os
from pathlib import Path

import numpy as np

__all__ = ["FEATURES", "GRADES", "generate", "write_demo_files"]

GRADES = ("export", "local", "juice")
FEATURES = (
    "firmness_kgf",
    "sugar_brix",
    "hue_deg",
    "diameter_mm",
    "mass_g",
    "blemish_pct",
    "starch_index",
)
DEFAULT_SEED = 20261201
LABEL_NOISE = 0.04
_EXPORT_ABOVE = -0.41
_JUICE_BELOW = -1.38
_FIRST_PICKING_DAY = datetime.date(2026, 9, 21)
_N_BINS = 60


def generate(n: int = 3000, seed: int = DEFAULT_SEED) -> tuple[list[dict], dict[str, str]]:
    """Invent ``n`` apples and their hidden grades, reproducibly from ``seed``.

    Returns ``(rows, truth)``: each row a dict with ``key`` ("A00001", ...), ``bin``,
    ``picked_on`` (ISO date) and the rounded :data:`FEATURES`; ``truth`` maps key -> grade.
    """
    if n < 1:
        raise ValueError(f"n must be at least 1, got {n}")
    rng = np.random.default_rng(seed)
    readings = _readings(rng, n)
    grades = _grades(rng, readings)
    bins = rng.integers(1, _N_BINS + 1, size=n)
    days = rng.integers(0, 7, size=n)
    rows, truth = [], {}
    for i in range(n):
        key = f"A{i + 1:05d}"
        row = {"key": key, "bin": f"B-{bins[i]:03d}", "picked_on": _picking_day(days[i])}
        row.update({name: readings[name][i].item() for name in FEATURES})
        rows.append(row)
        truth[key] = GRADES[grades[i]]
    return rows, truth


def _readings(rng: np.random.Generator, n: int) -> dict[str, np.ndarray]:
    """Invented sensor readings, rounded as the sorting line would report them."""
    diameter = np.clip(rng.normal(74.0, 7.5, n), 55.0, 95.0)
    mass = 4.6e-4 * diameter**3 * rng.normal(1.0, 0.05, n)
    firmness = np.clip(rng.normal(7.0, 1.1, n), 4.0, 10.0)
    starch = np.clip(5.0 - 0.9 * (firmness - 7.0) + rng.normal(0.0, 1.3, n), 1.0, 9.0)
    sugar = np.clip(12.4 + 0.35 * (starch - 5.0) + rng.normal(0.0, 1.1, n), 9.0, 16.0)
    hue = np.clip(rng.gamma(2.2, 14.0, n), 0.0, 120.0)
    blemish = np.clip(rng.exponential(4.5, n), 0.0, 30.0)
    return {
        "firmness_kgf": firmness.round(1),
        "sugar_brix": sugar.round(1),
        "hue_deg": hue.round(0).astype(int),
        "diameter_mm": diameter.round(1),
        "mass_g": mass.round(1),
        "blemish_pct": blemish.round(1),
        "starch_index": starch.round(1),
    }


def _grades(rng: np.random.Generator, r: dict[str, np.ndarray]) -> np.ndarray:
    """Hidden grade index per apple (into :data:`GRADES`), with ``LABEL_NOISE`` of it random."""
    score = (
        -(((r["diameter_mm"] - 76.0) / 12.0) ** 2)
        - 0.12 * r["blemish_pct"]
        + 0.9 * np.tanh((r["firmness_kgf"] - 6.2) / 1.2)
        + 0.3 * np.tanh((r["sugar_brix"] - 12.0) / 2.0)
        - 0.5 * ((r["hue_deg"] - 20.0) / 45.0) ** 2
    )
    grades = np.where(score > _EXPORT_ABOVE, 0, np.where(score < _JUICE_BELOW, 2, 1))
    noisy = rng.random(len(grades)) < LABEL_NOISE
    shift = rng.integers(1, len(GRADES), size=len(grades))
    return np.where(noisy, (grades + shift) % len(GRADES), grades)


def _picking_day(offset: int) -> str:
    return (_FIRST_PICKING_DAY + datetime.timedelta(days=int(offset))).isoformat()


def write_demo_files(
    directory: str | os.PathLike, n: int = 3000, seed: int = DEFAULT_SEED
) -> tuple[Path, Path]:
    """Write ``orchard.csv`` (key, bin, picked_on, features) and ``orchard_truth.csv`` (key, grade).

    The directory is created if needed. Returns the two paths.
    """
    rows, truth = generate(n, seed)
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    candidates_path = directory / "orchard.csv"
    truth_path = directory / "orchard_truth.csv"
    with open(candidates_path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.DictWriter(handle, fieldnames=["key", "bin", "picked_on", *FEATURES])
        writer.writeheader()
        writer.writerows(rows)
    with open(truth_path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["key", "grade"])
        writer.writerows(truth.items())
    return candidates_path, truth_path
