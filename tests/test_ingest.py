"""Tests for labelq.ingest: the candidate CSV rules, hostile input and chunked reading.

The property tests compare ``read_candidates`` with a slow row-by-row reference written here
from the rules (parsing itself is the standard library's csv module, the outside reference;
medians are computed exactly with the standard library's fractions and statistics modules).
Expected values in the other tests are hand computations from the rules in the module
docstring; the error texts are this project's one-line contract (DEVELOPERS.md).
"""

import csv
import io
import math
import os
import statistics
import sys
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from labelq.errors import LabelqError
from labelq.ingest import CandidateTable, InputError, MissingCells, read_candidates


def write(tmp_path, content, name="orchard.csv"):
    path = tmp_path / name
    path.write_bytes(content.encode("utf-8") if isinstance(content, str) else content)
    return path


def error_of(path, **kwargs):
    with pytest.raises(InputError) as caught:
        read_candidates(path, **kwargs)
    message = str(caught.value)
    assert len(message.splitlines()) == 1
    return message


# --- the basic contract -------------------------------------------------------------------


def test_infers_features_metadata_and_labels(tmp_path):
    path = write(
        tmp_path,
        "key,bin,sugar_brix,grade,firmness_kgf,note\n"
        " A1 ,B-014,12.4,export,7.5,\n"
        "A2,B-002,  9.8 ,,6,late pick\n",
    )
    table = read_candidates(path, "key", labels_column="grade")
    assert isinstance(table, CandidateTable)
    assert table.keys == ["A1", "A2"]
    assert table.feature_names == ["sugar_brix", "firmness_kgf"]
    assert table.X.dtype == np.float64
    np.testing.assert_array_equal(table.X, [[12.4, 7.5], [9.8, 6.0]])
    assert table.meta_columns == ["bin", "note"]
    assert table.meta == [{"bin": "B-014", "note": ""}, {"bin": "B-002", "note": "late pick"}]
    assert table.labels == ["export", None]
    assert table.n_rows == 2


def test_without_labels_column_labels_is_none(tmp_path):
    path = write(tmp_path, "key,x\nA,1\n")
    assert read_candidates(path, "key").labels is None


def test_an_empty_cell_never_turns_a_feature_into_metadata(tmp_path):
    # The first filled cell of x is a number, so x is a feature and its empty cell an error.
    path = write(tmp_path, "key,x,y\nA,1,2\nB,,3\n")
    assert error_of(path, id_column="key") == (
        f'{path}, line 3, column "x": empty cell in a feature column (use --missing drop-row '
        "or --missing median, or --meta x)"
    )


def test_explicit_features_keep_their_order_and_leave_numbers_as_metadata(tmp_path):
    path = write(tmp_path, "key,a,b,c\nA,1,2,3\n")
    table = read_candidates(path, "key", features=["c", "a"])
    assert table.feature_names == ["c", "a"]
    np.testing.assert_array_equal(table.X, [[3.0, 1.0]])
    assert table.meta == [{"b": "2"}]


def test_blank_lines_are_skipped(tmp_path):
    path = write(tmp_path, "\nkey,x\n\nA,1\n\nB,2\n\n")
    assert read_candidates(path, "key").keys == ["A", "B"]


def test_byte_order_mark_is_not_part_of_the_first_column(tmp_path):
    path = write(tmp_path, b"\xef\xbb\xbfkey,x\r\nA,1\r\n")
    table = read_candidates(path, "key")
    assert table.keys == ["A"] and table.feature_names == ["x"]


def test_quoted_newlines_are_kept_and_lines_counted_from_the_record_start(tmp_path):
    path = write(tmp_path, 'key,note,x\nA,"two\nlines",1\nB,"three\n\nlines",oops\n')
    message = error_of(path, id_column="key", features=["x"])
    assert message == (
        f'{path}, line 4, column "x": "oops" is not a number in a feature column '
        "(leave x out of --features to keep the column as text)"
    )
    table = read_candidates(write(tmp_path, 'key,note,x\nA,"two\nlines",1\n', "ok.csv"), "key")
    assert table.meta == [{"note": "two\nlines"}]


def test_look_alike_sql_and_markup_come_back_verbatim(tmp_path):
    hostile = ["'; DROP TABLE candidates;--", "<b>x</b>", "[red]x[/red]"]
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(["key", "note", "x"])
    for i, text in enumerate(hostile):
        writer.writerow([text, text + '"', i])
    table = read_candidates(write(tmp_path, buffer.getvalue()), "key")
    assert table.keys == hostile
    assert [row["note"] for row in table.meta] == [text + '"' for text in hostile]


def test_thousands_of_columns(tmp_path):
    n_columns, n_rows = 3000, 20
    rng = np.random.default_rng(0)
    values = rng.normal(size=(n_rows, n_columns)).round(6)
    lines = ["key," + ",".join(f"f{j}" for j in range(n_columns))]
    lines += [f"K{i}," + ",".join(map(repr, row.tolist())) for i, row in enumerate(values)]
    table = read_candidates(write(tmp_path, "\n".join(lines) + "\n"), "key")
    assert table.X.shape == (n_rows, n_columns)
    np.testing.assert_array_equal(table.X, values)


def test_a_field_beyond_the_csv_modules_default_limit_is_read(tmp_path):
    big = "x" * (2 * 1024 * 1024)
    table = read_candidates(write(tmp_path, f'key,note,x\nA,"{big}",1\n'), "key")
    assert table.meta[0]["note"] == big


def test_a_field_beyond_16_mib_is_an_error(tmp_path):
    big = "x" * (16 * 1024 * 1024 + 1)
    path = write(tmp_path, f"key,note,x\nA,1,1\nB,{big},1\n")
    assert error_of(path, id_column="key") == f"{path}, line 3: a field is longer than 16 MiB"


def test_progress_is_reported_once_per_chunk(tmp_path):
    path = write(tmp_path, "key,x\n" + "".join(f"K{i},{i}\n" for i in range(10)))
    calls = []
    read_candidates(path, "key", progress=lambda *args: calls.append(args), chunk_rows=4)
    size = os.path.getsize(path)
    assert [rows for rows, _, _ in calls] == [4, 8, 10]
    assert all(total == size for _, _, total in calls)
    assert calls[-1][1] == size


def test_a_text_column_keeps_its_numbers_verbatim(tmp_path):
    # The first filled cell of dose is text, so dose is metadata: "1.50" comes back as written.
    rows = "K0,n/a,0\n" + "".join(f"K{i},1.50,{i}\n" for i in range(1, 8))
    table = read_candidates(write(tmp_path, "key,dose,x\n" + rows), "key", chunk_rows=3)
    assert table.feature_names == ["x"]
    assert [row["dose"] for row in table.meta] == ["n/a"] + ["1.50"] * 7


# --- one-line errors ----------------------------------------------------------------------


def test_input_error_is_a_labelq_error():
    assert issubclass(InputError, LabelqError)


def test_text_in_an_explicit_feature(tmp_path):
    rows = "".join(f"K{i},12\n" for i in range(15))
    path = write(tmp_path, "key,sugar_brix\n" + rows + 'K15,"12,4"\n')
    message = error_of(path, id_column="key", features=["sugar_brix"])
    assert message == (
        f'{path}, line 17, column "sugar_brix": "12,4" is not a number in a feature column '
        "(leave sugar_brix out of --features to keep the column as text)"
    )


def test_empty_cell_in_an_explicit_feature(tmp_path):
    path = write(tmp_path, "key,x\nA,1\nB, \n")
    message = error_of(path, id_column="key", features=["x"])
    assert message == (
        f'{path}, line 3, column "x": empty cell in a feature column (use --missing drop-row '
        "or --missing median, or leave x out of --features)"
    )


@pytest.mark.parametrize("value", ["nan", "inf", "-Infinity", "NaN"])
def test_non_finite_values_in_a_feature(tmp_path, value):
    path = write(tmp_path, f"key,x,y\nA,1,2\nB,{value},3\n")
    expected = f'{path}, line 3, column "x": "{value}" is not a finite number in a feature column'
    hint = " (use --meta x to keep the column as text)"
    assert error_of(path, id_column="key") == expected + hint
    assert error_of(path, id_column="key", features=["x", "y"]) == (
        expected + " (leave x out of --features to keep the column as text)"
    )
    for missing in ("drop-row", "median"):  # filled but not finite: never a missing cell
        assert error_of(path, id_column="key", missing=missing).startswith(expected)


def test_earliest_bad_cell_is_reported_across_columns(tmp_path):
    path = write(tmp_path, "key,x,y\nA,1,2\nB,1,bad\nC,bad,3\n")
    message = error_of(path, id_column="key", features=["x", "y"])
    assert message.startswith(f'{path}, line 3, column "y": "bad" is not a number')
    path = write(tmp_path, "key,x,y\nA,1,2\nB,1,\nC,bad,3\n", "blank_first.csv")
    message = error_of(path, id_column="key")
    assert message.startswith(f'{path}, line 3, column "y": empty cell in a feature column')


def test_no_feature_columns(tmp_path):
    path = write(tmp_path, "key,bin\nA,B-1\n")
    assert error_of(path, id_column="key") == (
        f"{path}: no feature columns (no column other than the id and labels has a number as "
        "its first filled cell; name them with --features)"
    )


def test_missing_id_column(tmp_path):
    path = write(tmp_path, "key,x\nA,1\n")
    expected = f'{path}: no id column "id" (the header has "key", "x")'
    assert error_of(path, id_column="id") == expected


def test_duplicate_id_names_both_lines(tmp_path):
    path = write(tmp_path, "key,x\nA,1\nB,2\n A ,3\n")
    expected = f'{path}, lines 2 and 4, column "key": duplicate id "A"'
    assert error_of(path, id_column="key") == expected


def test_empty_id(tmp_path):
    path = write(tmp_path, "key,x\nA,1\n  ,2\n")
    assert error_of(path, id_column="key") == f'{path}, line 3, column "key": empty id'


@pytest.mark.parametrize("option,role,what", [
    ("features", "a feature", "feature"), ("meta", "metadata", "metadata column"),
])
def test_rules_for_named_columns(tmp_path, option, role, what):
    path = write(tmp_path, "key,x,grade\nA,1,2\n")
    assert f'no {what.split()[0]} column "y"' in error_of(path, id_column="key", **{option: ["y"]})
    assert f'"key" is the id column, not {role}' in error_of(
        path, id_column="key", **{option: ["key"]}
    )
    assert f'"grade" is the labels column, not {role}' in error_of(
        path, id_column="key", labels_column="grade", **{option: ["grade"]}
    )
    twice = error_of(path, id_column="key", **{option: ["x", "x"]})
    assert f'{what} "x" is requested twice' in twice
    with pytest.raises(TypeError):
        read_candidates(path, "key", **{option: "x"})


def test_explicit_features_cannot_be_none_of_the_columns(tmp_path):
    path = write(tmp_path, "key,x,grade\nA,1,2\n")
    assert "no features requested" in error_of(path, id_column="key", features=[])


def test_labels_column_rules(tmp_path):
    path = write(tmp_path, "key,x\nA,1\n")
    assert "no labels column" in error_of(path, id_column="key", labels_column="grade")
    assert "cannot also be the id column" in error_of(path, id_column="key", labels_column="key")


def test_expected_features_fix_the_order(tmp_path):
    path = write(tmp_path, "key,a,b\nA,1,2\n")
    table = read_candidates(path, "key", expected_features=["b", "a"])
    assert table.feature_names == ["b", "a"]
    np.testing.assert_array_equal(table.X, [[2.0, 1.0]])


def test_expected_features_that_differ(tmp_path):
    path = write(tmp_path, "key,a,c\nA,1,2\n")
    assert error_of(path, id_column="key", expected_features=["a", "b"]) == (
        f'{path}: the feature columns differ from the store\'s: the store\'s feature "b" is not '
        'in the file; "c" is a feature in the file but not in the store'
    )


def test_duplicate_header_names(tmp_path):
    path = write(tmp_path, "key,x, x\nA,1,2\n")
    expected = f'{path}, line 1: column "x" appears twice (columns 2 and 3)'
    assert error_of(path, id_column="key") == expected


def test_unnamed_column_after_blank_lines(tmp_path):
    path = write(tmp_path, "\n\nkey,x,\nA,1,2\n")
    assert error_of(path, id_column="key") == f"{path}, line 3: column 3 has no name"


def test_row_with_a_different_number_of_fields(tmp_path):
    path = write(tmp_path, "key,x\nA,1\nB,2,3\n")
    assert error_of(path, id_column="key") == f"{path}, line 3: 3 fields, the header has 2"


def test_empty_file_and_header_only(tmp_path):
    empty = write(tmp_path, "", "empty.csv")
    assert error_of(empty, id_column="key") == f"{empty}: no header (the file is empty or blank)"
    header_only = write(tmp_path, "key,x\n", "header.csv")
    expected = f"{header_only}: no rows (the file has only a header)"
    assert error_of(header_only, id_column="key") == expected


def test_missing_file_and_directory(tmp_path):
    missing = tmp_path / "nowhere.csv"
    assert error_of(missing, id_column="key") == f"{missing}: no such file"
    assert error_of(tmp_path, id_column="key") == f"{tmp_path}: is a directory, not a CSV file"


@pytest.mark.skipif(sys.platform == "win32" or os.geteuid() == 0, reason="needs file permissions")
def test_unreadable_file(tmp_path):
    path = write(tmp_path, "key,x\nA,1\n")
    path.chmod(0)
    assert error_of(path, id_column="key") == f"{path}: cannot be read (permission denied)"


def test_latin1_bytes_name_the_line(tmp_path):
    text = "key,cultivar,x\nA,Gala,1\nB,Reinette grise du Canadá,2\n"
    path = write(tmp_path, text.encode("latin-1"))
    assert error_of(path, id_column="key") == f"{path}, line 3: not valid UTF-8 text"


def test_bare_carriage_returns(tmp_path):
    path = write(tmp_path, "key,x\rA,1\r")
    assert "carriage return" in error_of(path, id_column="key")


def test_long_or_multiline_values_are_shortened_in_messages(tmp_path):
    path = write(tmp_path, 'key,x\nA,"' + "bad\n" * 30 + '"\n')
    message = error_of(path, id_column="key", features=["x"])
    assert message.startswith(f'{path}, line 2, column "x": "bad\\nbad\\n')
    assert len(message) < len(str(path)) + 200


# --- the feature rule ---------------------------------------------------------------------


@pytest.mark.parametrize("chunk_rows", [1, 2, 50_000])
def test_the_first_filled_cell_decides_a_columns_role(tmp_path, chunk_rows):
    # Hand-read from the rule: bin and picked_on start with text, late_note is blank until a
    # text cell and nothing is blank throughout (kept verbatim); only sugar_brix is a feature.
    path = write(
        tmp_path,
        "key,bin,picked_on,sugar_brix,late_note,nothing\n"
        "A1,014,2024-09-02,12.5,, \n"
        "A2,B-2,2024-09-03,9.75,,\n"
        "A3,B-3,7,11,see bin,\n",
    )
    # bin's first filled cell "014" is a number, so bin is a feature and "B-2" an error.
    message = error_of(path, id_column="key", chunk_rows=chunk_rows)
    assert message == (
        f'{path}, line 3, column "bin": "B-2" is not a number in a feature column (its first '
        "filled cell, line 2, is a number; use --meta bin to keep the column as text)"
    )
    table = read_candidates(path, "key", chunk_rows=chunk_rows,
                            meta=["bin", "picked_on", "late_note", "nothing"])
    assert table.feature_rule == "meta" and table.feature_names == ["sugar_brix"]
    path.write_text(path.read_text().replace("A1,014", "A1,B-1"))
    table = read_candidates(path, "key", chunk_rows=chunk_rows)
    assert table.feature_rule == "first-filled-cell"
    assert table.feature_names == ["sugar_brix"]
    np.testing.assert_array_equal(table.X, [[12.5], [9.75], [11.0]])
    assert table.meta_columns == ["bin", "picked_on", "late_note", "nothing"]
    assert [row["picked_on"] for row in table.meta] == ["2024-09-02", "2024-09-03", "7"]
    assert [row["late_note"] for row in table.meta] == ["", "", "see bin"]
    assert [row["nothing"] for row in table.meta] == [" ", "", ""]


def test_n_a_in_a_feature_column_is_an_error(tmp_path):
    rows = "".join(f"K{i},{10 + i}.5\n" for i in range(55)) + "K55,n/a\n"
    path = write(tmp_path, "key,sugar_brix\n" + rows)
    assert error_of(path, id_column="key", chunk_rows=16) == (
        f'{path}, line 57, column "sugar_brix": "n/a" is not a number in a feature column '
        "(its first filled cell, line 2, is a number; use --meta sugar_brix to keep the column "
        "as text)"
    )


def test_nan_as_the_first_filled_cell_makes_a_feature_and_an_error(tmp_path):
    # float() reads "nan", so the rule makes the column a feature; a feature must be finite.
    path = write(tmp_path, "key,x,y\nA,nan,1\nB,2,2\n")
    assert error_of(path, id_column="key").startswith(
        f'{path}, line 2, column "x": "nan" is not a finite number in a feature column'
    )


def test_a_column_blank_until_a_later_chunk(tmp_path):
    # x is blank on lines 2-4 and a number from line 5: a feature whose first three cells are
    # empty (hand-read from the rule), whichever chunk holds its first filled cell.
    rows = "A,,1\nB,,2\nC, ,3\nD,4,4\nE,6,5\n"
    path = write(tmp_path, "key,x,y\n" + rows)
    for chunk_rows in (1, 2, 10):
        message = error_of(path, id_column="key", chunk_rows=chunk_rows)
        assert message.startswith(f'{path}, line 2, column "x": empty cell in a feature column')
        table = read_candidates(path, "key", chunk_rows=chunk_rows, missing="drop-row")
        assert table.keys == ["D", "E"]
        np.testing.assert_array_equal(table.X, [[4.0, 4.0], [6.0, 5.0]])
        assert table.missing.first_dropped_line == 2
        table = read_candidates(path, "key", chunk_rows=chunk_rows, missing="median")
        np.testing.assert_array_equal(table.X[:, 0], [5.0, 5.0, 5.0, 4.0, 6.0])


def test_meta_names_the_metadata_columns_and_every_other_column_is_a_feature(tmp_path):
    path = write(tmp_path, "key,lot,b,grade,a\nA,7,1.5,export,2\nB,8,2.5,,3\n")
    table = read_candidates(path, "key", labels_column="grade", meta=["lot"])
    assert table.feature_rule == "meta"
    assert table.feature_names == ["b", "a"]
    np.testing.assert_array_equal(table.X, [[1.5, 2.0], [2.5, 3.0]])
    assert table.meta == [{"lot": "7"}, {"lot": "8"}]
    assert table.labels == ["export", None]
    everything = read_candidates(path, "key", labels_column="grade", meta=[])
    assert everything.feature_names == ["lot", "b", "a"]


def test_under_meta_a_text_column_not_named_is_a_feature_and_an_error(tmp_path):
    path = write(tmp_path, "key,bin,x\nA,B-1,1\n")
    assert error_of(path, id_column="key", meta=["x"]) == (
        f'{path}, line 2, column "bin": "B-1" is not a number in a feature column '
        "(add bin to --meta to keep the column as text)"
    )


def test_features_and_meta_together_or_meta_naming_every_column(tmp_path):
    path = write(tmp_path, "key,x,grade,bin\nA,1,2,B\n")
    assert error_of(path, id_column="key", features=["x"], meta=["bin"]) == (
        f"{path}: name either the feature columns (--features) or the metadata columns "
        "(--meta), not both"
    )
    assert error_of(path, id_column="key", meta=["x", "grade", "bin"]) == (
        f"{path}: no feature columns (--meta names every column other than the id and labels)"
    )


def test_missing_must_be_a_known_treatment(tmp_path):
    path = write(tmp_path, "key,x\nA,1\n")
    with pytest.raises(ValueError, match="missing must be one of error, drop-row, median"):
        read_candidates(path, "key", missing="zero")


# --- empty feature cells ------------------------------------------------------------------

ORCHARD = (
    "key,bin,sugar_brix,hue_deg,grade\n"
    "A1,B-1,12.5,30,export\n"
    "A2,B-2,,31,local\n"
    "A3,B-3,9.75,,juice\n"
    "A4,B-4,11,33,\n"
    "A5,B-5,10.25,,export\n"
)


def test_drop_row_leaves_out_rows_with_an_empty_feature_cell(tmp_path):
    path = write(tmp_path, ORCHARD)
    table = read_candidates(path, "key", labels_column="grade", missing="drop-row")
    # Hand computation: A2 (sugar_brix), A3 and A5 (hue_deg) have an empty feature cell.
    assert table.keys == ["A1", "A4"]
    np.testing.assert_array_equal(table.X, [[12.5, 30.0], [11.0, 33.0]])
    assert table.meta == [{"bin": "B-1"}, {"bin": "B-4"}]
    assert table.labels == ["export", None]
    assert table.n_rows == 2
    assert table.missing == MissingCells(
        "drop-row", {"sugar_brix": 1, "hue_deg": 2}, dropped_rows=3, first_dropped_line=3
    )
    assert table.missing.filled_cells == {}


def test_median_fills_empty_cells_with_the_columns_median(tmp_path):
    path = write(tmp_path, ORCHARD)
    table = read_candidates(path, "key", labels_column="grade", missing="median", chunk_rows=2)
    # Hand computation: sugar_brix filled cells 12.5, 9.75, 11, 10.25 -> sorted middle pair
    # 10.25 and 11 -> 10.625; hue_deg filled cells 30, 31, 33 -> 31.
    assert table.keys == ["A1", "A2", "A3", "A4", "A5"]
    np.testing.assert_array_equal(
        table.X, [[12.5, 30.0], [10.625, 31.0], [9.75, 31.0], [11.0, 33.0], [10.25, 31.0]]
    )
    assert table.missing.filled_with == {"sugar_brix": 10.625, "hue_deg": 31.0}
    assert table.missing.filled_cells == {"sugar_brix": 1, "hue_deg": 2}
    assert table.missing.dropped_rows == 0


def test_median_of_huge_values_does_not_overflow(tmp_path):
    path = write(tmp_path, "key,x\nA,1e308\nB,1.5e308\nC,\n")
    table = read_candidates(path, "key", missing="median")
    # Hand computation: (1e308 + 1.5e308) / 2 = 1.25e308, although the sum overflows a double.
    assert table.X[2, 0] == 1.25e308


def test_the_error_treatment_reports_no_missing_cells(tmp_path):
    table = read_candidates(write(tmp_path, "key,x\nA,1\n"), "key")
    assert table.missing == MissingCells("error")


@pytest.mark.parametrize("missing", ["drop-row", "median"])
def test_text_in_a_feature_stays_an_error_under_either_treatment(tmp_path, missing):
    path = write(tmp_path, "key,x\nA,1\nB,\nC,n/a\n")
    assert error_of(path, id_column="key", missing=missing).startswith(
        f'{path}, line 4, column "x": "n/a" is not a number in a feature column'
    )


def test_median_needs_a_filled_cell(tmp_path):
    path = write(tmp_path, "key,x,y\nA,,1\nB,,2\n")
    assert error_of(path, id_column="key", features=["x", "y"], missing="median") == (
        f'{path}, column "x": every cell is empty, so --missing median has no median to fill with'
    )


def test_drop_row_that_leaves_nothing(tmp_path):
    path = write(tmp_path, "key,x,y\nA,,1\nB,2,\n")
    assert error_of(path, id_column="key", missing="drop-row") == (
        f"{path}: every row has an empty feature cell, so --missing drop-row leaves nothing to "
        "import"
    )


def test_ids_of_dropped_rows_are_still_checked(tmp_path):
    path = write(tmp_path, "key,x\nA,1\nA,\n")
    assert error_of(path, id_column="key", missing="drop-row") == (
        f'{path}, lines 2 and 3, column "key": duplicate id "A"'
    )


# --- a later import against the store's features ------------------------------------------


def test_expected_features_explain_each_difference(tmp_path):
    path = write(
        tmp_path,
        "key,firmness,sugar_brix,colour,spare,grade\n"
        "A,7.5,n/a,3,,export\n"
        "B,6,12.5,4,,local\n",
    )
    store = ["firmness", "sugar_brix", "hue_deg", "spare", "grade"]
    assert error_of(path, id_column="key", labels_column="grade", expected_features=store) == (
        f"{path}: the feature columns differ from the store's: the store's feature \"hue_deg\" "
        'is not in the file; "colour" is a feature in the file but not in the store; '
        'column "sugar_brix" is in the file but its first filled cell, line 2, is "n/a", not a '
        'number; column "spare" is in the file but has no filled cell; column "grade" is the '
        "labels column"
    )


def test_expected_features_under_explicit_options(tmp_path):
    path = write(tmp_path, "key,a,b\nA,1,2\n")
    assert error_of(path, id_column="key", features=["a"], expected_features=["a", "b"]) == (
        f"{path}: the feature columns differ from the store's: column \"b\" is in the file but "
        "not named by --features"
    )
    assert error_of(path, id_column="key", meta=["b"], expected_features=["a", "b"]) == (
        f"{path}: the feature columns differ from the store's: column \"b\" is in the file but "
        "named by --meta"
    )


def test_expected_features_with_a_later_n_a_name_the_cell(tmp_path):
    # The column is a feature by the rule, so a later "n/a" is a bad cell, not a missing column.
    path = write(tmp_path, "key,a,b\nA,1,2\nB,n/a,3\n")
    assert error_of(path, id_column="key", expected_features=["b", "a"]).startswith(
        f'{path}, line 3, column "a": "n/a" is not a number in a feature column'
    )


# --- hostile input: property tests against a slow reference --------------------------------


def reference(data: bytes, id_column: str, missing: str = "error"):
    """The expected table for ``data`` as a dict, or None if the file breaks a rule.

    Features by the first-filled-cell rule; empty feature cells treated as ``missing`` says.
    """
    try:
        text = data.decode("utf-8-sig")
        records = [fields for fields in csv.reader(io.StringIO(text, newline="\n")) if fields]
    except (UnicodeDecodeError, csv.Error):
        return None
    if len(records) < 2:
        return None
    header, rows = [name.strip() for name in records[0]], records[1:]
    if "" in header or len(set(header)) < len(header) or id_column not in header:
        return None
    if any(len(row) != len(header) for row in rows):
        return None
    id_index = header.index(id_column)
    keys = [row[id_index].strip() for row in rows]
    if "" in keys or len(set(keys)) < len(keys):
        return None

    def number(cell):
        try:
            return float(cell)
        except ValueError:
            return None

    def blank(cell):
        return not cell.strip()

    others = [j for j in range(len(header)) if j != id_index]
    first_filled = {j: next((row[j] for row in rows if not blank(row[j])), None) for j in others}
    features = [j for j in others
                if first_filled[j] is not None and number(first_filled[j]) is not None]
    filled = [row[j] for row in rows for j in features if not blank(row[j])]
    if not features or not all(number(c) is not None and math.isfinite(number(c)) for c in filled):
        return None
    if missing == "error" and any(blank(row[j]) for row in rows for j in features):
        return None
    if missing == "drop-row":
        keys = [k for k, row in zip(keys, rows) if not any(blank(row[j]) for j in features)]
        rows = [row for row in rows if not any(blank(row[j]) for j in features)]
        if not rows:
            return None
    fill = {}
    for j in features:
        values = [Fraction(number(row[j])) for row in rows if not blank(row[j])]
        if not values:
            return None
        fill[j] = float(statistics.median(values))  # exact, rounded once
    meta_indices = [j for j in others if j not in features]
    return {
        "keys": keys,
        "X": [[fill[j] if blank(row[j]) else number(row[j]) for j in features] for row in rows],
        "feature_names": [header[j] for j in features],
        "meta_columns": [header[j] for j in meta_indices],
        "meta": [{header[j]: row[j] for j in meta_indices} for row in rows],
    }


def check_against_reference(path, data, chunk_rows, missing="error"):
    path.write_bytes(data)
    expected = reference(data, "id", missing)
    try:
        table = read_candidates(path, "id", chunk_rows=chunk_rows, missing=missing)
    except InputError as exc:
        event("rejected")
        assert len(str(exc).splitlines()) == 1
        assert expected is None, f"rejected a valid file: {exc}"
        return
    event(f"accepted, {missing}, {'some' if table.missing.per_column else 'no'} empty cells")
    assert expected is not None, "accepted a file that breaks a rule"
    assert table.keys == expected["keys"]
    assert table.feature_names == expected["feature_names"]
    assert table.X.shape == (len(expected["keys"]), len(expected["feature_names"]))
    np.testing.assert_array_equal(table.X, np.array(expected["X"]).reshape(table.X.shape))
    assert table.meta_columns == expected["meta_columns"]
    assert table.meta == expected["meta"]
    assert table.n_rows == len(table.keys)


TRICKY_CELLS = [
    "", " ", "1", "-2.5", "1e3", " 7 ", "nan", "inf", "-Infinity", "x", "1,5", '"', "a\nb",
    "a\r\nb", "1_0", "A1", "\ufeff", "\u2028", "'; DROP TABLE candidates;--", "[red]x[/red]",
]
numbers = st.one_of(
    st.integers(-999, 999).map(str),
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
)
cells = st.one_of(st.sampled_from(TRICKY_CELLS), st.text(max_size=4), numbers, numbers)
gappy_numbers = st.one_of(numbers, numbers, st.sampled_from(["", " "]))
names = st.sampled_from(["a", "b", "c", "d", "e", "f", " a", "", "id"])


@st.composite
def csv_files(draw):
    """CSV bytes that are often valid: mostly distinct names and ids, occasionally broken."""
    header = draw(st.lists(names, min_size=1, max_size=4, unique=draw(st.integers(0, 3)) > 0))
    if draw(st.integers(0, 4)):
        header.insert(draw(st.integers(0, len(header))), "id")
    n_rows = draw(st.integers(0, 6))
    kinds = [draw(st.sampled_from([numbers, gappy_numbers, cells])) for _ in header]
    columns = [draw(st.lists(kind, min_size=n_rows, max_size=n_rows)) for kind in kinds]
    if "id" in header and draw(st.integers(0, 3)):
        suffix = draw(st.sampled_from(TRICKY_CELLS))
        columns[header.index("id")] = [f" K{i}{suffix}" for i in range(n_rows)]
    rows = [list(row) for row in zip(*columns)]
    if rows and not draw(st.integers(0, 5)):
        rows[draw(st.integers(0, len(rows) - 1))].append("extra")
    buffer = io.StringIO()
    writer = csv.writer(
        buffer,
        lineterminator=draw(st.sampled_from(["\n", "\r\n"])),
        quoting=draw(st.sampled_from([csv.QUOTE_MINIMAL, csv.QUOTE_ALL])),
    )
    writer.writerow(header)
    writer.writerows(rows)
    bom = draw(st.sampled_from(["", "\ufeff"]))
    return (bom + buffer.getvalue()).encode("utf-8")


hostile = settings(
    max_examples=400, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)


@hostile
@given(data=csv_files(), chunk_rows=st.integers(1, 4))
def test_random_csv_files_match_the_reference(tmp_path, data, chunk_rows):
    for missing in ("error", "drop-row", "median"):
        check_against_reference(tmp_path / "random.csv", data, chunk_rows, missing)


@st.composite
def gappy_files(draw):
    """Well-formed CSV bytes whose numeric columns have empty cells anywhere, leading ones too."""
    n_rows, n_columns = draw(st.integers(1, 8)), draw(st.integers(1, 3))
    header = ["id", "note"] + [f"x{j}" for j in range(n_columns)]
    rows = [[f"K{i}", draw(st.sampled_from(["", " ", "a", "1"]))]
            + [draw(gappy_numbers) for _ in range(n_columns)] for i in range(n_rows)]
    buffer = io.StringIO()
    csv.writer(buffer).writerows([header, *rows])
    return buffer.getvalue().encode("utf-8")


@hostile
@given(data=gappy_files(), chunk_rows=st.integers(1, 4))
def test_files_with_empty_cells_match_the_reference(tmp_path, data, chunk_rows):
    for missing in ("error", "drop-row", "median"):
        check_against_reference(tmp_path / "gappy.csv", data, chunk_rows, missing)


raw_text = st.text(alphabet=st.sampled_from('0123456789.e-k"\r\x00 n\u00e9'), max_size=4)
raw_lines = st.one_of(st.tuples(raw_text, raw_text).map(",".join), raw_text)


@hostile
@given(
    lines=st.lists(raw_lines, max_size=6),
    end=st.sampled_from(["", "\n", "\r\n"]),
    chunk_rows=st.integers(1, 3),
    missing=st.sampled_from(["error", "drop-row", "median"]),
)
def test_random_text_matches_the_reference(tmp_path, lines, end, chunk_rows, missing):
    data = ("id,a\n" + "\n".join(lines) + end).encode("utf-8")
    check_against_reference(tmp_path / "random.csv", data, chunk_rows, missing)


@hostile
@given(data=st.one_of(st.binary(max_size=64), st.binary(max_size=64).map(lambda b: b"id,a\n" + b)))
def test_random_bytes_give_a_table_or_an_input_error(tmp_path, data):
    check_against_reference(tmp_path / "random.csv", data, 2)
