"""Review layer: how the pool's uncertainty shrinks, when to stop labelling, and strategy replay.

May import ``labelq.acquire`` and ``labelq.gp``; knows nothing of the store or the CLI.
"""

from labelq.lazy import lazy_exports

_WHERE = {
    "Advice": "labelq.review.advice",
    "PlotUnavailableError": "labelq.review.png",
    "cohen_kappa": "labelq.review.kappa",
    "render_chart": "labelq.review.chart",
    "simulate": "labelq.review.replay",
    "snapshot": "labelq.review.snapshot",
    "stop_set": "labelq.review.stop_set",
    "stopping_advice": "labelq.review.advice",
    "write_png": "labelq.review.png",
}
"""Where each public name lives; imported on first use (labelq.lazy)."""

__all__ = sorted(_WHERE)


__getattr__, __dir__ = lazy_exports(__name__, _WHERE)
