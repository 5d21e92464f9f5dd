"""Read and validate a CSV file of candidates.

The file has a header. One column holds the candidate's id (its key), an optional column holds
known labels, the feature columns hold finite numbers and every other column is kept as text
metadata. Which columns are features follows a rule the caller sees and sets, never whether every
cell happened to parse:

- ``features`` given: exactly those columns (rule ``"features"``);
- ``meta`` given: every column except those, the id and the labels (rule ``"meta"``);
- neither: a column is a feature when its first filled (non-blank) cell is a number as ``float``
  reads it, and metadata otherwise (rule ``"first-filled-cell"``).

An empty (blank) cell in a feature column is an error unless ``missing`` names a treatment:
``"drop-row"`` leaves the row out, ``"median"`` fills the cell with the median of the column's
filled cells in the file. A filled cell that is not a finite number is an error whatever
``missing`` says. Anything wrong with the file raises :class:`InputError` with a one-line message
that names the file, the line (where the record starts) and the column and value involved.

Large files are read in chunks of ``chunk_rows`` records. A chunk of plain lines (no quotes,
the header's number of commas on every line: :mod:`labelq.ingest_fast`) is split with NumPy and
its plain decimals converted by a vectorised parser that gives exactly the double ``float``
gives; any other chunk is read by the csv module into one NumPy object array. Every other cell
of a feature column is converted by NumPy with ``float`` semantics (surrounding whitespace is
allowed, and so are the forms ``float`` itself accepts such as "1_000" or non-ASCII digits); only
when a conversion fails is the column walked cell by cell to find the blank cells and the first
bad value. A column's role, once decided, never changes, so the file is read once.
"""

from __future__ import annotations

import csv
import itertools
import json
import math
import os
import re
from dataclasses import dataclass, field
from typing import Callable, Iterator, Optional, Sequence

import numpy as np

from labelq.errors import LabelqError
from labelq.ingest_fast import read_plain

__all__ = [
    "MISSING_TREATMENTS",
    "CandidateTable",
    "InputError",
    "MissingCells",
    "read_candidates",
    "stream_candidates",
]

FIELD_SIZE_LIMIT = 16 * 1024 * 1024
"""Largest single field accepted, in characters (the csv module's default is 128 KiB)."""

MISSING_TREATMENTS = ("error", "drop-row", "median")
"""What may be done with an empty cell in a feature column (see :func:`read_candidates`)."""

_SHOWN_CHARS = 40
_SHOWN_EXPLANATIONS = 3
_LINE_BREAKS = str.maketrans({"\x85": "\\u0085", "\u2028": "\\u2028", "\u2029": "\\u2029"})
_BARE_NAME = re.compile(r"[A-Za-z0-9_.-]+")

Progress = Callable[[int, int, int], None]


class InputError(LabelqError):
    """A candidate file that cannot be read or breaks a rule, said in one line."""


@dataclass
class MissingCells:
    """The empty cells found in feature columns and what was done with them.

    ``treatment`` is one of :data:`MISSING_TREATMENTS`; ``per_column`` counts the empty cells of
    each feature column that has any; ``dropped_rows`` is how many rows "drop-row" left out and
    ``first_dropped_line`` the file line of the first of them; ``filled_with`` maps each column
    "median" filled to the value put in its empty cells.
    """

    treatment: str = "error"
    per_column: dict[str, int] = field(default_factory=dict)
    dropped_rows: int = 0
    first_dropped_line: Optional[int] = None
    filled_with: dict[str, float] = field(default_factory=dict)

    @property
    def filled_cells(self) -> dict[str, int]:
        """Cells filled per column (empty unless the treatment is "median")."""
        return dict(self.per_column) if self.treatment == "median" else {}


@dataclass
class CandidateTable:
    """The candidates of one file, in file order (less any rows "drop-row" left out).

    ``X`` has shape ``(n_rows, n_features)`` with columns in ``feature_names`` order; ``meta[i]``
    maps each of ``meta_columns`` to row i's text (empty cells kept as ""); ``labels`` is None
    when no labels column was named, else one entry per row (None for an empty cell).
    ``feature_rule`` says how the features were chosen ("features", "meta" or
    "first-filled-cell") and ``missing`` what was done with empty feature cells.
    """

    keys: list[str]
    X: np.ndarray
    feature_names: list[str]
    meta: list[dict[str, str]]
    meta_columns: list[str]
    labels: Optional[list[Optional[str]]]
    n_rows: int
    feature_rule: str = "first-filled-cell"
    missing: MissingCells = field(default_factory=MissingCells)


@dataclass
class _Chunk:
    """Up to ``chunk_rows`` records read by the csv module: cells ``(m, n_columns)`` and each
    record's first line. :class:`labelq.ingest_fast.PlainChunk` offers the same methods."""

    cells: np.ndarray
    lines: list[int]
    bytes_done: int

    def texts(self, j: int) -> list[str]:
        """Column j's cells."""
        return self.cells[:, j].tolist()

    def column(self, j: int) -> np.ndarray:
        """Column j's cells as an object array of str."""
        return self.cells[:, j]

    def first_filled(self, j: int) -> Optional[tuple[int, str]]:
        """``(row, cell)`` of column j's first cell that is not blank, or None."""
        return next(((row, cell) for row, cell in enumerate(self.cells[:, j]) if cell.strip()),
                    None)

    def numbers(self, columns: list[int], careful) -> dict[int, np.ndarray]:
        """Columns already converted: none (the plan converts each with ``careful``)."""
        return {}


def _show(value: str) -> str:
    """Quote a value from the file for a one-line message, shortened if long."""
    if len(value) > _SHOWN_CHARS:
        value = value[:_SHOWN_CHARS] + "..."
    return json.dumps(value, ensure_ascii=False).translate(_LINE_BREAKS)


def _list_columns(names: Sequence[str]) -> str:
    """Name a few columns, for messages."""
    shown = ", ".join(_show(name) for name in names[:8])
    return shown + (f" and {len(names) - 8} more" if len(names) > 8 else "")


def _option_value(name: str) -> str:
    """A column name as it would be typed after an option: bare when that is safe, else quoted."""
    return name if _BARE_NAME.fullmatch(name) else _show(name)


def read_candidates(
    path: str | os.PathLike,
    id_column: str,
    features: Optional[Sequence[str]] = None,
    labels_column: Optional[str] = None,
    expected_features: Optional[Sequence[str]] = None,
    progress: Optional[Progress] = None,
    chunk_rows: int = 50_000,
    *,
    meta: Optional[Sequence[str]] = None,
    missing: str = "error",
) -> CandidateTable:
    """Read the candidates in the CSV file at ``path``.

    ``features`` names exactly the feature columns, in the order given; ``meta`` instead names
    the metadata columns, every other column except the id and labels being a feature; with
    neither, a column is a feature when its first filled cell is a number (see the module
    docstring). ``missing`` ("error", "drop-row" or "median") says what to do with an empty cell
    in a feature column. ``expected_features`` (the store's schema) must then match the chosen
    columns as a set and fixes their order; otherwise features keep the file's order.
    ``progress(rows_done, bytes_done, total_bytes)`` is called once per chunk. Ids are stripped
    of surrounding whitespace, as are labels; metadata is kept verbatim.
    """
    plan = None
    for plan in _plans(path, id_column, features, labels_column, expected_features, progress,
                       chunk_rows, meta, missing):
        pass
    return plan.finish()


def stream_candidates(
    path: str | os.PathLike,
    id_column: str,
    features: Optional[Sequence[str]] = None,
    labels_column: Optional[str] = None,
    expected_features: Optional[Sequence[str]] = None,
    progress: Optional[Progress] = None,
    chunk_rows: int = 32_768,
    *,
    meta: Optional[Sequence[str]] = None,
    missing: str = "error",
) -> Iterator[CandidateTable]:
    """The candidates of the CSV file at ``path`` as tables of about ``chunk_rows`` rows, read
    and checked as :func:`read_candidates` does, so that a large file is never held whole.

    Parts come as soon as every column's role is decided; under ``missing="median"`` (which needs
    the whole file) or while a column has only blank cells so far, rows are held until they can
    be. The file's features are compared with ``expected_features`` before the first part. An
    InputError can come after some parts: the caller adds them in one transaction and rolls it
    back. Every part carries the feature names, metadata columns and rule; the last part's
    ``missing`` describes the whole file (a last part may have no rows).
    """
    plan = None
    for plan in _plans(path, id_column, features, labels_column, expected_features, progress,
                       chunk_rows, meta, missing):
        part = plan.drain()
        if part is not None:
            yield part
    yield plan.drain(final=True)


def _plans(path, id_column, features, labels_column, expected_features, progress, chunk_rows,
           meta, missing) -> Iterator["_Plan"]:
    """The file's `_Plan`, yielded after each chunk of ``chunk_rows`` records is added to it
    (at least once); InputError for a file without rows or that cannot be read."""
    if chunk_rows < 1:
        raise ValueError(f"chunk_rows must be at least 1, got {chunk_rows}")
    if missing not in MISSING_TREATMENTS:
        raise ValueError(f"missing must be one of {', '.join(MISSING_TREATMENTS)}, got {missing!r}")
    name = os.fspath(path)
    csv.field_size_limit(max(csv.field_size_limit(), FIELD_SIZE_LIMIT))
    try:
        with _open(name) as raw:
            total_bytes = os.fstat(raw.fileno()).st_size
            chunks = _read_chunks(raw, name, chunk_rows)
            plan = _Plan(name, next(chunks), id_column, labels_column, features, meta, missing,
                         expected_features)
            for chunk in chunks:
                plan.add(chunk)
                if progress is not None:
                    progress(plan.n_rows, chunk.bytes_done, total_bytes)
                yield plan
        if plan.n_rows == 0:
            raise InputError(f"{name}: no rows (the file has only a header)")
    except OSError as exc:
        raise InputError(f"{name}: cannot be read ({exc.strerror or exc})") from None


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


class _Lines:
    """The file's physical lines, handed out one at a time, decoded, to the csv reader
    (:meth:`decoded`) or as blocks of raw bytes to the plain reader (:meth:`take`); ``count`` is
    how many have been handed out. A block the plain reader refuses is given back and goes to
    the csv reader next."""

    def __init__(self, raw):
        self.raw = raw
        self.count = 0
        self._held: list[bytes] = []

    def decoded(self) -> Iterator[str]:
        """Each line as text (the first without a byte-order mark); UnicodeDecodeError for a
        line that is not UTF-8, ``count`` being the lines before it."""
        encoding = "utf-8-sig"
        while True:
            line = self._held.pop() if self._held else self.raw.readline()
            if not line:
                return
            text = line.decode(encoding)
            encoding = "utf-8"
            self.count += 1
            yield text

    def take(self, n: int) -> list[bytes]:
        """Up to ``n`` raw lines (fewer at the end of the file), not yet counted."""
        return list(itertools.islice(self.raw, n))

    def give_back(self, block: list[bytes]):
        self._held = block[::-1]


def _read_chunks(raw, name: str, chunk_rows: int) -> Iterator:
    """Yield ``(line, header_fields)``, then chunks of ``chunk_rows`` records of the header's
    width (fewer at the end).

    Each chunk is first offered to :func:`labelq.ingest_fast.read_plain` as a block of
    ``chunk_rows`` raw lines; a block that is not plain is read with the csv module instead
    (:class:`_Chunk`). There lines are split on b"\\n" and decoded one at a time, so the line
    count is the physical line number and a decoding failure is pinned to its line. Blank lines
    are skipped.
    """
    lines = _Lines(raw)
    records = _records(csv.reader(lines.decoded(), strict=False), lines, name)
    header = next(records, None)
    if header is None:
        raise InputError(f"{name}: no header (the file is empty or blank)")
    yield header
    width = len(header[1])
    while True:
        block = lines.take(chunk_rows)
        if not block:
            return
        chunk = read_plain(block, width, lines.count + 1, len(block) < chunk_rows,
                           csv.field_size_limit(), raw.tell())
        if chunk is not None:
            lines.count += len(block)
        else:
            lines.give_back(block)
            chunk = _careful_chunk(records, name, width, chunk_rows, raw)
            if chunk is None:
                return
        yield chunk


def _careful_chunk(records, name: str, width: int, chunk_rows: int, raw) -> Optional[_Chunk]:
    """The next ``chunk_rows`` records (fewer at the end, None after it) read by the csv
    module, each checked for the header's width."""
    cells: list[list[str]] = []
    starts: list[int] = []
    for start, fields in records:
        if len(fields) != width:
            raise InputError(f"{name}, line {start}: {len(fields)} fields, the header has {width}")
        cells.append(fields)
        starts.append(start)
        if len(cells) == chunk_rows:
            break
    if not cells:
        return None
    return _Chunk(_as_cells(cells, width), starts, raw.tell())


def _records(reader, lines: _Lines, name: str) -> Iterator[tuple[int, list[str]]]:
    """Yield ``(first_line, fields)`` for each non-blank record, with errors as InputError."""
    while True:
        before = lines.count
        try:
            fields = next(reader)
        except StopIteration:
            return
        except UnicodeDecodeError:
            raise InputError(f"{name}, line {lines.count + 1}: not valid UTF-8 text") from None
        except csv.Error as exc:
            raise InputError(f"{name}, line {before + 1}: {_csv_problem(exc)}") from None
        if fields:
            yield before + 1, fields


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


def _is_number(cell: str) -> bool:
    """Whether ``float`` reads the cell (the test the first-filled-cell rule applies)."""
    try:
        float(cell)
    except ValueError:
        return False
    return True


class _Plan:
    """The column roles of one file and the values gathered for them so far.

    Every column other than the id and labels is a feature (its values in ``floats``, NaN for an
    empty cell), metadata (its text in ``texts``) or, under the first-filled-cell rule, pending:
    every cell so far is blank, its text is kept in ``texts`` until a filled cell decides.
    """

    def __init__(self, name, header, id_column, labels_column, features, meta, missing,
                 expected_features):
        self.name = name
        self.header_line, fields = header
        self.columns = [column.strip() for column in fields]
        self._check_header()
        self.id_index = self._find(id_column, "id")
        self.labels_index = None if labels_column is None else self._find(labels_column, "labels")
        if self.labels_index == self.id_index:
            raise InputError(f"{name}: the labels column cannot also be the id column")
        self.n_rows = 0
        self.first_line = 0
        self.keys: list[str] = []
        self.key_lines: dict[str, int] = {}
        self.labels: list[Optional[str]] = []
        self.rule = "first-filled-cell"
        self.features: list[int] = []
        self.pending: list[int] = []
        self.floats: dict[int, list[np.ndarray]] = {}
        self.texts: dict[int, list[str]] = {}
        self.first_filled: dict[int, tuple[int, str]] = {}
        self.first_blank: dict[int, int] = {}
        self.missing = missing
        self._settled = False
        self.expected = None
        if expected_features is not None:
            self.expected = [column.strip() for column in expected_features]
        self._choose(features, meta)

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

    def _choose(self, features, meta):
        """Fix the rule that splits the columns: ``self.rule``, the feature, metadata and
        pending columns."""
        if features is not None and meta is not None:
            raise InputError(
                f"{self.name}: name either the feature columns (--features) or the metadata "
                "columns (--meta), not both"
            )
        if features is not None:
            self.rule = "features"
            self.features = self._named(features, "feature")
            if not self.features:
                raise InputError(f"{self.name}: no features requested")
            metadata = [j for j in self._others() if j not in self.features]
        elif meta is not None:
            self.rule = "meta"
            metadata = self._named(meta, "metadata")
            self.features = [j for j in self._others() if j not in metadata]
        else:
            self.pending = self._others()
            metadata = self.pending
        self.floats = {j: [] for j in self.features}
        self.texts = {j: [] for j in metadata}

    def _named(self, names, role: str) -> list[int]:
        """Column indices of ``names`` (a --features or --meta list), in the order given."""
        if isinstance(names, str):
            raise TypeError(f"{role} columns must be a sequence of column names, not a str")
        noun = "a feature" if role == "feature" else "metadata"
        indices: list[int] = []
        for column in names:
            index = self._find(column, role)
            if index == self.id_index or index == self.labels_index:
                which = "id" if index == self.id_index else "labels"
                raise InputError(f"{self.name}: {_show(column)} is the {which} column, not {noun}")
            if index in indices:
                what = "feature" if role == "feature" else "metadata column"
                raise InputError(f"{self.name}: {what} {_show(column)} is requested twice")
            indices.append(index)
        return indices

    def add(self, chunk: _Chunk):
        """Check and keep one chunk's ids, labels, numbers and text."""
        if self.n_rows == 0:
            self.first_line = chunk.lines[0]
        if self.pending:
            self._decide(chunk)
        self._add_keys(chunk)
        if self.labels_index is not None:
            self.labels.extend(cell.strip() or None for cell in chunk.texts(self.labels_index))
        self._add_numbers(chunk)
        for j, texts in self.texts.items():
            texts.extend(chunk.texts(j))
        self.n_rows += len(chunk.lines)

    def _decide(self, chunk: _Chunk):
        """Give each pending column whose first filled cell is in this chunk its role."""
        for j in list(self.pending):
            found = chunk.first_filled(j)
            if found is None:
                continue
            row, cell = found
            self.first_filled[j] = (chunk.lines[row], cell)
            self.pending.remove(j)
            if _is_number(cell):
                del self.texts[j]
                self.features.append(j)
                self.floats[j] = [np.full(self.n_rows, np.nan)]
                if self.n_rows:
                    self.first_blank[j] = self.first_line

    def _add_keys(self, chunk: _Chunk):
        cells = chunk.texts(self.id_index)
        keys = [cell.strip() for cell in cells]
        fresh = dict(zip(keys, chunk.lines))
        if len(fresh) < len(keys) or "" in fresh or not self.key_lines.keys().isdisjoint(fresh):
            self._raise_for_keys(chunk.lines, cells)
        self.key_lines.update(fresh)
        self.keys.extend(keys)

    def _raise_for_keys(self, lines, cells: list[str]):
        """Raise for the first of these rows whose id is empty or seen before (one is)."""
        seen: dict[str, int] = {}
        for line, cell in zip(lines, cells):
            key = cell.strip()
            if not key:
                self._raise_cell(line, self.id_index, cell, "empty id")
            first = self.key_lines.get(key) or seen.setdefault(key, line)
            if first != line:
                raise InputError(
                    f"{self.name}, lines {first} and {line}, column "
                    f"{_show(self.columns[self.id_index])}: duplicate id {_show(key)}"
                )
        raise AssertionError("no empty or repeated id among the rows")

    def _add_numbers(self, chunk: _Chunk):
        """Convert the chunk's feature cells; raise for the earliest cell that breaks a rule."""
        bad: list[tuple[int, int, str, str]] = []
        converted = chunk.numbers(self.features, _to_floats)
        for j in self.features:
            if j in converted:
                self.floats[j].append(converted[j])
                continue
            values, blank, problem = _to_floats(chunk.column(j))
            if blank is not None:
                self.first_blank.setdefault(j, chunk.lines[blank])
            if problem is None:
                self.floats[j].append(values)
            else:
                row, cell, reason = problem
                bad.append((chunk.lines[row], j, cell, reason))
        if self.missing == "error":
            bad.extend((line, j, "", "empty cell") for j, line in self.first_blank.items())
        if bad:
            self._raise_cell(*min(bad))

    def _raise_cell(self, line: int, j: int, cell: str, reason: str):
        """Raise the InputError for one bad cell: an "empty id", or a feature cell that is an
        "empty cell", "not a number" or "not finite"."""
        if reason == "empty id":
            problem = "empty id"
        elif reason == "empty cell":
            problem = (
                "empty cell in a feature column (use --missing drop-row or --missing median, "
                f"or {self._as_text(j)})"
            )
        else:
            kind = "a number" if reason == "not a number" else "a finite number"
            why = ""
            if j in self.first_filled and reason == "not a number":
                why = f"its first filled cell, line {self.first_filled[j][0]}, is a number; "
            problem = (
                f"{_show(cell)} is not {kind} in a feature column "
                f"({why}{self._as_text(j, verb=True)} to keep the column as text)"
            )
        raise InputError(f"{self.name}, line {line}, column {_show(self.columns[j])}: {problem}")

    def _as_text(self, j: int, verb: bool = False) -> str:
        """How the user makes feature column j metadata, under the rule in force."""
        column = _option_value(self.columns[j])
        if self.rule == "features":
            return f"leave {column} out of --features"
        if self.rule == "meta":
            return f"add {column} to --meta"
        return f"use --meta {column}" if verb else f"--meta {column}"

    def _check_expected(self):
        """Refuse a file whose feature columns differ from the store's, saying which and why."""
        if self.expected is None:
            return
        chosen = {self.columns[j] for j in self.features}
        reasons = []
        absent = [column for column in self.expected if column not in self.columns]
        if absent:
            what = "feature" if len(absent) == 1 else "features"
            verb = "is" if len(absent) == 1 else "are"
            reasons.append(f"the store's {what} {_list_columns(absent)} {verb} not in the file")
        extra = [self.columns[j] for j in sorted(self.features)
                 if self.columns[j] not in self.expected]
        if extra:
            what = "is a feature" if len(extra) == 1 else "are features"
            reasons.append(f"{_list_columns(extra)} {what} in the file but not in the store")
        unused = [column for column in self.expected
                  if column in self.columns and column not in chosen]
        reasons += [self._not_a_feature(self.columns.index(column))
                    for column in unused[:_SHOWN_EXPLANATIONS]]
        if len(unused) > _SHOWN_EXPLANATIONS:
            reasons.append(f"and {len(unused) - _SHOWN_EXPLANATIONS} more columns that are "
                           "not features here")
        if reasons:
            raise InputError(
                f"{self.name}: the feature columns differ from the store's: {'; '.join(reasons)}"
            )

    def _not_a_feature(self, j: int) -> str:
        """Why column j of the file, a feature of the store, is not a feature here."""
        column = f"column {_show(self.columns[j])}"
        if j == self.id_index:
            return f"{column} is the id column"
        if j == self.labels_index:
            return f"{column} is the labels column"
        if self.rule == "features":
            return f"{column} is in the file but not named by --features"
        if self.rule == "meta":
            return f"{column} is in the file but named by --meta"
        if j not in self.first_filled:
            return f"{column} is in the file but has no filled cell"
        line, cell = self.first_filled[j]
        return (f"{column} is in the file but its first filled cell, line {line}, is "
                f"{_show(cell)}, not a number")

    def finish(self) -> CandidateTable:
        """Settle the columns still pending (all blank: metadata), compare the features with
        the store's (only now, so that the file's own faults are reported first), apply the
        treatment of empty cells and assemble the table."""
        return self.drain(final=True)

    def drain(self, final: bool = False) -> Optional[CandidateTable]:
        """The rows gathered since the last drain as a table, and forget them; None while a
        column's role is undecided or the treatment needs the whole file ("median"), unless
        ``final``. Its ``missing`` counts every part so far; the final part's is the file's."""
        if not final and (self.pending or self.missing == "median"):
            return None
        if final:
            self.pending = []
        if not self._settled:
            self._check_expected()
            self._order = self._feature_order()
            self._names = [self.columns[j] for j in self._order]
            self._summary = MissingCells(self.missing)
            self._settled = True
        order, names, missing = self._order, self._names, self._summary
        n_part = len(self.keys)
        X = np.empty((n_part, len(order)), dtype=np.float64)
        for position, j in enumerate(order):
            if n_part:
                X[:, position] = np.concatenate(self.floats[j])
            self.floats[j] = []
        counts = np.count_nonzero(np.isnan(X), axis=0)
        for name, n in zip(names, counts):
            if n:
                missing.per_column[name] = missing.per_column.get(name, 0) + int(n)
        keep = None
        if self.missing == "median":
            missing.filled_with = self._fill_medians(X, names, counts)
        elif self.missing == "drop-row" and counts.any():
            keep = ~np.isnan(X).any(axis=1)
            X = X[keep]
            missing.dropped_rows += n_part - len(X)
            missing.first_dropped_line = min(self.first_blank.values())
        if final and self.missing == "drop-row" and missing.dropped_rows == self.n_rows:
            raise InputError(
                f"{self.name}: every row has an empty feature cell, so --missing drop-row "
                "leaves nothing to import"
            )
        meta_indices = sorted(self.texts)
        meta_columns = [self.columns[j] for j in meta_indices]
        if meta_indices:
            rows = zip(*(self.texts[j] for j in meta_indices))
            meta = [dict(zip(meta_columns, row)) for row in _kept(rows, keep)]
        else:
            meta = [{} for _ in range(len(X))]
        table = CandidateTable(
            keys=list(_kept(self.keys, keep)),
            X=X,
            feature_names=list(names),
            meta=meta,
            meta_columns=meta_columns,
            labels=list(_kept(self.labels, keep)) if self.labels_index is not None else None,
            n_rows=len(X),
            feature_rule=self.rule,
            missing=missing,
        )
        self.keys, self.labels = [], []
        self.texts = {j: [] for j in self.texts}
        return table

    def _fill_medians(self, X: np.ndarray, names: list[str], counts: np.ndarray) -> dict:
        """Fill the empty (NaN) cells of each column of X with the median of its filled cells."""
        filled: dict[str, float] = {}
        for position in np.flatnonzero(counts):
            column = X[:, position]
            blank = np.isnan(column)
            if blank.all():
                raise InputError(
                    f"{self.name}, column {_show(names[position])}: every cell is empty, so "
                    "--missing median has no median to fill with"
                )
            value = _median(column[~blank])
            column[blank] = value
            filled[names[position]] = value
        return filled

    def _feature_order(self) -> list[int]:
        if not self.features:
            if self.rule == "meta":
                why = "--meta names every column other than the id and labels"
            else:
                why = ("no column other than the id and labels has a number as its first filled "
                       "cell; name them with --features")
            raise InputError(f"{self.name}: no feature columns ({why})")
        if self.expected is not None:
            return [self.columns.index(column) for column in self.expected]
        return list(self.features) if self.rule == "features" else sorted(self.features)


def _kept(items, keep: Optional[np.ndarray]) -> Iterator:
    """The items whose entry in ``keep`` is True; all of them when ``keep`` is None."""
    return iter(items) if keep is None else itertools.compress(items, keep)


def _median(values: np.ndarray) -> float:
    """The median of ``values`` (m,), m >= 1: the middle value, or the mean of the two middle
    values, halved before adding when their sum would overflow."""
    half = len(values) // 2
    if len(values) % 2:
        return float(np.partition(values, half)[half])
    low, high = (float(v) for v in np.partition(values, [half - 1, half])[[half - 1, half]])
    middle = (low + high) / 2
    return middle if math.isfinite(middle) else low / 2 + high / 2


def _to_floats(cells: np.ndarray):
    """Convert an object column of str to float64, blank cells to NaN.

    Returns ``(values, blank, problem)``: ``values`` (m,), or None when some filled cell is bad;
    ``blank`` the row of the first blank cell, or None; ``problem`` None or ``(row, cell,
    reason)`` for the first filled cell that is "not a number" or "not finite".
    """
    blank = None
    try:
        values = cells.astype(np.float64)
    except ValueError:
        blank = np.fromiter((not cell.strip() for cell in cells), dtype=bool, count=len(cells))
        values = np.full(len(cells), np.nan)
        try:
            values[~blank] = cells[~blank].astype(np.float64)
        except ValueError:
            return None, _first(blank), _first_bad(cells, blank)
    bad = ~np.isfinite(values) if blank is None else ~(np.isfinite(values) | blank)
    if bad.any():
        row = int(np.argmax(bad))
        return None, _first(blank), (row, cells[row], "not finite")
    return values, _first(blank), None


def _first(mask: Optional[np.ndarray]) -> Optional[int]:
    """The first True row of ``mask``, or None."""
    if mask is None or not mask.any():
        return None
    return int(np.argmax(mask))


def _first_bad(cells: np.ndarray, blank: np.ndarray) -> tuple[int, str, str]:
    """``(row, cell, reason)``: the first filled cell that ``float`` rejects or finds infinite."""
    for row, cell in enumerate(cells):
        if blank[row]:
            continue
        try:
            number = float(cell)
        except ValueError:
            return row, cell, "not a number"
        if not math.isfinite(number):
            return row, cell, "not finite"
    raise AssertionError("NumPy rejected a column that float() accepts")
