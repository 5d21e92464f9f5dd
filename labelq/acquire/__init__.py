"""Acquisition: turn a GP classifier's predictive into a ranked queue of candidates to label.

Pure NumPy; imports nothing of labelq but :mod:`labelq.gp`. Entropies and BALD are in bits.
"""

from labelq.acquire.bald import bald_bits
from labelq.acquire.batch import select_batch
from labelq.acquire.coldstart import TypicalPicks, cold_start, typical_start
from labelq.acquire.entropy import entropy_bits
from labelq.acquire.margin import margin
from labelq.acquire.ranking import rank_order
from labelq.acquire.scores import STRATEGIES, display_score, priority

__all__ = [
    "STRATEGIES",
    "TypicalPicks",
    "bald_bits",
    "cold_start",
    "display_score",
    "entropy_bits",
    "margin",
    "priority",
    "rank_order",
    "select_batch",
    "typical_start",
]
