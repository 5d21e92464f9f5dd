"""PNG charts with matplotlib (the optional ``[plot]`` extra), drawn off-screen with Agg."""

from typing import Mapping, Sequence, Tuple

from labelq.errors import LabelqError


class PlotUnavailableError(LabelqError):
    """matplotlib, needed for PNG charts, is not installed."""


class PlotWriteError(LabelqError):
    """The PNG file cannot be written where the user asked."""


def _save(fig, path) -> None:
    try:
        fig.savefig(path, format="png")
    except OSError as exc:
        raise PlotWriteError(f"cannot write {path}: {exc.strerror or exc}") from None


def write_png(
    path,
    series: Mapping[str, Tuple[Sequence[float], Sequence[float]]],
    title: str,
    x_label: str,
    y_label: str,
) -> None:
    """Write the same series as :func:`labelq.review.render_chart` to a PNG file at ``path``.

    Uses matplotlib's Agg canvas directly, so no display and no global pyplot state is touched.
    Raises PlotUnavailableError when matplotlib cannot be imported.
    """
    try:
        import matplotlib  # noqa: F401  (import the package first so a blocked install is caught)
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
    except ImportError:
        raise PlotUnavailableError(
            "plotting needs matplotlib: pip install 'labelq[plot]'"
        ) from None
    fig = Figure(figsize=(7.0, 4.0), dpi=100)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    for name, (xs, ys) in series.items():
        ax.plot(list(xs), list(ys), marker="o", markersize=2.5, linewidth=1.2, label=name)
    ax.set_title(title)
    ax.set_xlabel(x_label)
    ax.set_ylabel(y_label)
    ax.grid(True, alpha=0.3)
    if series:
        ax.legend(loc="best", frameon=False)
    fig.tight_layout()
    _save(fig, path)


def write_panels_png(path, panels, title: str, x_label: str) -> None:
    """Write one panel per (name, xs, ys) in ``panels``, stacked with a shared x axis and each on
    its own y scale (quantities of different scales never share an axis)."""
    fig, _ = _panels_figure(panels, title, x_label)
    fig.tight_layout()
    _save(fig, path)


def write_dated_panels_png(path, panels, title: str, x_label: str,
                           whole_days: bool = False) -> None:
    """:func:`write_panels_png` for panels whose xs are dates or naive datetimes (wall-clock
    time, drawn as given): the x axis is labelled with dates by matplotlib's
    ConciseDateFormatter; with ``whole_days`` (one point per calendar day) the ticks fall on
    days only, never between them."""
    fig, axes = _panels_figure(panels, title, x_label)
    from matplotlib.dates import AutoDateLocator, ConciseDateFormatter, DayLocator

    days = [x for _, xs, _ in panels for x in xs]
    span = (max(days) - min(days)).days + 1 if days else 1
    if whole_days and span <= 62:  # longer spans: the automatic choice is days or months anyway
        locator = DayLocator(interval=max(1, -(-span // 8)))
    else:
        locator = AutoDateLocator(minticks=3, maxticks=8)
    axes[-1].xaxis.set_major_locator(locator)
    axes[-1].xaxis.set_major_formatter(ConciseDateFormatter(locator))
    fig.tight_layout()
    _save(fig, path)


def _panels_figure(panels, title: str, x_label: str):
    """The figure of :func:`write_panels_png` and its axes, top to bottom (not yet laid out
    or saved)."""
    try:
        import matplotlib  # noqa: F401
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
    except ImportError:
        raise PlotUnavailableError(
            "plotting needs matplotlib: pip install 'labelq[plot]'"
        ) from None
    fig = Figure(figsize=(7.0, 2.2 * max(len(panels), 1) + 0.8), dpi=100)
    FigureCanvasAgg(fig)
    axes = fig.subplots(max(len(panels), 1), 1, sharex=True, squeeze=False)[:, 0]
    for ax, (name, xs, ys) in zip(axes, panels):
        ax.plot(list(xs), list(ys), marker="o", markersize=2.5, linewidth=1.2)
        ax.set_ylabel(name)
        ax.grid(True, alpha=0.3)
    axes[0].set_title(title)
    axes[-1].set_xlabel(x_label)
    return fig, axes


def agg_figure(width_px: int, height_px: int, dpi: int = 100):
    """A matplotlib Figure of exactly ``width_px`` x ``height_px`` pixels when saved at ``dpi``,
    drawn on its own Agg canvas (no display, no pyplot state). Raises PlotUnavailableError when
    matplotlib cannot be imported."""
    try:
        import matplotlib  # noqa: F401  (import the package first so a blocked install is caught)
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
    except ImportError:
        raise PlotUnavailableError(
            "plotting needs matplotlib: pip install 'labelq[plot]'"
        ) from None
    fig = Figure(figsize=(width_px / dpi, height_px / dpi), dpi=dpi)
    FigureCanvasAgg(fig)
    return fig
