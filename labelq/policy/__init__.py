"""The fit policy: how a fit is made from labels and how the pool is ranked, store-free.

One decision, one place: the label loop (labelq.loop.refit), the replay (labelq.review.replay)
and the rebuild all call these functions with one `PolicySettings`, recorded with every fit.
- `fit_labels` (fitting.py): grid average of hyperparameters while labels are few, hand-over to
  learnt hyperparameters when the evidence concentrates, relearning on a schedule;
- `score_pool` (scoring.py): probabilities and the strategy's priority for every candidate;
- `rank_pool` (queue.py): the head of the queue (cold start or spread-out batch), then the rest,
  with the reason for each row of the head.
"""

from labelq.lazy import lazy_exports

_WHERE = {
    "FitOutcome": "labelq.policy.fitting",
    "PolicySettings": "labelq.policy.settings",
    "PoolScores": "labelq.policy.scoring",
    "Queue": "labelq.policy.queue",
    "fit_labels": "labelq.policy.fitting",
    "rank_pool": "labelq.policy.queue",
    "score_pool": "labelq.policy.scoring",
    "uniform_scores": "labelq.policy.scoring",
}
"""Where each public name lives; imported on first use (labelq.lazy)."""

__all__ = sorted(_WHERE)


__getattr__, __dir__ = lazy_exports(__name__, _WHERE)
