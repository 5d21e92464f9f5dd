"""Acquisition: turn a GP classifier's predictive into a ranked queue of candidates to label.

Pure NumPy; imports nothing of labelq but :mod:`labelq.gp`. Entropies and BALD are in bits.
"""

from labelq.lazy import lazy_exports

_WHERE = {
    "STRATEGIES": "labelq.acquire.names",
    "TypicalPicks": "labelq.acquire.coldstart",
    "bald_bits": "labelq.acquire.bald",
    "cold_start": "labelq.acquire.coldstart",
    "display_score": "labelq.acquire.scores",
    "entropy_bits": "labelq.acquire.entropy",
    "margin": "labelq.acquire.margins",
    "priority": "labelq.acquire.scores",
    "rank_order": "labelq.acquire.ranking",
    "select_batch": "labelq.acquire.batch",
    "typical_start": "labelq.acquire.coldstart",
}
"""Where each public name lives; imported on first use (labelq.lazy)."""

__all__ = sorted(_WHERE)


__getattr__, __dir__ = lazy_exports(__name__, _WHERE)
