"""`labelq import` never drops data silently: the feature/metadata split follows a stated rule,
empty or non-numeric feature cells are refused unless --missing names a treatment, and a later
import is checked against the store's features with the reason for each difference.

Expected messages are this project's one-line contract (DESIGN.md: one line on stderr naming
file, line, column and value, exit code 2, nothing changed); line numbers, counts and medians
are hand computations from the invented rows below. Comparing the whole candidates table
before and after a refused import is common practice for "nothing changed".
"""

from __future__ import annotations

import numpy as np
import pytest

from labelq.cli.app import app

HEADER = ["key", "bin", "picked_on", "sugar_brix", "hue_deg", "firmness_kgf"]
FIRST = [
    ["A01", "B-014", "2024-09-02", "12.5", "31", "7.5"],
    ["A02", "B-002", "2024-09-02", "9.75", "40", "6"],
    ["A03", "B-014", "2024-09-03", "11", "35", "7"],
    ["A04", "B-007", "2024-09-04", "10.25", "28", "8.5"],
]
SECOND = [
    ["B01", "B-020", "2024-09-05", "12.5", "33", "7.25"],
    ["B02", "B-020", "2024-09-05", "", "36", "6.5"],
    ["B03", "B-021", "2024-09-06", "9.75", "30", "7"],
    ["B04", "B-021", "2024-09-06", "11", "29", "8"],
    ["B05", "B-022", "2024-09-07", "10.25", "38", "7.75"],
]
FEATURES = ["sugar_brix", "hue_deg", "firmness_kgf"]


def store_rows(cli) -> dict:
    """Every row of the candidates table (and the feature schema and label events), in id
    order: equal dumps before and after mean the store did not change."""
    return {table: cli.query(f"SELECT * FROM {table} ORDER BY 1, 2")
            for table in ("candidates", "feature_blocks", "feature_schema", "label_events")}


def stored_features(cli) -> dict[str, list[float]]:
    """Each stored candidate's feature values, by key, read from the raw feature blocks (revision
    0007: n int64 ids, then n x d float64 values, little-endian)."""
    keys = dict(cli.query("SELECT id, key FROM candidates"))
    width = cli.query("SELECT COUNT(*) FROM feature_schema")[0][0]
    out = {}
    for n, blob in cli.query("SELECT n_rows, data FROM feature_blocks"):
        ids = np.frombuffer(blob, dtype="<i8", count=n)
        values = np.frombuffer(blob, dtype="<f8", offset=8 * n).reshape(n, width)
        out.update({keys[int(i)]: row.tolist() for i, row in zip(ids, values)})
    return out


@pytest.fixture
def orchard(cli, tmp_path, csv_file):
    """A store holding the four FIRST rows, imported by the default rule."""
    assert cli("init", "--classes", "export,local,juice").exit_code == 0
    result = cli("import", csv_file(tmp_path / "first.csv", HEADER, FIRST), "--id", "key")
    assert result.exit_code == 0, result.output
    return cli


def refused(cli, user_error, *args, message: str):
    """Run `labelq import ...`; it must fail with exactly ``message`` and change nothing."""
    before_counts, before_rows = cli.counts(), store_rows(cli)
    result = cli("import", *args)
    user_error(result)
    assert result.stderr.strip() == f"labelq: {message}"
    assert cli.counts() == before_counts
    assert store_rows(cli) == before_rows


def with_cell(rows, key, column, value):
    """A copy of ``rows`` with one cell changed."""
    index = HEADER.index(column)
    return [row[:index] + [value] + row[index + 1:] if row[0] == key else row for row in rows]


# --- refused inputs -----------------------------------------------------------------------


def test_a_blank_cell_in_a_feature_column(orchard, tmp_path, csv_file, user_error):
    path = csv_file(tmp_path / "second.csv", HEADER, SECOND)
    refused(orchard, user_error, path, "--id", "key", message=(
        f'{path}, line 3, column "sugar_brix": empty cell in a feature column (use --missing '
        "drop-row or --missing median, or --meta sugar_brix)"))


def test_n_a_in_a_feature_column(orchard, tmp_path, csv_file, user_error):
    rows = with_cell(SECOND, "B02", "sugar_brix", "9.5")
    path = csv_file(tmp_path / "second.csv", HEADER, with_cell(rows, "B04", "hue_deg", "n/a"))
    refused(orchard, user_error, path, "--id", "key", message=(
        f'{path}, line 5, column "hue_deg": "n/a" is not a number in a feature column (its '
        "first filled cell, line 2, is a number; use --meta hue_deg to keep the column as text)"))


@pytest.mark.parametrize("missing", ["drop-row", "median"])
def test_text_stays_an_error_whatever_the_treatment(orchard, tmp_path, csv_file, user_error,
                                                    missing):
    path = csv_file(tmp_path / "second.csv", HEADER,
                    with_cell(SECOND, "B05", "firmness_kgf", "soft"))
    refused(orchard, user_error, path, "--id", "key", "--missing", missing, message=(
        f'{path}, line 6, column "firmness_kgf": "soft" is not a number in a feature column '
        "(its first filled cell, line 2, is a number; use --meta firmness_kgf to keep the "
        "column as text)"))


def test_a_number_first_then_text_is_an_error_not_metadata(cli, tmp_path, csv_file, user_error):
    assert cli("init", "--classes", "export,local,juice").exit_code == 0
    rows = with_cell(with_cell(FIRST, "A01", "bin", "14"), "A02", "bin", "B-002")
    path = csv_file(tmp_path / "first.csv", HEADER, rows)
    refused(cli, user_error, path, "--id", "key", message=(
        f'{path}, line 3, column "bin": "B-002" is not a number in a feature column (its first '
        "filled cell, line 2, is a number; use --meta bin to keep the column as text)"))
    result = cli("import", path, "--id", "key", "--meta", "bin,picked_on", "--json")
    assert result.exit_code == 0, result.output


def test_a_second_import_whose_columns_differ(orchard, tmp_path, csv_file, user_error):
    header = ["key", "bin", "picked_on", "sugar_brix", "colour", "firmness_kgf"]
    rows = with_cell(SECOND, "B01", "sugar_brix", "n/a")
    rows = with_cell(rows, "B02", "sugar_brix", "9.5")
    path = csv_file(tmp_path / "second.csv", header, rows)
    refused(orchard, user_error, path, "--id", "key", message=(
        f"{path}: the feature columns differ from the store's: the store's feature \"hue_deg\" "
        'is not in the file; "colour" is a feature in the file but not in the store; column '
        '"sugar_brix" is in the file but its first filled cell, line 2, is "n/a", not a number'))


def test_a_second_import_under_meta_that_hides_a_store_feature(orchard, tmp_path, csv_file,
                                                               user_error):
    path = csv_file(tmp_path / "second.csv", HEADER, with_cell(SECOND, "B02", "sugar_brix", "9"))
    refused(orchard, user_error, path, "--id", "key", "--meta", "bin,picked_on,hue_deg", message=(
        f"{path}: the feature columns differ from the store's: column \"hue_deg\" is in the file "
        "but named by --meta"))


def test_a_refused_first_import_leaves_the_store_empty(cli, tmp_path, csv_file, user_error):
    assert cli("init", "--classes", "export,local,juice").exit_code == 0
    path = csv_file(tmp_path / "first.csv", HEADER, with_cell(FIRST, "A03", "hue_deg", ""))
    refused(cli, user_error, path, "--id", "key", "--features", "sugar_brix,hue_deg", message=(
        f'{path}, line 4, column "hue_deg": empty cell in a feature column (use --missing '
        "drop-row or --missing median, or leave hue_deg out of --features)"))
    assert store_rows(cli)["candidates"] == []


def test_option_errors(orchard, tmp_path, csv_file, user_error):
    path = csv_file(tmp_path / "second.csv", HEADER, with_cell(SECOND, "B02", "sugar_brix", "9"))
    refused(orchard, user_error, path, "--id", "key", "--missing", "zero", message=(
        "unknown --missing treatment 'zero'; choose one of error, drop-row, median"))
    refused(orchard, user_error, path, "--id", "key", "--features", "sugar_brix", "--meta", "bin",
            message=(f"{path}: name either the feature columns (--features) or the metadata "
                     "columns (--meta), not both"))


# --- treatments and the split ---------------------------------------------------------------


def test_drop_row_leaves_out_the_rows_and_reports_them(orchard, tmp_path, csv_file):
    rows = with_cell(SECOND, "B04", "hue_deg", " ")
    path = csv_file(tmp_path / "second.csv", HEADER, rows)
    doc = orchard.json("import", path, "--id", "key", "--missing", "drop-row")
    # Hand count: B02 (sugar_brix, line 3) and B04 (hue_deg, line 5) have an empty cell.
    assert doc["added"] == 3 and doc["candidates"] == 7
    assert doc["missing"] == "drop-row"
    assert doc["dropped_rows"] == 2 and doc["first_dropped_line"] == 3
    assert doc["missing_cells"] == {"sugar_brix": 1, "hue_deg": 1}
    assert doc["filled_cells"] == {} and doc["filled_with"] == {}
    keys = set(stored_features(orchard))
    assert {"B01", "B03", "B05"} <= keys and not {"B02", "B04"} & keys


def test_drop_row_summary_line(orchard, tmp_path, csv_file):
    path = csv_file(tmp_path / "second.csv", HEADER, SECOND)
    result = orchard("import", path, "--id", "key", "--missing", "drop-row")
    assert result.exit_code == 0, result.output
    text = " ".join(result.stdout.split())
    assert ("Empty feature cells: 1 (sugar_brix 1); --missing drop-row left out 1 row, the "
            "first at line 3.") in text


def test_median_fills_the_empty_cell(orchard, tmp_path, csv_file):
    path = csv_file(tmp_path / "second.csv", HEADER, SECOND)
    doc = orchard.json("import", path, "--id", "key", "--missing", "median")
    # Hand computation: sugar_brix of the second file's filled rows 12.5, 9.75, 11, 10.25;
    # sorted middle pair 10.25 and 11, median 10.625 (the first import's rows do not count).
    assert doc["added"] == 5 and doc["dropped_rows"] == 0
    assert doc["missing"] == "median"
    assert doc["filled_cells"] == {"sugar_brix": 1}
    assert doc["filled_with"] == {"sugar_brix": 10.625}
    assert stored_features(orchard)["B02"] == [10.625, 36.0, 6.5]
    assert stored_features(orchard)["B01"] == [12.5, 33.0, 7.25]


def test_the_default_rule_and_its_summary(cli, tmp_path, csv_file):
    assert cli("init", "--classes", "export,local,juice").exit_code == 0
    result = cli("import", csv_file(tmp_path / "first.csv", HEADER, FIRST), "--id", "key")
    assert result.exit_code == 0, result.output
    text = " ".join(result.stdout.split())
    assert "Added 4 candidates; the pool now holds 4." in text
    assert ("Features (3): sugar_brix, hue_deg, firmness_kgf (columns whose first filled cell is "
            "a number; set with --features or --meta).") in text
    assert "Metadata (2): bin, picked_on." in text
    assert "Empty feature cells: none (--missing error)." in text
    assert stored_features(cli)["A02"] == [9.75, 40.0, 6.0]


def test_meta_and_features_set_the_split(cli, new_cli, tmp_path, csv_file):
    assert cli("init", "--classes", "export,local,juice").exit_code == 0
    path = csv_file(tmp_path / "first.csv", HEADER, FIRST)
    doc = cli.json("import", path, "--id", "key", "--meta", "bin,picked_on,hue_deg")
    assert doc["feature_rule"] == "meta"
    assert doc["features"] == ["sugar_brix", "firmness_kgf"]
    assert doc["metadata"] == ["bin", "picked_on", "hue_deg"]
    other = new_cli("other.db")
    assert other("init", "--classes", "export,local,juice").exit_code == 0
    doc = other.json("import", path, "--id", "key", "--features", "firmness_kgf,hue_deg")
    assert doc["feature_rule"] == "features"
    assert doc["features"] == ["firmness_kgf", "hue_deg"]
    assert doc["metadata"] == ["bin", "picked_on", "sugar_brix"]
    assert stored_features(other)["A01"] == [7.5, 31.0]


@pytest.mark.sqlite_only("touches no store")
def test_help_states_the_rule(cli):
    result = cli.runner.invoke(app, ["import", "--help"])
    assert result.exit_code == 0
    text = " ".join(result.output.split())
    assert "a column is a feature when its first filled cell is a number" in text
    for option in ("--features", "--meta", "--missing"):
        assert option in text
