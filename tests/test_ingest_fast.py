"""Tests for labelq.ingest_fast: the plain-chunk reader and its decimal parser give exactly what
the careful reader (the csv module and ``float``) gives.

References: Python's ``float`` on a str (correctly rounded, ties to even: CPython reads decimal
strings with David Gay's dtoa.c, from memory) and, independently, ``fractions.Fraction`` (the
exact decimal value, then one correctly rounded int division) for the parser; the standard library's
csv module for the fields of a line (RFC 4180, section 2: only a double quote gives a field a
structure beyond the text between commas); and labelq.ingest read with the fast reader switched
off, the reader every import used before it, for whole files. Pools are scikit-learn's
make_classification (the reference library's generator) with fixed seeds.
"""

from __future__ import annotations

import csv
import io
import math
import struct
from decimal import Decimal
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sklearn.datasets import make_classification

from labelq import ingest, ingest_fast
from labelq.ingest import InputError, read_candidates, stream_candidates
from labelq.ingest_fast import WINDOW, decimal_values, read_plain

EXTENDED = ingest_fast._has_x87_extended()
PATHS = [pytest.param(True, id="extended"), pytest.param(False, id="clinger")]


def parse(cells: list[str], extended: bool):
    """decimal_values on the cells written as one CSV line: (values, sure) as lists."""
    data = ",".join(cells).encode("utf-8") + b"\n"
    buf = np.frombuffer(bytes(WINDOW) + data, dtype=np.uint8)
    ends = np.flatnonzero((buf[WINDOW:] == ord(",")) | (buf[WINDOW:] == ord("\n")))
    starts = np.concatenate([[0], ends[:-1] + 1])
    if extended and not EXTENDED:
        pytest.skip("NumPy's longdouble is not the x87 extended format here")
    values, sure = decimal_values(buf, starts, ends, extended)
    return values.tolist(), sure.tolist()


def bits(value: float) -> bytes:
    """The double's bytes: equal bytes tell -0.0 from 0.0."""
    return struct.pack("<d", value)


def exact_double(text: str) -> float:
    """The decimal's exact value rounded once to the nearest double (ties to even)."""
    value = Fraction(Decimal(text))
    return float(value.numerator) if value.denominator == 1 else value.numerator / value.denominator


def check_sure_cells(cells, extended):
    values, sure = parse(cells, extended)
    for cell, value, is_sure in zip(cells, values, sure):
        if is_sure:
            assert bits(value) == bits(float(cell)), cell  # Python's float
            assert value == exact_double(cell), cell  # Fraction, rounded once
    return sure


# --- the decimal parser -------------------------------------------------------------------


@pytest.mark.parametrize("extended", PATHS)
def test_plain_forms_are_sure_and_exact(extended):
    cells = ["0", "7", "-0", "-0.0", "+0", "007", "5.", ".5", "-.5", "+.5", "12.5",
             "-1.852735816208179", "0.41942070789107144", "123456789012345678",
             "0.000123456789012345678", "1" * 19]
    sure = check_sure_cells(cells, extended)
    if extended:
        assert all(sure)
    else:  # Clinger's case only: at most 2**53 as digits and at most 22 after the point
        assert sure == [True] * 12 + [False] * 4
    values, _ = parse(["-0", "-0.0", "+0"], extended)
    assert [bits(v) for v in values] == [bits(-0.0), bits(-0.0), bits(0.0)]


@pytest.mark.parametrize("extended", PATHS)
def test_anything_else_is_not_sure(extended):
    # Each of these is for float() or the careful reader to judge: exponents, words, spaces,
    # underscores, signs or points out of place, other digits, too long, too many digits.
    cells = ["", " ", "1e5", "1E+5", "nan", "inf", "-Infinity", " 1", "1 ", "1_000", "-", "+",
             ".", "-.", "1.2.3", "--1", "+-1", "1-", "0x10", "\u0661\u0662", "1\t",
             "1" * 20, "-" + "1" * 20, "0." + "1" * 22, "9" * 25]
    _, sure = parse(cells, extended)
    assert not any(sure), [cell for cell, s in zip(cells, sure) if s]


def test_window_and_digit_limits():
    if not EXTENDED:
        pytest.skip("NumPy's longdouble is not the x87 extended format here")
    # 24 bytes with a sign, a point and leading zeros: 19 digits from the first non-zero one
    longest = "-0.000" + "1234567890123456789"[:18]
    assert len(longest) == WINDOW
    assert check_sure_cells([longest, longest[1:] + "1", "1" * 19 + ".5"], True) == [
        True, True, False]  # the last has 20 significant digits


@pytest.mark.parametrize("extended", PATHS)
@settings(max_examples=300, deadline=None)
@given(cells=st.lists(st.builds(
    lambda sign, whole, fraction, point: sign + whole + ("." + fraction if point else ""),
    st.sampled_from(["", "-", "+"]), st.text("0123456789", max_size=12),
    st.text("0123456789", max_size=12), st.booleans()), min_size=1, max_size=40))
def test_random_decimals_match_float(extended, cells):
    sure = check_sure_cells(cells, extended)
    for cell, is_sure in zip(cells, sure):
        digits = cell.lstrip("+-").replace(".", "")
        if not digits or len(cell) > WINDOW:
            assert not is_sure


def test_repr_of_doubles_is_nearly_always_sure():
    # repr gives the shortest string that reads back exactly (Python's repr of float; at most
    # 17 significant digits), the form writers such as the csv module produce.
    if not EXTENDED:
        pytest.skip("NumPy's longdouble is not the x87 extended format here")
    rng = np.random.default_rng(7)
    doubles = np.concatenate([rng.normal(size=20_000), rng.uniform(-1e6, 1e6, 20_000)])
    cells = [repr(float(v)) for v in doubles]
    cells = [cell for cell in cells if "e" not in cell]
    values, sure = parse(cells, True)
    assert sum(sure) >= 0.99 * len(cells)  # about 1 in 2048 is a midpoint after the division
    for cell, value, is_sure in zip(cells, values, sure):
        if is_sure:
            assert bits(value) == bits(float(cell))


def test_decimals_on_a_midpoint_are_never_guessed():
    # Exact midpoints between two doubles (hand computation: doubles in [2**52, 2**53) are the
    # integers, in [2**53, 2**54) the even integers, in [2**54, 2**55) the multiples of 4), so
    # float() breaks the tie to the even significand.
    if not EXTENDED:
        pytest.skip("NumPy's longdouble is not the x87 extended format here")
    midpoints = ["4503599627370496.5", "4503599627370497.5", "9007199254740993",
                 "9007199254740995", "18014398509481986", "-9007199254740993"]
    _, sure = parse(midpoints, True)
    assert not any(sure)
    near = ["4503599627370496.51", "4503599627370496.49", "9007199254740993.1",
            "9007199254740992.9", "-9007199254740993.01"]
    assert check_sure_cells(near, True) == [True] * len(near)


def test_decimals_near_a_midpoint_match_float():
    # The exact midpoint between a double and the next one up, cut to 15-19 significant digits
    # below or above it: the cases where rounding twice (to 64 bits, then to 53) goes wrong.
    if not EXTENDED:
        pytest.skip("NumPy's longdouble is not the x87 extended format here")
    rng = np.random.default_rng(11)
    cells = []
    for value, digits, up in zip(10.0 ** rng.uniform(-12, 15, 4000), rng.integers(15, 20, 4000),
                                 rng.integers(0, 2, 4000)):
        midpoint = (Fraction(float(value)) + Fraction(float(np.nextafter(value, np.inf)))) / 2
        exact = Decimal(midpoint.numerator) / Decimal(midpoint.denominator)  # 28 digits
        scale = Decimal(10) ** (exact.adjusted() - int(digits) + 1)
        cut = (math.ceil if up else math.floor)(exact / scale) * scale
        if len(format(cut, "f")) < WINDOW:
            cells += [format(cut, "f"), "-" + format(cut, "f")]
    sure = check_sure_cells(cells, True)
    values, _ = parse(cells, True)
    rounded_twice = [float(cell) != value for cell, value in zip(cells, values)]
    assert sum(rounded_twice) > 100  # the test has teeth: these are the cells left unsure
    assert not any(s and wrong for s, wrong in zip(sure, rounded_twice))
    assert sum(sure) > len(cells) // 2


# --- plain blocks -------------------------------------------------------------------------


def lines_of(text: str) -> list[bytes]:
    return io.BytesIO(text.encode("utf-8")).readlines()


@pytest.mark.parametrize("text", [
    "A,1,x\nB,2.5,y\n",
    "A,1,x\r\nB,2.5,y\r\n",  # CRLF line ends (RFC 4180 sec. 2, rule 1)
    "A,1,x\nB,2.5,y\r\nC,,\n",  # mixed ends and empty fields
    "A,1,x\nB,2.5,y",  # no line end after the last record
    "A,1,x\nB,2.5,y\r",
    "A,1,x\nB,2.5,y\n\n\r\n",  # blank lines at the end of the file
    "\u00e9t\u00e9,1,caf\u00e9\n\ufeffB, 2 ,\u2028\n",  # UTF-8, a stray BOM, a line separator
    "A,1,\tx #$%&'()*+!\n",  # bytes below "," that mean nothing to csv
])
def test_plain_blocks_split_as_the_csv_module_does(text):
    chunk = read_plain(lines_of(text), 3, 2, True, 1 << 20, 0)
    assert chunk is not None
    expected = [row for row in csv.reader(io.StringIO(text, newline="")) if row]  # the reference
    assert list(chunk.lines) == [2 + i for i in range(len(expected))]
    for j in range(3):
        assert chunk.texts(j) == [row[j] for row in expected]
        assert chunk.column(j).tolist() == [row[j] for row in expected]


@pytest.mark.parametrize("data", [
    b'A,"1",x\n',  # a quote (RFC 4180 sec. 2, rules 5-7)
    b"A,1,x\nB,2\0,y\n",  # NUL
    b"A,1\r,x\n",  # a carriage return inside a line
    b"A,1,x\rB,2,y\n",
    b"A,1,x\n\nB,2,y\n",  # a blank line the csv module skips
    b"A,1,x\n\r\nB,2,y\n",
    b"A,1,x\nB,2\n",  # too few fields
    b"A,1,x,\n",  # too many
    b"A,1,x\nB,\xe9,y\n",  # not UTF-8 (Latin-1)
])
def test_blocks_that_are_not_plain(data):
    assert read_plain(io.BytesIO(data).readlines(), 3, 2, False, 1 << 20, 0) is None


def test_long_lines_and_blank_lines_of_one_column_are_not_plain():
    assert read_plain(lines_of("A,1,x\n" + "B,2," + "y" * 100 + "\n"), 3, 2, True, 64, 0) is None
    assert read_plain(lines_of("A\n\r\nB\n"), 1, 2, True, 1 << 20, 0) is None
    assert read_plain(lines_of("A\n \nB\n"), 1, 2, True, 1 << 20, 0).texts(0) == ["A", " ", "B"]


# --- whole files: the fast reader against the careful one -----------------------------------


def outcome(read, *args, **kwargs):
    """("error", message) or ("table", every field of the result, X as bytes)."""
    try:
        result = read(*args, **kwargs)
    except InputError as exc:
        return "error", str(exc)
    tables = result if isinstance(result, list) else [result]
    return "table", [(t.keys, t.X.shape, t.X.tobytes(), t.feature_names, t.meta, t.meta_columns,
                      t.labels, t.n_rows, t.feature_rule, t.missing) for t in tables]


def stream_all(*args, **kwargs):
    return list(stream_candidates(*args, **kwargs))


def both_readers(monkeypatch, read, *args, **kwargs):
    """The outcome of ``read(*args, **kwargs)`` with the fast reader, how many plain chunks it
    read, and the outcome with every chunk read by the csv module."""
    plain = []

    def counted(*args):
        chunk = ingest_fast.read_plain(*args)
        plain.append(chunk is not None)
        return chunk

    with monkeypatch.context() as patch:
        patch.setattr(ingest, "read_plain", counted)
        fast = outcome(read, *args, **kwargs)
    with monkeypatch.context() as patch:
        patch.setattr(ingest, "read_plain", lambda *block: None)
        careful = outcome(read, *args, **kwargs)
    return fast, sum(plain), careful


def pool_file(path, n=120, *, newline="\n", bom=False, edits=(), tail="", blank_before=None):
    """key, note, x0..x3, truth from make_classification (seed 4); ``edits`` are
    (row, column, text) changes, a column being the name in the header; ``blank_before`` a
    row to put a blank line before."""
    X, y = make_classification(n_samples=n, n_features=4, n_informative=2, n_redundant=0,
                               random_state=4)
    header = ["key", "note", "x0", "x1", "x2", "x3", "truth"]
    rows = [[f"k{i:04d}", f"lot {i % 3}", *(repr(float(v)) for v in X[i]),
             ("yes" if y[i] else "no") if i % 5 == 0 else ""] for i in range(n)]
    for row, column, text in edits:
        rows[row][header.index(column)] = text
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator=newline).writerows([header, *rows])
    if blank_before is not None:
        lines = buffer.getvalue().splitlines(keepends=True)
        lines.insert(blank_before + 1, newline)
        buffer = io.StringIO("".join(lines))
    path.write_bytes((b"\xef\xbb\xbf" if bom else b"") + (buffer.getvalue() + tail).encode())
    return path


FILES = {
    "lf": {},
    "crlf": {"newline": "\r\n"},
    "bom": {"bom": True, "newline": "\r\n"},
    "quoted note in one chunk": {"edits": [(40, "note", "lot 1, late")]},  # RFC 4180 rule 6
    "quote inside a field": {"edits": [(70, "note", 'the "big" bin')]},  # rule 7
    "non-ASCII note": {"edits": [(3, "note", "Reinette grise du Canad\u00e1")]},
    "exponents and other forms": {"edits": [(5, "x0", "1e-05"), (6, "x1", "-2.5E+3"),
                                            (90, "x2", " 7 "), (91, "x3", "1_000"),
                                            (92, "x0", "0.0000000000000000000001234"),
                                            (93, "x1", "12345678901234567890.5"),
                                            (94, "x2", "\u0661\u0662")]},
    "a column of exponents": {"edits": [(i, "x1", f"{(i - 60) * 1.5e-3:.6e}") for i in range(120)]},
    "blank lines": {"edits": [(50, "note", "")], "tail": "\n\n"},
    "a blank line inside": {"blank_before": 30},
    "a quoted line break": {"edits": [(30, "note", "two\nlines")]},
}
CAREFUL_CHUNKS = {"quoted note in one chunk", "quote inside a field", "a blank line inside",
                  "a quoted line break"}  # one chunk of each is read by the csv module


@pytest.mark.parametrize("chunk_rows", [7, 50_000])
@pytest.mark.parametrize("name", list(FILES))
def test_the_fast_reader_gives_the_careful_readers_tables(tmp_path, monkeypatch, name, chunk_rows):
    path = pool_file(tmp_path / "pool.csv", **FILES[name])
    chunks = -(-120 // chunk_rows)
    expected_plain = chunks - (name in CAREFUL_CHUNKS)
    for kwargs in ({"labels_column": "truth"}, {"features": ["x3", "x0"]},
                   {"meta": ["note", "truth"]}):
        fast, plain, careful = both_readers(monkeypatch, read_candidates, path, "key",
                                            chunk_rows=chunk_rows, **kwargs)
        assert fast[0] == "table", fast
        assert fast == careful
        assert plain == expected_plain
        fast, plain, careful = both_readers(monkeypatch, stream_all, path, "key",
                                            chunk_rows=chunk_rows, **kwargs)
        assert fast == careful and plain == expected_plain


@pytest.mark.parametrize("missing", ["error", "drop-row", "median"])
def test_blank_cells_under_each_treatment(tmp_path, monkeypatch, missing):
    path = pool_file(tmp_path / "pool.csv", edits=[(0, "x1", ""), (8, "x1", " "),
                                                   (117, "x3", "")])
    fast, plain, careful = both_readers(monkeypatch, read_candidates, path, "key",
                                        chunk_rows=16, missing=missing)
    assert fast == careful
    assert plain == (1 if missing == "error" else 8)  # "error" stops in the first chunk
    if missing == "error":
        assert fast == ("error", f'{path}, line 2, column "x1": empty cell in a feature column '
                        "(use --missing drop-row or --missing median, or --meta x1)")


@pytest.mark.parametrize("cell,problem", [
    ("nan", '"nan" is not a finite number in a feature column (use --meta x2 to keep the '
            "column as text)"),
    ("inf", '"inf" is not a finite number in a feature column (use --meta x2 to keep the '
            "column as text)"),
    ("-Infinity", '"-Infinity" is not a finite number in a feature column (use --meta x2 to '
                  "keep the column as text)"),
    ("n/a", '"n/a" is not a number in a feature column (its first filled cell, line 2, is a '
            "number; use --meta x2 to keep the column as text)"),
    ("1e999", '"1e999" is not a finite number in a feature column (use --meta x2 to keep the '
              "column as text)"),
])
def test_a_bad_cell_in_the_last_chunk_gives_todays_message(tmp_path, monkeypatch, cell, problem):
    path = pool_file(tmp_path / "pool.csv", edits=[(118, "x2", cell)])
    for missing in ("error", "median"):
        fast, plain, careful = both_readers(monkeypatch, read_candidates, path, "key",
                                            chunk_rows=16, missing=missing)
        assert fast == careful == ("error", f'{path}, line 120, column "x2": {problem}')
        assert plain == 8


@pytest.mark.parametrize("edits,message", [
    ([(100, "key", "k0003")], 'lines 5 and 102, column "key": duplicate id "k0003"'),
    ([(100, "key", " ")], 'line 102, column "key": empty id'),
])
def test_bad_ids_in_a_later_chunk(tmp_path, monkeypatch, edits, message):
    path = pool_file(tmp_path / "pool.csv", edits=edits)
    fast, _, careful = both_readers(monkeypatch, read_candidates, path, "key", chunk_rows=16)
    assert fast == careful == ("error", f"{path}, {message}")


def test_a_short_row_or_bad_bytes_in_a_later_chunk(tmp_path, monkeypatch):
    path = pool_file(tmp_path / "pool.csv")
    data = path.read_bytes().splitlines(keepends=True)
    data[90] = data[90].replace(b",", b"", 1)
    data[100] = data[100].replace(b"lot", b"l\xe9t")
    path.write_bytes(b"".join(data))
    fast, _, careful = both_readers(monkeypatch, read_candidates, path, "key", chunk_rows=16)
    assert fast == careful == ("error", f"{path}, line 91: 6 fields, the header has 7")
    del data[90]
    path.write_bytes(b"".join(data))
    fast, _, careful = both_readers(monkeypatch, read_candidates, path, "key", chunk_rows=16)
    assert fast == careful == ("error", f"{path}, line 100: not valid UTF-8 text")


def test_a_column_blank_in_the_first_chunks_is_decided_later(tmp_path, monkeypatch):
    edits = [(i, "x2", "") for i in range(40)]
    path = pool_file(tmp_path / "pool.csv", edits=edits)
    for missing in ("error", "drop-row", "median"):
        fast, _, careful = both_readers(monkeypatch, read_candidates, path, "key",
                                        chunk_rows=16, missing=missing)
        assert fast == careful
    fast, _, careful = both_readers(monkeypatch, stream_all, path, "key", chunk_rows=16,
                                    missing="drop-row")
    assert fast == careful and fast[0] == "table"


def test_progress_is_the_same(tmp_path, monkeypatch):
    path = pool_file(tmp_path / "pool.csv", newline="\r\n", edits=[(40, "note", "a, b")])
    fast, careful = [], []
    read_candidates(path, "key", chunk_rows=16, progress=lambda *call: fast.append(call))
    with monkeypatch.context() as patch:
        patch.setattr(ingest, "read_plain", lambda *block: None)
        read_candidates(path, "key", chunk_rows=16, progress=lambda *call: careful.append(call))
    assert fast == careful
    assert fast[-1][1:] == (path.stat().st_size,) * 2


cell_texts = st.one_of(
    st.sampled_from(["", " ", "1", "-2.5", "1e3", " 7 ", "nan", "inf", "x", "1_0", '"', "a,b",
                     "a\nb", "a\r\nb", "\ufeff", "\u00e9", "-0", ".5", "5.", "+1"]),
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
    st.integers(-10**20, 10**20).map(str),
)


@st.composite
def pool_texts(draw):
    """CSV bytes with an id column and a few columns of mostly numbers, sometimes broken."""
    width = draw(st.integers(1, 4))
    n_rows = draw(st.integers(1, 12))
    kinds = [draw(st.sampled_from([cell_texts, st.floats(-1e6, 1e6).map(repr)]))
             for _ in range(width)]
    rows = [[f"K{i}"] + [draw(kind) for kind in kinds] for i in range(n_rows)]
    if draw(st.integers(0, 5)) == 0:
        rows[draw(st.integers(0, n_rows - 1))].append("extra")
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator=draw(st.sampled_from(["\n", "\r\n"]))).writerows(
        [["id"] + [f"c{j}" for j in range(width)], *rows])
    text = buffer.getvalue() + draw(st.sampled_from(["", "\n", "\r\n\n"]))
    return (draw(st.sampled_from(["", "\ufeff"])) + text).encode("utf-8")


@settings(max_examples=200, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=pool_texts(), chunk_rows=st.integers(1, 5),
       missing=st.sampled_from(["error", "drop-row", "median"]))
def test_random_files_read_the_same_both_ways(tmp_path, monkeypatch, data, chunk_rows, missing):
    path = tmp_path / "random.csv"
    path.write_bytes(data)
    fast, _, careful = both_readers(monkeypatch, read_candidates, path, "id",
                                    chunk_rows=chunk_rows, missing=missing)
    assert fast == careful
