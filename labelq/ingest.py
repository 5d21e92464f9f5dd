"""Read and validate a CSV file of candidates.

The file has a header. One column holds the candidate's id (its key), an optional column holds
known labels, the feature columns hold finite numbers and every other column is kept as text
metadata. Anything wrong with the file raises :class:`InputError` with a one-line message that
names the file, the line (where the record starts) and the column and value involved.

Large files are read in chunks of ``chunk_rows`` records: each chunk's cells are placed in one
NumPy object array and each numeric column is converted by NumPy with ``float`` semantics
(surrounding whitespace is allowed, and so are the forms ``float`` itself accepts such as "1_000"
or non-ASCII digits); only when a conversion fails is the column walked cell by cell to find the
first bad value for the message.
"""

from __future__ import annotations

import csv
import itertools
import json
import math
import os
from dataclasses import dataclass
from typing import Callable, Iterator, Optional, Sequence

import numpy as np

from labelq.errors import LabelqError

__all__ = ["CandidateTable", "InputError", "read_candidates"]

FIELD_SIZE_LIMIT = 16 * 1024 * 1024
"""Largest single field accepted, in characters (the csv module's default is 128 KiB)."""

_SHOWN_CHARS = 40
_LINE_BREAKS = str.maketrans({"\x85": "\\u0085", "\u2028": "\\u2028", "\u2029": "\\u2029"})

_CELL_PROBLEMS = {
    "empty id": "empty id",
    "not a number": "{cell} is not a number",
    "not finite": "{cell} is not a finite number",
}

Progress = Callable[[int, int, int], None]


class InputError(LabelqError):
    """A candidate file that cannot be read or breaks a rule, said in one line."""


@dataclass
class CandidateTable:
    """The candidates of one file, in file order.

    ``X`` has shape ``(n_rows, n_features)`` with columns in ``feature_names`` order; ``meta[i]``
    maps each of ``meta_columns`` to row i's text (empty cells kept as ""); ``labels`` is None
    when no labels column was named, else one entry per row (None for an empty cell).
    """

    keys: list[str]
    X: np.ndarray
    feature_names: list[str]
    meta: list[dict[str, str]]
    meta_columns: list[str]
    labels: Optional[list[Optional[str]]]
    n_rows: int


@dataclass
class _Chunk:
    """Up to ``chunk_rows`` records: cells ``(m, n_columns)`` and each record's first line."""

    cells: np.ndarray
    lines: list[int]
    bytes_done: int


def _show(value: str) -> str:
    """Quote a value from the file for a one-line message, shortened if long."""
    if len(value) > _SHOWN_CHARS:
        value = value[:_SHOWN_CHARS] + "..."
    return json.dumps(value, ensure_ascii=False).translate(_LINE_BREAKS)


def _list_columns(names: Sequence[str]) -> str:
    """Name a few columns, for messages."""
    shown = ", ".join(_show(name) for name in names[:8])
    return shown + (f" and {len(names) - 8} more" if len(names) > 8 else "")


def read_candidates(
    path: str | os.PathLike,
    id_column: str,
    features: Optional[Sequence[str]] = None,
    labels_column: Optional[str] = None,
    expected_features: Optional[Sequence[str]] = None,
    progress: Optional[Progress] = None,
    chunk_rows: int = 50_000,
) -> CandidateTable:
    """Read the candidates in the CSV file at ``path``.

    ``features`` names the feature columns; when None they are inferred as every column other
    than the id and labels columns whose cells are all non-empty numbers. ``expected_features``
    (the store's schema) must then match the chosen columns as a set and fixes their order.
    ``progress(rows_done, bytes_done, total_bytes)`` is called once per chunk. Ids are stripped
    of surrounding whitespace, as are labels; metadata is kept verbatim.
    """
    if chunk_rows < 1:
        raise ValueError(f"chunk_rows must be at least 1, got {chunk_rows}")
    name = os.fspath(path)
    csv.field_size_limit(max(csv.field_size_limit(), FIELD_SIZE_LIMIT))
    try:
        with _open(name) as raw:
            total_bytes = os.fstat(raw.fileno()).st_size
            chunks = _read_chunks(raw, name, chunk_rows)
            plan = _Plan(name, next(chunks), id_column, features, labels_column)
            for chunk in chunks:
                plan.add(chunk)
                if progress is not None:
                    progress(plan.n_rows, chunk.bytes_done, total_bytes)
        if plan.n_rows == 0:
            raise InputError(f"{name}: no rows (the file has only a header)")
        if plan.needs_recovery():
            with _open(name) as raw:
                plan.recover(_read_chunks(raw, name, chunk_rows))
    except OSError as exc:
        raise InputError(f"{name}: cannot be read ({exc.strerror or exc})") from None
    return plan.finish(expected_features)


def _open(name: str):
    """Open ``name`` for binary reading, turning OS errors into one-line messages."""
    try:
        return open(name, "rb")
    except FileNotFoundError:
        raise InputError(f"{name}: no such file") from None
    except IsADirectoryError:
        raise InputError(f"{name}: is a directory, not a CSV file") from None
    except PermissionError:
        raise InputError(f"{name}: cannot be read (permission denied)") from None


def _read_chunks(raw, name: str, chunk_rows: int) -> Iterator:
    """Yield ``(line, header_fields)``, then :class:`_Chunk` objects of the header's width.

    Lines are split on b"\\n" and decoded one at a time, so the csv reader's ``line_num`` is
    the physical line number and a decoding failure is pinned to its line. Blank lines are
    skipped.
    """
    first = raw.readline()
    try:
        lines = itertools.chain([first.decode("utf-8-sig")], map(bytes.decode, raw))
    except UnicodeDecodeError:
        raise InputError(f"{name}, line 1: not valid UTF-8 text") from None
    reader = csv.reader(lines, strict=False)
    records = _records(reader, name)
    header = next(records, None)
    if header is None:
        raise InputError(f"{name}: no header (the file is empty or blank)")
    yield header
    width = len(header[1])
    cells: list[list[str]] = []
    starts: list[int] = []
    for start, fields in records:
        if len(fields) != width:
            raise InputError(f"{name}, line {start}: {len(fields)} fields, the header has {width}")
        cells.append(fields)
        starts.append(start)
        if len(cells) == chunk_rows:
            yield _Chunk(_as_cells(cells, width), starts, raw.tell())
            cells, starts = [], []
    if cells:
        yield _Chunk(_as_cells(cells, width), starts, raw.tell())


def _records(reader, name: str) -> Iterator[tuple[int, list[str]]]:
    """Yield ``(first_line, fields)`` for each non-blank record, with errors as InputError."""
    end = 0
    while True:
        try:
            fields = next(reader)
        except StopIteration:
            return
        except UnicodeDecodeError:
            raise InputError(f"{name}, line {reader.line_num + 1}: not valid UTF-8 text") from None
        except csv.Error as exc:
            raise InputError(f"{name}, line {end + 1}: {_csv_problem(exc)}") from None
        start, end = end + 1, reader.line_num
        if fields:
            yield start, fields


def _csv_problem(exc: csv.Error) -> str:
    """Say what the csv module objected to, in the user's terms."""
    text = str(exc)
    if "field larger than field limit" in text:
        return f"a field is longer than {csv.field_size_limit() / 2**20:g} MiB"
    if "new-line character seen in unquoted field" in text:
        return "a carriage return inside an unquoted field (use \\n or \\r\\n line endings)"
    return f"not valid CSV ({text})"


def _as_cells(rows: list[list[str]], width: int) -> np.ndarray:
    """Rows of equal width as an object array ``(m, width)`` of str."""
    cells = np.empty((len(rows), width), dtype=object)
    cells[:] = rows
    return cells


class _Plan:
    """The column roles of one file and the values gathered for them so far."""

    def __init__(self, name, header, id_column, features, labels_column):
        self.name = name
        self.header_line, fields = header
        self.columns = [column.strip() for column in fields]
        self._check_header()
        self.id_index = self._find(id_column, "id")
        self.labels_index = None if labels_column is None else self._find(labels_column, "labels")
        if self.labels_index == self.id_index:
            raise InputError(f"{name}: the labels column cannot also be the id column")
        self.explicit = features is not None
        self.numeric = self._numeric_candidates(features)
        self.n_rows = 0
        self.keys: list[str] = []
        self.key_lines: dict[str, int] = {}
        self.labels: list[Optional[str]] = []
        self.floats: dict[int, list[np.ndarray]] = {j: [] for j in self.numeric}
        self.texts: dict[int, list[str]] = {j: [] for j in self._others() if j not in self.numeric}
        self.lost_rows: dict[int, int] = {}
        self.non_finite: dict[int, tuple[int, str]] = {}

    def _check_header(self):
        seen: dict[str, int] = {}
        for position, column in enumerate(self.columns, 1):
            if not column:
                raise InputError(
                    f"{self.name}, line {self.header_line}: column {position} has no name"
                )
            if column in seen:
                raise InputError(
                    f"{self.name}, line {self.header_line}: column {_show(column)} appears twice "
                    f"(columns {seen[column]} and {position})"
                )
            seen[column] = position

    def _find(self, column: str, role: str) -> int:
        try:
            return self.columns.index(column.strip())
        except ValueError:
            raise InputError(
                f"{self.name}: no {role} column {_show(column)} "
                f"(the header has {_list_columns(self.columns)})"
            ) from None

    def _others(self) -> list[int]:
        return [j for j in range(len(self.columns)) if j not in (self.id_index, self.labels_index)]

    def _numeric_candidates(self, features) -> list[int]:
        if features is None:
            return self._others()
        if isinstance(features, str):
            raise TypeError("features must be a sequence of column names, not a str")
        indices: list[int] = []
        for feature in features:
            index = self._find(feature, "feature")
            if index == self.id_index or index == self.labels_index:
                role = "id" if index == self.id_index else "labels"
                raise InputError(
                    f"{self.name}: {_show(feature)} is the {role} column, not a feature"
                )
            if index in indices:
                raise InputError(f"{self.name}: feature {_show(feature)} is requested twice")
            indices.append(index)
        if not indices:
            raise InputError(f"{self.name}: no features requested")
        return indices

    def add(self, chunk: _Chunk):
        """Check and keep one chunk's ids, labels, numbers and text."""
        self._add_keys(chunk)
        if self.labels_index is not None:
            self.labels.extend(cell.strip() or None for cell in chunk.cells[:, self.labels_index])
        bad: list[tuple[int, int, str, str]] = []
        for j in list(self.numeric):
            values, problem = _to_floats(chunk.cells[:, j])
            if self.explicit:
                if problem is None:
                    self.floats[j].append(values)
                else:
                    row, cell, reason = problem
                    bad.append((row, self.numeric.index(j), cell, reason))
            elif values is None:
                self._demote(j)
            else:
                self.floats[j].append(values)
                if problem is not None:
                    row, cell, _ = problem
                    self.non_finite.setdefault(j, (chunk.lines[row], cell))
        if bad:
            row, position, cell, reason = min(bad)
            self._raise_cell(chunk.lines[row], self.numeric[position], cell, reason)
        for j, texts in self.texts.items():
            texts.extend(chunk.cells[:, j].tolist())
        self.n_rows += len(chunk.lines)

    def _add_keys(self, chunk: _Chunk):
        for line, cell in zip(chunk.lines, chunk.cells[:, self.id_index]):
            key = cell.strip()
            if not key:
                self._raise_cell(line, self.id_index, cell, "empty id")
            first = self.key_lines.setdefault(key, line)
            if first != line:
                raise InputError(
                    f"{self.name}, lines {first} and {line}, column "
                    f"{_show(self.columns[self.id_index])}: duplicate id {_show(key)}"
                )
            self.keys.append(key)

    def _demote(self, j: int):
        """Column j holds a non-number: it becomes metadata; earlier rows' text must be re-read."""
        self.numeric.remove(j)
        del self.floats[j]
        self.non_finite.pop(j, None)
        self.texts[j] = []
        self.lost_rows[j] = self.n_rows

    def _raise_cell(self, line: int, j: int, cell: str, reason: str):
        """Raise the InputError for one bad cell; ``reason`` is a key of ``_CELL_PROBLEMS``."""
        if reason == "empty id" or cell.strip():
            problem = _CELL_PROBLEMS[reason].format(cell=_show(cell))
        else:
            problem = "empty cell where a number is required"
        raise InputError(f"{self.name}, line {line}, column {_show(self.columns[j])}: {problem}")

    def needs_recovery(self) -> bool:
        return any(rows > 0 for rows in self.lost_rows.values())

    def recover(self, chunks: Iterator):
        """Re-read the text of rows whose column was taken for numeric until a later row."""
        next(chunks)
        wanted = {j: rows for j, rows in self.lost_rows.items() if rows > 0}
        early: dict[int, list[str]] = {j: [] for j in wanted}
        done = 0
        for chunk in chunks:
            for j, rows in wanted.items():
                if done < rows:
                    early[j].extend(chunk.cells[: rows - done, j].tolist())
            done += len(chunk.lines)
            if done >= max(wanted.values()):
                break
        for j, texts in early.items():
            self.texts[j][:0] = texts

    def finish(self, expected_features) -> CandidateTable:
        """Apply the feature rules that need the whole file and assemble the table."""
        order = self._feature_order(expected_features)
        for j in order:
            if j in self.non_finite:
                line, cell = self.non_finite[j]
                self._raise_cell(line, j, cell, "not finite")
        X = np.empty((self.n_rows, len(order)), dtype=np.float64)
        for position, j in enumerate(order):
            X[:, position] = np.concatenate(self.floats[j]) if self.floats[j] else []
        meta_indices = sorted(self.texts)
        meta_columns = [self.columns[j] for j in meta_indices]
        if meta_indices:
            rows = zip(*(self.texts[j] for j in meta_indices))
            meta = [dict(zip(meta_columns, row)) for row in rows]
        else:
            meta = [{} for _ in range(self.n_rows)]
        return CandidateTable(
            keys=self.keys,
            X=X,
            feature_names=[self.columns[j] for j in order],
            meta=meta,
            meta_columns=meta_columns,
            labels=self.labels if self.labels_index is not None else None,
            n_rows=self.n_rows,
        )

    def _feature_order(self, expected_features) -> list[int]:
        if not self.numeric:
            raise InputError(
                f"{self.name}: no feature columns (every column other than the id and labels "
                "has text or empty cells)"
            )
        if expected_features is None:
            return list(self.numeric)
        chosen = {self.columns[j]: j for j in self.numeric}
        expected = [column.strip() for column in expected_features]
        missing = [column for column in expected if column not in chosen]
        extra = [column for column in chosen if column not in expected]
        if missing or extra:
            parts = []
            if missing:
                parts.append(f"missing {_list_columns(missing)}")
            if extra:
                parts.append(f"extra {_list_columns(extra)}")
            raise InputError(
                f"{self.name}: the feature columns differ from the store's ({'; '.join(parts)})"
            )
        return [chosen[column] for column in expected]


def _to_floats(cells: np.ndarray) -> tuple[Optional[np.ndarray], Optional[tuple[int, str, str]]]:
    """Convert an object column of str to float64.

    Returns ``(values, problem)``: ``values`` is None when some cell is not a number; ``problem``
    is None or ``(row, cell, reason)`` for the first cell that is "not a number" or "not finite".
    """
    try:
        values = cells.astype(np.float64)
    except ValueError:
        values = None
    if values is not None:
        finite = np.isfinite(values)
        if finite.all():
            return values, None
        row = int(np.argmin(finite))
        return values, (row, cells[row], "not finite")
    for row, cell in enumerate(cells):
        try:
            number = float(cell)
        except ValueError:
            return None, (row, cell, "not a number")
        if not math.isfinite(number):
            return None, (row, cell, "not finite")
    raise AssertionError("NumPy rejected a column that float() accepts")
