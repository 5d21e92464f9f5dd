"""The fast reader of :mod:`labelq.ingest`: plain chunks of a candidate CSV file, read with NumPy.

A block of lines is *plain* when the csv module would read each line as one record whose fields
are the line split at every comma: it holds no double quote (the only character that RFC 4180,
section 2, gives a meaning inside a field), no NUL, no carriage return except in CRLF line ends,
no blank line (except at the end of the file), no line longer than the csv field limit, only
UTF-8 text, and every line has the header's number of fields. :func:`read_plain` finds the fields
of such a block with NumPy and returns a :class:`PlainChunk`, or None for any other block, which
ingest then reads with the csv module as before.

A plain chunk converts its feature columns with :func:`decimal_values`, a vectorised parser of
plain decimals (``-12.5``, ``0.000123``, ``7``) that gives exactly the double ``float`` gives, or
says that it cannot be sure of a cell; those cells go through ingest's own conversion, and a
column with a cell that conversion rejects (blank, not a number, not finite) is handed back whole,
so that every message about a bad cell comes from ingest's careful code.
"""

from __future__ import annotations

import sys
from typing import Callable, Optional

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

__all__ = ["PlainChunk", "decimal_values", "read_plain"]

WINDOW = 24
"""Longest cell :func:`decimal_values` converts itself, in bytes (three 64-bit words)."""

GROUP = 1 << 14
"""Cells converted per NumPy pass: the temporaries stay small enough to be reused."""

_COMMA, _NEWLINE, _RETURN, _MINUS, _PLUS = 44, 10, 13, 45, 43
_U = np.uint64


def _bytes_of(value: int) -> np.uint64:
    """A 64-bit word holding ``value`` in each of its eight bytes."""
    return _U(value * 0x0101010101010101)


_ZERO = _bytes_of(0x30)  # "0"
_LOW7 = _bytes_of(0x7F)
_HIGH = _bytes_of(0x80)
_TEN_UP = _bytes_of(0x76)  # 0x76 + (b & 0x7F) reaches 0x80 exactly when b & 0x7F >= 10
_POINT = _bytes_of(0x2E ^ 0x30)  # "." after the xor with "0"
_GATHER = _U(0x0102040810204080)  # moves the top bit of byte i to bit 56 + i
_PAIRS = _U(0x000000FF000000FF)
_HUNDREDS = _U(100 + (1_000_000 << 32))
_UNITS = _U(1 + (10_000 << 32))
_TEN_16 = _U(10**16)
_TEN_8 = _U(10**8)

_KEEP = np.array(
    [[sum(0xFF << (8 * b) for b in range(8) if 8 * word + b >= cut) for word in range(3)]
     for cut in range(WINDOW + 1)],
    dtype=np.uint64,
)
"""``_KEEP[c]``: the three words of a window with 0xFF in each byte at or after position c."""

_TENS_U64 = np.array([10**k for k in range(20)], dtype=np.uint64)
_TENS_F64 = 10.0 ** np.arange(23)  # exact: 5**22 < 2**53


def _extended_tens() -> np.ndarray:
    powers = [np.longdouble(1)]
    for _ in range(WINDOW):
        powers.append(powers[-1] * np.longdouble(10))  # exact: 5**24 < 2**64
    return np.array(powers, dtype=np.longdouble)


_TENS_EXTENDED = _extended_tens()


def _has_x87_extended() -> bool:
    """Whether NumPy's longdouble is the x87 80-bit format (64-bit significand stored in the
    first eight bytes of 16, little-endian) and divides at that precision right now."""
    if (sys.byteorder != "little" or np.finfo(np.longdouble).nmant != 63
            or np.dtype(np.longdouble).itemsize != 16):
        return False
    third = np.array([np.longdouble(1) / np.longdouble(3)])
    return int(third.view(np.uint64)[0]) == 0xAAAAAAAAAAAAAAAB  # 1/3 to 64 bits, rounded up


def decimal_values(buf: np.ndarray, starts: np.ndarray, ends: np.ndarray,
                   extended: Optional[bool] = None) -> tuple[np.ndarray, np.ndarray]:
    """Convert plain decimal cells to float64 as ``float`` does, where that can be made certain.

    ``buf`` is a uint8 array holding :data:`WINDOW` bytes of padding and then the text;
    ``starts`` and ``ends`` (n,) are each cell's first and one-past-last byte in the text (after
    the padding). Returns ``(values, sure)``, both (n,): ``sure`` marks the cells that are an
    optional sign ("-" or "+") and then digits with at most one "." (at least one digit), at
    most :data:`WINDOW` bytes, with at most 19 digits and point from the first non-zero digit
    on, and whose double is certain; ``values`` holds their doubles (other entries are
    meaningless).

    The cell's digits, read as one integer w < 10**19, and the count m of digits after the
    point give the exact value x = w / 10**m, which is 0 or between 10**-23 and 10**19, where
    every double and every midpoint between two doubles is normal. With ``extended`` (the
    default where :func:`_has_x87_extended`), r = w / 10**m is computed in x87 extended
    precision: w and 10**m (m <= 23, 5**23 < 2**64) are exact there and the division is
    correctly rounded, so r is the 64-bit number nearest x. Every midpoint between two doubles
    has 54 significant bits, so it is such a number too, and none lies strictly between x and
    r; if r is not itself a midpoint (its last 11 bits are not 10000000000), x and r round to
    the same double, which is x correctly rounded, as ``float`` gives it. This is the usual
    argument about double rounding (Muller et al., Handbook of Floating-Point Arithmetic, 2010,
    sec. 3.2; from memory); about one cell in 2048 is a midpoint and not sure. Without extended
    precision only Clinger's exact case is sure: w < 2**53 and m <= 22, where w and 10**m are
    exact doubles and one IEEE 754 division rounds correctly (Clinger, "How to read floating
    point numbers accurately", PLDI 1990).
    """
    if extended is None:
        extended = _has_x87_extended()
    length = ends - starts
    first = buf[starts + WINDOW]
    negative = first == _MINUS
    signed = negative | (first == _PLUS)
    cut = WINDOW - length + signed  # bytes of the window before the cell's first digit or point
    fits = cut >= 0
    np.clip(cut, 0, WINDOW, out=cut)
    # The WINDOW bytes that end where the cell ends, as three little-endian words (byte 0 first).
    # After the xor with "0" a digit byte holds its value; bytes before the cell are set to 0.
    window = sliding_window_view(buf, WINDOW)[ends]
    y = window.view("<u8")
    y ^= _ZERO
    y &= np.take(_KEEP, cut, axis=0)
    # Bytes that are not 0..9 get their top bit set (no carries: each byte stays below 0x100);
    # the point is the byte that equals "." ^ "0", found with the exact zero-byte test.
    other = (((y & _LOW7) + _TEN_UP) | y) & _HIGH
    point = y ^ _POINT
    point = ~((((point & _LOW7) + _LOW7) | point) | _LOW7)
    other ^= point
    sure = (other[:, 0] | other[:, 1] | other[:, 2]) == 0  # no byte but the point is not 0..9
    point >>= _U(7)
    y ^= point * _U(0x2E ^ 0x30)  # the point counts as a digit 0 from here on
    marks = (point * _GATHER) >> _U(56)  # (n, 3): bit i set where byte i of the word is "."
    points = marks[:, 0] | (marks[:, 1] << _U(8)) | (marks[:, 2] << _U(16))
    one_point = (points & (points - _U(1))) == 0
    has_point = points != 0
    sure &= fits & one_point & (length - signed - has_point >= 1)
    # m = digits after the point; frexp of a power of two 2**i gives exponent i + 1 (exact).
    after = (WINDOW - np.frexp(points.astype(np.float64))[1]).astype(np.int64)
    after[~has_point] = 0
    # Eight digits per word at once (Lemire, "Number parsing at a gigabyte per second",
    # Software: Practice and Experience 51(8), 2021, sec. 6; from memory): pairs, then quads.
    y = y * _U(10) + (y >> _U(8))
    eights = (((y & _PAIRS) * _HUNDREDS) + (((y >> _U(16)) & _PAIRS) * _UNITS)) >> _U(32)
    sure &= eights[:, 0] < 1000  # at most 19 digits after leading zeros: below 10**19 < 2**64
    digits = eights[:, 0] * _TEN_16 + eights[:, 1] * _TEN_8 + eights[:, 2]
    # The point counted as a digit 0 between the integer part I and the m fraction digits F:
    # digits = I * 10**(m + 1) + F, and the decimal's digits are w = I * 10**m + F.
    fraction = digits % _TENS_U64[np.minimum(after, 19)]
    w = (digits - fraction) // _U(10) + fraction
    np.copyto(w, digits, where=~has_point)
    if extended:
        r = w.astype(np.longdouble) / _TENS_EXTENDED[after]
        values = r.astype(np.float64)
        sure &= (r.view(np.uint64)[::2] & _U(0x7FF)) != _U(0x400)  # r is not a midpoint
    else:
        values = w.astype(np.float64) / _TENS_F64[np.minimum(after, 22)]
        sure &= (w < _U(2**53)) & (after <= 22)
    values.view(np.uint64)[:] |= negative.astype(np.uint64) << _U(63)  # the sign bit
    return values, sure


class PlainChunk:
    """Up to ``chunk_rows`` records of a plain block, one per line, with the fields located.

    Offers what ingest's plan reads of a chunk: ``lines`` (each record's line number),
    ``bytes_done``, ``texts(j)`` (column j as a list of str), ``column(j)`` (as an object array),
    ``first_filled(j)`` and ``numbers(columns, careful)``.
    """

    def __init__(self, data: bytes, starts: np.ndarray, ends: np.ndarray, first_line: int,
                 bytes_done: int):
        self.lines = range(first_line, first_line + len(starts))
        self.bytes_done = bytes_done
        self._data = data
        self._starts = starts
        self._ends = ends
        self._text = data.decode("ascii") if data.isascii() else None

    def _cell(self, row: int, j: int) -> str:
        start, end = int(self._starts[row, j]), int(self._ends[row, j])
        if self._text is not None:
            return self._text[start:end]
        return self._data[start:end].decode("utf-8")

    def texts(self, j: int) -> list[str]:
        """Column j's cells, as the csv module would give them."""
        bounds = zip(self._starts[:, j].tolist(), self._ends[:, j].tolist())
        if self._text is not None:
            text = self._text
            return [text[start:end] for start, end in bounds]
        data = self._data
        return [data[start:end].decode("utf-8") for start, end in bounds]

    def column(self, j: int) -> np.ndarray:
        """Column j's cells as an object array of str."""
        cells = np.empty(len(self.lines), dtype=object)
        cells[:] = self.texts(j)
        return cells

    def first_filled(self, j: int) -> Optional[tuple[int, str]]:
        """``(row, cell)`` of column j's first cell that is not blank, or None."""
        for row in range(len(self.lines)):
            cell = self._cell(row, j)
            if cell.strip():
                return row, cell
        return None

    def numbers(self, columns: list[int],
                careful: Callable[[np.ndarray], tuple]) -> dict[int, np.ndarray]:
        """``{j: values (m,)}`` for each of ``columns`` whose every cell is a finite number.

        Cells :func:`decimal_values` is not sure of go through ``careful`` (ingest's conversion of
        an object array, returning ``(values, blank_row, problem)``); a column where it finds a
        blank or bad cell is left out, for ingest to read cell by cell.
        """
        if not columns:
            return {}
        rows = len(self.lines)
        padded = np.frombuffer(bytes(WINDOW) + self._data, dtype=np.uint8)
        # cells in file order, so that each pass reads the text once, front to back
        starts = self._starts[:, columns].ravel()
        ends = self._ends[:, columns].ravel()
        values = np.empty(len(starts))
        sure = np.empty(len(starts), dtype=bool)
        extended = _has_x87_extended()
        for at in range(0, len(starts), GROUP):
            part = slice(at, at + GROUP)
            values[part], sure[part] = decimal_values(padded, starts[part], ends[part], extended)
        values = values.reshape(rows, len(columns)).T.copy()  # (columns, rows)
        unsure = np.flatnonzero(~sure)
        failed = set()
        for position in np.unique(unsure % len(columns)).tolist():
            j = columns[position]
            rows_unsure = unsure[unsure % len(columns) == position] // len(columns)
            if 4 * len(rows_unsure) > rows:  # much of the column (exponents, say): take it all
                cells, rows_unsure = self.column(j), slice(None)
            else:
                cells = np.empty(len(rows_unsure), dtype=object)
                cells[:] = [self._cell(row, j) for row in rows_unsure.tolist()]
            checked, blank, _ = careful(cells)
            if checked is None or blank is not None:
                failed.add(j)
            else:
                values[position, rows_unsure] = checked
        return {j: values[position] for position, j in enumerate(columns) if j not in failed}


def read_plain(block: list[bytes], width: int, first_line: int, at_end: bool,
               field_limit: int, bytes_done: int) -> Optional[PlainChunk]:
    """The block of raw lines as a :class:`PlainChunk`, or None unless it is plain (see the
    module docstring) for a header of ``width`` fields and the csv module's ``field_limit``.
    ``first_line`` is the line number of its first line and ``bytes_done`` the file position
    after it; ``at_end`` says that the file ends with it, so that blank lines at its end are
    left out (the csv module skips them)."""
    if at_end:
        while block and block[-1] in (b"\n", b"\r\n"):
            block = block[:-1]
    if not block or max(map(len, block)) > field_limit:
        return None
    data = b"".join(block)
    if b'"' in data:  # checked first: a file that quotes its fields is never plain
        return None
    if not data.endswith(b"\n"):
        data += b"\n"
    if not data.isascii():
        try:
            data.decode("utf-8")
        except UnicodeDecodeError:
            return None
    text = np.frombuffer(data, dtype=np.uint8)
    marks = np.flatnonzero(text <= _COMMA)  # every ",", "\n" and "\r", and any byte below ","
    kinds = text[marks]
    if (kinds == 0).any():  # NUL
        return None
    wanted = (kinds == _COMMA) | (kinds == _NEWLINE) | (kinds == _RETURN)
    if not wanted.all():
        marks, kinds = marks[wanted], kinds[wanted]
    newlines = marks[kinds == _NEWLINE]  # one per line
    returns = np.flatnonzero(kinds == _RETURN)
    if len(returns):
        # a carriage return must end its line: the next mark is the "\n" right after it,
        # which is dropped so that the "\r" ends the line's last field
        after = returns + 1
        if not ((kinds[after] == _NEWLINE) & (marks[after] == marks[returns] + 1)).all():
            return None
        keep = np.ones(len(marks), dtype=bool)
        keep[after] = False
        marks, kinds = marks[keep], kinds[keep]
    rows = len(block)
    if len(marks) != rows * width:
        return None
    # Each line has one end mark; the last mark of every row of width is an end mark exactly
    # when every line has width - 1 commas (so no line is blank unless width is 1).
    ends = marks.reshape(rows, width)
    last = kinds.reshape(rows, width)[:, -1]
    if not ((last == _NEWLINE) | (last == _RETURN)).all():
        return None
    starts = np.empty_like(ends)
    starts[:, 1:] = ends[:, :-1] + 1
    starts[0, 0] = 0
    starts[1:, 0] = newlines[:-1] + 1
    if width == 1 and (ends[:, 0] == starts[:, 0]).any():
        return None  # a blank line
    return PlainChunk(data, starts, ends, first_line, bytes_done)
