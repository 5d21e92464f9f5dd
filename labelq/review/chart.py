"""Plain-text line charts for the terminal (no colour codes, at most 80 columns)."""

from typing import Mapping, Sequence, Tuple

import numpy as np

MAX_WIDTH = 80
MARKERS = "*o+x#@%&"
_TICK_WIDTH = 11  # room for the longest 4-significant-digit tick, "-1.235e+05", and a space


def _span(lo: float, hi: float) -> Tuple[float, float]:
    """Widen a degenerate range (single point, constant series) so it can be drawn."""
    if hi > lo:
        return lo, hi
    pad = abs(lo) * 0.1 or 1.0
    return lo - pad, hi + pad


def _fmt(value: float) -> str:
    return f"{value:.4g}"


def _plot_cells(xs: np.ndarray, ys: np.ndarray, x_lo, x_hi, y_lo, y_hi, cols: int, rows: int):
    """Rows and columns of the cells a series occupies: its line sampled at each column it spans."""
    col_x = x_lo + (x_hi - x_lo) * np.arange(cols) / max(cols - 1, 1)
    order = np.argsort(xs, kind="stable")
    xs, ys = xs[order], ys[order]
    point_cols = np.rint((xs - x_lo) / (x_hi - x_lo) * (cols - 1)).astype(int)
    inside = (col_x >= xs[0]) & (col_x <= xs[-1])
    line_cols = np.flatnonzero(inside)
    cols_all = np.concatenate([line_cols, point_cols])
    y_all = np.concatenate([np.interp(col_x[line_cols], xs, ys), ys])
    rows_all = np.rint((y_hi - y_all) / (y_hi - y_lo) * (rows - 1)).astype(int)
    return np.clip(rows_all, 0, rows - 1), np.clip(cols_all, 0, cols - 1)


def _x_axis(x_lo: float, x_hi: float, cols: int) -> str:
    """Tick labels under the plot at the left edge, middle and right edge."""
    line = [" "] * cols
    for frac in (0.0, 0.5, 1.0):
        text = _fmt(x_lo + frac * (x_hi - x_lo))
        centre = int(round(frac * (cols - 1)))
        start = min(max(centre - len(text) // 2, 0), cols - len(text))
        if any(ch != " " for ch in line[max(start - 1, 0):start + len(text) + 1]):
            continue
        line[start:start + len(text)] = text
    return "".join(line).rstrip()


def _legend(entries: Sequence[Tuple[str, str]], width: int) -> list:
    """'* entropy   o random' wrapped to ``width``, from (marker, name) pairs."""
    lines, current = [], ""
    for marker, name in entries:
        item = f"{marker} {name}"[:width]
        if current and len(current) + 3 + len(item) > width:
            lines.append(current)
            current = ""
        current = f"{current}   {item}" if current else item
    return lines + [current] if current else lines


def render_chart(
    series: Mapping[str, Tuple[Sequence[float], Sequence[float]]],
    title: str,
    x_label: str,
    y_label: str,
    width: int = 72,
    height: int = 12,
) -> str:
    """Draw one or more (x, y) series as a plain-text line chart.

    Each series gets one marker character (``*o+x#@%&`` in order) and a legend entry; its line is
    sampled at every character column between its first and last x, and its own points are always
    marked. Later series draw over earlier ones where they share a cell. The y axis shows ticks at
    the top, middle and bottom; the x axis at the left, middle and right. Every line is at most
    ``width`` characters; output is deterministic.

    Parameters
    ----------
    series : mapping name -> (x values, y values), equal lengths; empty series are skipped
    title, x_label, y_label : str
    width : int, total characters per line, 30..80
    height : int, rows of the plotting area, at least 3
    """
    if not 30 <= width <= MAX_WIDTH:
        raise ValueError(f"width must be between 30 and {MAX_WIDTH} characters, got {width}")
    if height < 3:
        raise ValueError(f"height must be at least 3 rows, got {height}")
    if len(series) > len(MARKERS):
        raise ValueError(f"at most {len(MARKERS)} series can be drawn, got {len(series)}")
    data = {}
    for name, (xs, ys) in series.items():
        xs, ys = np.asarray(xs, dtype=float), np.asarray(ys, dtype=float)
        if xs.shape != ys.shape or xs.ndim != 1:
            raise ValueError(f"series {name!r}: x and y must be 1-D and equally long")
        keep = np.isfinite(xs) & np.isfinite(ys)
        if keep.any():
            data[name] = (xs[keep], ys[keep])
    lines = [title[:width]]
    if not data:
        return "\n".join(lines + ["(no data)"]) + "\n"

    all_x = np.concatenate([x for x, _ in data.values()])
    all_y = np.concatenate([y for _, y in data.values()])
    x_lo, x_hi = _span(all_x.min(), all_x.max())
    y_lo, y_hi = _span(all_y.min(), all_y.max())
    cols = width - _TICK_WIDTH - 1
    grid = np.full((height, cols), " ", dtype="<U1")
    markers = dict(zip(series.keys(), MARKERS))
    for name, (xs, ys) in data.items():
        r, c = _plot_cells(xs, ys, x_lo, x_hi, y_lo, y_hi, cols, height)
        grid[r, c] = markers[name]

    mid = (height - 1) // 2
    tick_rows = {0: y_hi, mid: y_hi - (y_hi - y_lo) * mid / (height - 1), height - 1: y_lo}
    lines.append(y_label[:width])
    for i in range(height):
        tick = _fmt(tick_rows[i])[:_TICK_WIDTH - 1] if i in tick_rows else ""
        lines.append(f"{tick:>{_TICK_WIDTH - 1}} |{''.join(grid[i])}".rstrip())
    lines.append(" " * _TICK_WIDTH + "+" + "-" * cols)
    lines.append(" " * (_TICK_WIDTH + 1) + _x_axis(x_lo, x_hi, cols))
    lines.append(f"{x_label:^{width}}".rstrip()[:width])
    lines.extend(_legend([(markers[name], name) for name in data], width))
    return "\n".join(lines) + "\n"
