"""Review layer: how the pool's uncertainty shrinks, when to stop labelling, and strategy replay.

May import ``labelq.acquire`` and ``labelq.gp``; knows nothing of the store or the CLI.
"""

from labelq.review.advice import Advice, stopping_advice
from labelq.review.chart import render_chart
from labelq.review.kappa import cohen_kappa
from labelq.review.png import PlotUnavailableError, write_png
from labelq.review.replay import simulate
from labelq.review.snapshot import snapshot
from labelq.review.stop_set import stop_set

__all__ = [
    "Advice",
    "PlotUnavailableError",
    "cohen_kappa",
    "render_chart",
    "simulate",
    "snapshot",
    "stop_set",
    "stopping_advice",
    "write_png",
]
