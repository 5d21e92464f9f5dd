"""Terminal line charts and PNG charts."""

import sys

import pytest

from labelq.review import PlotUnavailableError, render_chart, write_png

SERIES = {
    "entropy": ([4, 10, 20, 40, 64], [0.62, 0.85, 0.93, 0.95, 0.96]),
    "random": ([4, 10, 20, 40, 64], [0.62, 0.74, 0.86, 0.91, 0.94]),
}


def _assert_fits(text, width=80):
    lines = text.splitlines()
    assert lines and all(len(line) <= width for line in lines), max(map(len, lines))
    assert "\x1b" not in text  # no colour codes


@pytest.mark.parametrize("width", [30, 60, 72, 80])
def test_every_line_fits_the_width(width):
    """Common practice, no published source: terminal output stays within 80 columns."""
    _assert_fits(render_chart(SERIES, "Accuracy over the pool " * 5, "labels", "accuracy",
                              width=width), width)


def test_deterministic_with_markers_legend_and_ticks():
    """Common practice, no published source."""
    text = render_chart(SERIES, "Accuracy", "labels", "accuracy")
    assert text == render_chart(SERIES, "Accuracy", "labels", "accuracy")
    lines = text.splitlines()
    assert lines[0] == "Accuracy"
    assert lines[-1] == "* entropy   o random"
    assert "*" in text and "o" in text
    assert any(line.strip().startswith("0.96 |") for line in lines)  # top y tick
    assert any(line.strip().startswith("0.62 |") for line in lines)  # bottom y tick
    assert "64" in lines[-3] and "4" in lines[-3]  # x ticks


def test_plot_area_has_requested_height():
    """Common practice, no published source."""
    text = render_chart(SERIES, "t", "x", "y", height=7)
    assert sum("|" in line for line in text.splitlines()) == 7


def test_single_point_and_constant_series():
    """Common practice, no published source: degenerate ranges still draw."""
    one = render_chart({"only": ([5], [0.5])}, "one point", "labels", "kappa")
    flat = render_chart({"flat": ([1, 2, 3], [0.9, 0.9, 0.9])}, "flat", "labels", "kappa")
    for text in (one, flat):
        _assert_fits(text)
    assert one.count("*") == 2  # the point and its legend marker
    assert flat.count("*") > 10  # the whole line


def test_no_data():
    """Common practice, no published source."""
    assert "(no data)" in render_chart({"a": ([], [])}, "t", "x", "y")


def test_write_png_makes_a_png(tmp_path):
    """PNG signature from the PNG specification (ISO/IEC 15948, sec. 5.2)."""
    path = tmp_path / "chart.png"
    write_png(path, SERIES, "Accuracy", "labels", "accuracy")
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_write_png_without_matplotlib(tmp_path, monkeypatch):
    """Common practice, no published source: a missing optional extra is a one-line user error."""
    for name in [m for m in sys.modules if m == "matplotlib" or m.startswith("matplotlib.")]:
        monkeypatch.setitem(sys.modules, name, None)
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(PlotUnavailableError, match=r"pip install 'labelq\[plot\]'"):
        write_png(tmp_path / "x.png", SERIES, "t", "x", "y")
    assert not (tmp_path / "x.png").exists()
