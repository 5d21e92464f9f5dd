"""Tests for the invented orchard demo: reproducible, plausible, readable and learnable."""

import collections
import csv

import numpy as np
import pytest

from labelq.demo import FEATURES, GRADES, generate, write_demo_files
from labelq.ingest import read_candidates


@pytest.fixture(scope="module")
def orchard():
    return generate()


def test_same_seed_same_apples_other_seed_other_apples(orchard):
    rows, truth = orchard
    assert generate() == (rows, truth)
    other_rows, _ = generate(seed=7)
    assert other_rows != rows


def test_keys_metadata_and_ranges(orchard):
    rows, truth = orchard
    assert len(rows) == 3000 and list(truth) == [row["key"] for row in rows]
    assert rows[0]["key"] == "A00001" and rows[-1]["key"] == "A03000"
    assert all(row["bin"].startswith("B-") and len(row["bin"]) == 5 for row in rows)
    assert {row["picked_on"] for row in rows} <= {f"2026-09-{day}" for day in range(21, 28)}
    ranges = {
        "firmness_kgf": (4, 10),
        "sugar_brix": (9, 16),
        "hue_deg": (0, 120),
        "diameter_mm": (55, 95),
        "blemish_pct": (0, 30),
        "starch_index": (1, 9),
    }
    for name, (low, high) in ranges.items():
        values = [row[name] for row in rows]
        assert low <= min(values) and max(values) <= high, name


def test_mass_grows_like_diameter_cubed(orchard):
    rows, _ = orchard
    diameter = np.array([row["diameter_mm"] for row in rows])
    mass = np.array([row["mass_g"] for row in rows])
    slope = np.polyfit(np.log(diameter), np.log(mass), 1)[0]
    assert 2.7 < slope < 3.3


def test_class_shares_near_45_35_20(orchard):
    _, truth = orchard
    counts = collections.Counter(truth.values())
    shares = {grade: counts[grade] / len(truth) for grade in GRADES}
    assert 0.40 < shares["export"] < 0.50
    assert 0.30 < shares["local"] < 0.40
    assert 0.15 < shares["juice"] < 0.25


def test_files_read_back_with_seven_features_and_two_metadata_columns(tmp_path, orchard):
    rows, truth = orchard
    candidates_path, truth_path = write_demo_files(tmp_path / "demo")
    table = read_candidates(candidates_path, "key")
    assert table.feature_names == list(FEATURES)
    assert table.meta_columns == ["bin", "picked_on"]
    assert table.keys == [row["key"] for row in rows]
    np.testing.assert_array_equal(table.X, [[row[name] for name in FEATURES] for row in rows])
    with open(truth_path, newline="", encoding="utf-8") as handle:
        assert {row["key"]: row["grade"] for row in csv.DictReader(handle)} == truth


def test_invented_grades_are_learnable(orchard):
    # Sanity check of invented data only: a standard RBF support-vector classifier on
    # standardised features (scikit-learn) must beat 0.8 on held-out apples, so the demo gives
    # an active learner something to learn. The 4% random grades cap accuracy near 0.96.
    pipeline = pytest.importorskip("sklearn.pipeline")
    preprocessing = pytest.importorskip("sklearn.preprocessing")
    svm = pytest.importorskip("sklearn.svm")
    rows, truth = orchard
    X = np.array([[row[name] for name in FEATURES] for row in rows])
    y = np.array([truth[row["key"]] for row in rows])
    model = pipeline.make_pipeline(preprocessing.StandardScaler(), svm.SVC(C=10.0))
    model.fit(X[:2000], y[:2000])
    assert model.score(X[2000:], y[2000:]) > 0.8
