"""The fit policy: how a fit is made from labels and how the pool is ranked, store-free.

One decision, one place: the label loop (labelq.loop.refit), the replay (labelq.review.replay)
and the rebuild all call these functions with one `PolicySettings`, recorded with every fit.
- `fit_labels` (fitting.py): grid average of hyperparameters while labels are few, hand-over to
  learnt hyperparameters when the evidence concentrates, relearning on a schedule;
- `score_pool` (scoring.py): probabilities and the strategy's priority for every candidate;
- `rank_pool` (queue.py): the head of the queue (cold start or spread-out batch), then the rest,
  with the reason for each row of the head.
"""
from labelq.policy.fitting import FitOutcome, fit_labels
from labelq.policy.queue import Queue, rank_pool
from labelq.policy.scoring import PoolScores, score_pool, uniform_scores
from labelq.policy.settings import PolicySettings

__all__ = ["FitOutcome", "PolicySettings", "PoolScores", "Queue", "fit_labels", "rank_pool",
           "score_pool", "uniform_scores"]
