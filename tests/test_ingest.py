"""Tests for labelq.ingest: the candidate CSV rules, hostile input and chunked reading.

The property tests compare ``read_candidates`` with a slow row-by-row reference written here
from the rules (parsing itself is the standard library's csv module, the outside reference).
"""

import csv
import io
import math
import os
import sys

import numpy as np
import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from labelq.errors import LabelqError
from labelq.ingest import CandidateTable, InputError, read_candidates


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


def test_column_with_an_empty_cell_is_metadata_when_inferred(tmp_path):
    path = write(tmp_path, "key,x,y\nA,1,2\nB,,3\n")
    table = read_candidates(path, "key")
    assert table.feature_names == ["y"]
    assert [row["x"] for row in table.meta] == ["1", ""]


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
    assert message == f'{path}, line 4, column "x": "oops" is not a number'
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


def test_a_column_that_turns_to_text_late_keeps_its_original_text(tmp_path):
    # "1.50" must come back as written although it was first read as a number.
    rows = "".join(f"K{i},1.50,{i},nan\n" for i in range(7)) + "K7,n/a,7,text\n"
    table = read_candidates(write(tmp_path, "key,dose,x,flag\n" + rows), "key", chunk_rows=3)
    assert table.feature_names == ["x"]
    assert [row["dose"] for row in table.meta] == ["1.50"] * 7 + ["n/a"]
    assert [row["flag"] for row in table.meta] == ["nan"] * 7 + ["text"]


# --- one-line errors ----------------------------------------------------------------------


def test_input_error_is_a_labelq_error():
    assert issubclass(InputError, LabelqError)


def test_text_in_an_explicit_feature(tmp_path):
    rows = "".join(f"K{i},12\n" for i in range(15))
    path = write(tmp_path, "key,sugar_brix\n" + rows + 'K15,"12,4"\n')
    message = error_of(path, id_column="key", features=["sugar_brix"])
    assert message == f'{path}, line 17, column "sugar_brix": "12,4" is not a number'


def test_empty_cell_in_an_explicit_feature(tmp_path):
    path = write(tmp_path, "key,x\nA,1\nB, \n")
    message = error_of(path, id_column="key", features=["x"])
    assert message == f'{path}, line 3, column "x": empty cell where a number is required'


@pytest.mark.parametrize("value", ["nan", "inf", "-Infinity", "NaN"])
def test_non_finite_values_in_a_feature(tmp_path, value):
    path = write(tmp_path, f"key,x,y\nA,1,2\nB,{value},3\n")
    expected = f'{path}, line 3, column "x": "{value}" is not a finite number'
    assert error_of(path, id_column="key") == expected
    assert error_of(path, id_column="key", features=["x", "y"]) == expected


def test_earliest_bad_cell_is_reported_across_columns(tmp_path):
    path = write(tmp_path, "key,x,y\nA,1,2\nB,1,bad\nC,bad,3\n")
    message = error_of(path, id_column="key", features=["x", "y"])
    assert message == f'{path}, line 3, column "y": "bad" is not a number'


def test_no_feature_columns(tmp_path):
    path = write(tmp_path, "key,bin\nA,B-1\n")
    assert error_of(path, id_column="key") == (
        f"{path}: no feature columns (every column other than the id and labels has text or "
        "empty cells)"
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


def test_explicit_feature_rules(tmp_path):
    path = write(tmp_path, "key,x,grade\nA,1,2\n")
    assert "no feature column" in error_of(path, id_column="key", features=["y"])
    assert '"key" is the id column' in error_of(path, id_column="key", features=["key"])
    assert '"grade" is the labels column' in error_of(
        path, id_column="key", features=["grade"], labels_column="grade"
    )
    assert "requested twice" in error_of(path, id_column="key", features=["x", "x"])
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
        f"{path}: the feature columns differ from the store's (missing \"b\"; extra \"c\")"
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
    assert len(message) < len(str(path)) + 100


# --- hostile input: property tests against a slow reference --------------------------------


def reference(data: bytes, id_column: str):
    """The expected table for ``data`` as a dict, or None if the file breaks a rule."""
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

    others = [j for j in range(len(header)) if j != id_index]
    features = [j for j in others if all(number(row[j]) is not None for row in rows)]
    if not features or not all(math.isfinite(number(row[j])) for row in rows for j in features):
        return None
    meta_indices = [j for j in others if j not in features]
    return {
        "keys": keys,
        "X": [[number(row[j]) for j in features] for row in rows],
        "feature_names": [header[j] for j in features],
        "meta_columns": [header[j] for j in meta_indices],
        "meta": [{header[j]: row[j] for j in meta_indices} for row in rows],
    }


def check_against_reference(path, data, chunk_rows):
    path.write_bytes(data)
    expected = reference(data, "id")
    try:
        table = read_candidates(path, "id", chunk_rows=chunk_rows)
    except InputError as exc:
        event("rejected")
        assert len(str(exc).splitlines()) == 1
        assert expected is None, f"rejected a valid file: {exc}"
        return
    event("accepted")
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
names = st.sampled_from(["a", "b", "c", "d", "e", "f", " a", "", "id"])


@st.composite
def csv_files(draw):
    """CSV bytes that are often valid: mostly distinct names and ids, occasionally broken."""
    header = draw(st.lists(names, min_size=1, max_size=4, unique=draw(st.integers(0, 3)) > 0))
    if draw(st.integers(0, 4)):
        header.insert(draw(st.integers(0, len(header))), "id")
    n_rows = draw(st.integers(0, 6))
    kinds = [draw(st.sampled_from([numbers, cells])) for _ in header]
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
    check_against_reference(tmp_path / "random.csv", data, chunk_rows)


raw_text = st.text(alphabet=st.sampled_from('0123456789.e-k"\r\x00 n\u00e9'), max_size=4)
raw_lines = st.one_of(st.tuples(raw_text, raw_text).map(",".join), raw_text)


@hostile
@given(
    lines=st.lists(raw_lines, max_size=6),
    end=st.sampled_from(["", "\n", "\r\n"]),
    chunk_rows=st.integers(1, 3),
)
def test_random_text_matches_the_reference(tmp_path, lines, end, chunk_rows):
    data = ("id,a\n" + "\n".join(lines) + end).encode("utf-8")
    check_against_reference(tmp_path / "random.csv", data, chunk_rows)


@hostile
@given(data=st.one_of(st.binary(max_size=64), st.binary(max_size=64).map(lambda b: b"id,a\n" + b)))
def test_random_bytes_give_a_table_or_an_input_error(tmp_path, data):
    check_against_reference(tmp_path / "random.csv", data, 2)
