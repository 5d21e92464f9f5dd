"""`history`, `status` advice, `export model` and `simulate` from the command line.

Data: scikit-learn's bundled breast-cancer rows (conftest); the true classes answer for the
labeller. Contract keys from DESIGN.md.
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest

from labelq.cli.app import app
from labelq.gp import load_model
from labelq.loop.settings import DEFAULT_STRATEGY


def label_head(cli, truth, n):
    for _ in range(n):
        head = cli.json("next", "-n", "1")["queue"][0]["key"]
        assert cli("label", head, truth[head]).exit_code == 0


def test_history_fits_80_columns_without_colour(cancer_store, cancer_csv, monkeypatch):
    """The table and chart stay within 80 columns and carry no escape codes with NO_COLOR."""
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.setenv("COLUMNS", "80")
    label_head(cancer_store, cancer_store.truth(cancer_csv), 5)
    result = cancer_store("history")
    assert result.exit_code == 0, result.output
    lines = result.stdout.splitlines()
    assert len(lines) > 5
    assert all(len(line) <= 80 for line in lines), max(lines, key=len)
    assert "\x1b[" not in result.stdout
    assert "mean entropy" in result.stdout


def test_history_plot_png(cancer_store, cancer_csv, tmp_path):
    label_head(cancer_store, cancer_store.truth(cancer_csv), 3)
    png = tmp_path / "history.png"
    result = cancer_store("history", "--plot", png)
    assert result.exit_code == 0, result.output
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification)


def test_status_flags_thin_classes(cancer_store, cancer_csv):
    label_head(cancer_store, cancer_store.truth(cancer_csv), 3)
    advice = cancer_store.json("status")["advice"]
    assert advice["stop"] is False
    assert advice["flagged_classes"]  # three labels cannot give both classes three each


def test_export_model_is_self_contained_on_raw_values(cancer_store, cancer_csv, tmp_path):
    """`export model` writes JSON (no pickle) that labelq.gp.load_model turns back into the model
    (a grid average while labels are few), taking the raw feature values of the CSV as imported:
    its probabilities reproduce `export predictions` to 1e-6 (the exported figures come from the
    store's mixed-precision pool scoring, within 2e-5 by the README; here far closer)."""
    label_head(cancer_store, cancer_store.truth(cancer_csv), 6)
    out, predictions = tmp_path / "model.json", tmp_path / "pred.csv"
    assert cancer_store("export", "model", "-o", out).exit_code == 0
    assert cancer_store("export", "predictions", "-o", predictions).exit_code == 0
    doc = json.loads(out.read_text())
    model = load_model(out)
    with open(cancer_csv, newline="") as fh:
        rows = list(csv.DictReader(fh))
    names = doc["feature_names"]
    raw = np.array([[float(r[f]) for f in names] for r in rows])
    with open(predictions, newline="") as fh:
        exported = {r["key"]: r for r in csv.DictReader(fh)}
    classes = [str(c) for c in model.classes_]
    expected = np.array([[float(exported[r["key"]][f"p_{c}"]) for c in classes] for r in rows])
    np.testing.assert_allclose(model.predict_proba(raw), expected, rtol=0, atol=1e-6)


def test_export_unknown_kind(cancer_store, user_error):
    user_error(cancer_store("export", "everything"), "everything")


@pytest.mark.slow
@pytest.mark.sqlite_only("simulate reads a CSV and touches no store")
def test_simulate_json_default_beats_random(cli, full_cancer_csv, tmp_path):
    """Replay on scikit-learn's breast-cancer data (all 569 rows), 3 seeds, 40 labels from none:
    the default strategy's area under the learning curve exceeds random labelling's (Lewis & Gale
    1994, "A sequential algorithm for training text classifiers"), and the JSON keeps the
    DESIGN.md contract."""
    png = tmp_path / "curves.png"
    result = cli.runner.invoke(app, ["simulate", str(full_cancer_csv), "--id", "key",
                                     "--truth", "truth", "--budget", "40", "--seeds", "3",
                                     "--json", "--plot", str(png)])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert set(doc["strategies"]) == {DEFAULT_STRATEGY, "random"}
    for s in doc["strategies"].values():
        assert set(s) >= {"labels", "accuracy_mean", "accuracy_sd", "labels_to_95",
                          "labels_to_99", "auc", "auc_se"}
        assert len(s["labels"]) == len(s["accuracy_mean"]) == len(s["accuracy_sd"]) == 40
    assert 0.9 < doc["full_pool_accuracy"] <= 1.0 and doc["reference_rows"] == 569
    assert doc["strategies"][DEFAULT_STRATEGY]["auc"] > doc["strategies"]["random"]["auc"]
    assert png.read_bytes()[:4] == b"\x89PNG"


@pytest.mark.sqlite_only("simulate reads a CSV and touches no store")
def test_simulate_truth_file(cli, cancer_csv, tmp_path, user_error):
    """--truth-file joins the classes by key; a key missing from it is one clear error."""
    rows = list(csv.DictReader(open(cancer_csv)))
    truth = tmp_path / "truth.csv"
    with open(truth, "w", newline="") as fh:
        writer = csv.writer(fh)
        writer.writerow(["key", "grade"])
        writer.writerows((r["key"], r["truth"]) for r in rows)
    stripped = tmp_path / "pool.csv"
    with open(stripped, "w", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=[c for c in rows[0] if c != "truth"],
                                extrasaction="ignore")
        writer.writeheader()
        writer.writerows(rows)
    args = ["simulate", str(stripped), "--id", "key", "--truth", "grade", "--truth-file",
            str(truth), "--budget", "4", "--seeds", "1", "--json"]
    result = cli.runner.invoke(app, args)
    assert result.exit_code == 0, result.output
    assert json.loads(result.stdout)["strategies"][DEFAULT_STRATEGY]["labels"] == [1, 2, 3, 4]
    with open(truth, "w", newline="") as fh:
        fh.write("key,grade\n" + "".join(f"{r['key']},{r['truth']}\n" for r in rows[1:]))
    user_error(cli.runner.invoke(app, args), rows[0]["key"])


@pytest.mark.sqlite_only("simulate reads a CSV and touches no store")
def test_simulate_table(cli, cancer_csv):
    result = cli.runner.invoke(app, ["simulate", str(cancer_csv), "--id", "key", "--truth",
                                     "truth", "--budget", "6", "--seeds", "1",
                                     "--strategies", "entropy,random"])
    assert result.exit_code == 0, result.output
    assert "Full-pool accuracy" in result.stdout and "entropy" in result.stdout


@pytest.mark.sqlite_only("simulate reads a CSV and touches no store")
def test_simulate_bad_truth_column(cli, cancer_csv, user_error):
    result = cli.runner.invoke(app, ["simulate", str(cancer_csv), "--id", "key", "--truth",
                                     "nope"])
    user_error(result, "nope")


def test_output_paths_that_cannot_be_written(cancer_store, cancer_csv, tmp_path, user_error):
    label_head(cancer_store, cancer_store.truth(cancer_csv), 3)
    user_error(cancer_store("export", "labels", "-o", tmp_path), "folder")
    user_error(cancer_store("history", "--plot", tmp_path / "no" / "h.png"), "does not exist")
    assert list(tmp_path.glob(".labelq-*")) == []
