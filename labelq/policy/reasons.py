"""The words a queue uses to say why a row is there (a light module: the CLI reads it)."""

SPREAD = "; chosen to spread the batch"
"""Appended to the reason of every row of a spread-out batch after the first."""


def strategy_reason(strategy, proba_row, classes) -> str:
    """Why ``strategy`` asks for a candidate with class probabilities ``proba_row``, in a
    grader's words."""
    if strategy == "margin":
        first, second = sorted(range(len(classes)), key=lambda k: -proba_row[k])[:2]
        return f"near the {classes[first]}/{classes[second]} boundary"
    if strategy == "entropy":
        return "the model cannot tell its classes apart here"
    if strategy == "bald":
        return "the model's own uncertainty is highest here"
    if strategy == "epig":
        return "informs the predictions of many similar candidates"
    return "drawn at random"


def cluster_reason(size: int) -> str:
    """A cold-start pick standing for its cluster."""
    return f"represents a cluster of {size:,} unlabelled candidates"


FARTHEST = "far from every labelled candidate"
RANDOM = "drawn at random"
