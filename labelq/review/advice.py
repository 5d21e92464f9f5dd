"""Stopping advice from the stability of successive fits' predictions.

Source: M. Bloodgood & K. Vijay-Shanker (2009), "A method for stopping active learning based on
stabilizing predictions and the need for user-adjustable stopping", CoNLL. Their "stabilizing
predictions" rule compares successive models' predictions on a fixed stop set of unlabelled
examples with Cohen's kappa and stops once agreement stays high (window of 3, threshold 0.99).
"""

from dataclasses import dataclass, field
import math
from typing import Mapping, Optional, Sequence


@dataclass
class Advice:
    """Whether more labels look worth it, in words for people and in figures for programs."""

    stop: bool
    message: str
    figures: dict = field(default_factory=dict)
    flagged_classes: list = field(default_factory=list)


def _stable_run(kappas: Sequence[Optional[float]], threshold: float) -> int:
    """Number of most recent kappas in a row that are at least ``threshold``."""
    run = 0
    for k in reversed(kappas):
        if k is None or k < threshold:
            break
        run += 1
    return run


def _flag_sentence(flagged: list, label_counts: Mapping[str, int], minimum: int) -> str:
    """'Keep labelling: class juice (1) has fewer than 3 labels', for one or more classes."""
    parts = [f"{c} ({label_counts[c]})" for c in flagged]
    if len(parts) == 1:
        return f"Keep labelling: class {parts[0]} has fewer than {minimum} labels"
    listed = ", ".join(parts[:-1]) + " and " + parts[-1]
    return f"Keep labelling: classes {listed} have fewer than {minimum} labels"


def stopping_advice(
    kappas: Sequence[Optional[float]],
    label_counts: Mapping[str, int],
    threshold: float = 0.99,
    window: int = 3,
    min_labels_per_class: int = 3,
    audit: Optional[Mapping] = None,
    half_width: float = 0.05,
) -> Advice:
    """Advise whether to stop labelling (Bloodgood & Vijay-Shanker 2009, stabilizing predictions).

    Parameters
    ----------
    kappas : sequence of (float or None), one per fit, oldest first
        Cohen's kappa between each fit's predicted classes on the stop set and the previous fit's;
        None where there is no previous fit (the first fit) or no comparison was made.
    label_counts : mapping class -> number of labels
        Every class, including those with no label yet.
    threshold, window : stop when each of the last ``window`` kappas is at least ``threshold``.
        The paper averages the kappas over its window; requiring every one to pass is at least as
        cautious and cannot be met by one very high value hiding a low one.
    min_labels_per_class : classes with fewer labels are flagged, and stopping is never advised
        while any class is flagged (common practice, no published source).
    audit : mapping with ``n``, ``accuracy``, ``low``, ``high`` (labelq.loop.audit.report), or
        None. With an audit, stopping is advised only when, besides stable predictions, the
        audit's interval is at most ``half_width`` on each side of its accuracy, so the accuracy
        the advice quotes is supported; the advice then says how many more audit items would
        make it so (n = z^2 p (1 - p) / h^2, the normal-approximation sample size; common
        practice). Without one, the advice says its figures are the model's own.

    Returns
    -------
    Advice
        ``figures`` holds ``kappas`` (the last ``window``), ``threshold``, ``window`` and
        ``stable_run`` (how many of the latest fits in a row reached the threshold).
    """
    if window < 1:
        raise ValueError(f"window must be at least 1, got {window}")
    if not -1.0 <= threshold <= 1.0:
        raise ValueError(f"threshold must be a kappa in [-1, 1], got {threshold}")
    kappas = list(kappas)
    recent = kappas[-window:]
    run = _stable_run(kappas, threshold)
    stable = run >= window
    flagged = [str(c) for c, n in label_counts.items() if n < min_labels_per_class]
    figures = {"kappas": recent, "threshold": threshold, "window": window,
               "stable_run": min(run, window)}

    latest = next((k for k in reversed(kappas) if k is not None), None)
    if stable:
        figures_text = (f"kappa between successive fits at least {threshold:g} "
                        f"for the last {window} fits")
    elif latest is None:
        figures_text = (f"no two fits to compare yet; stopping needs kappa at least {threshold:g} "
                        f"for {window} fits in a row")
    else:
        figures_text = (f"latest kappa between fits {latest:.3f}; stopping needs at least "
                        f"{threshold:g} for {window} fits in a row, {min(run, window)} so far")

    state = "stable" if stable else "not stable yet"
    audited = audit is not None and audit.get("n")
    supported = False
    if audited:
        acc, low, high, n_audit = audit["accuracy"], audit["low"], audit["high"], audit["n"]
        widest = max(acc - low, high - acc)
        supported = widest <= half_width
        figures["audit_half_width"] = widest
        measured = (f"the audit measured accuracy {acc:.2f} (95% interval {low:.2f}-{high:.2f}, "
                    f"{n_audit} items)")
        if supported:
            audit_text = f"; {measured}"
        else:
            p = min(max(acc, 0.05), 0.95)
            needed = int(math.ceil(1.96 ** 2 * p * (1 - p) / half_width ** 2))
            more = max(needed - n_audit, 1)
            waiting = int(audit.get("pending") or 0)
            figures["audit_items_needed"] = more
            if waiting >= more:
                todo = f"label about {more} of the {waiting} audit items waiting"
            elif waiting:
                todo = (f"label the {waiting} audit items waiting and about {more - waiting} "
                        f"more (`labelq audit -n {more - waiting}`)")
            else:
                todo = f"label about {more} more audit items (`labelq audit -n {more}`)"
            audit_text = f"; {measured}, too wide to quote within +-{half_width:.2f}: {todo}"
    else:
        audit_text = ("; these figures are the model's own estimate - draw an audit "
                      "(`labelq audit -n 50`) to measure its accuracy")
    stop = stable and not flagged and (supported or not audited)
    if flagged:
        message = (f"{_flag_sentence(flagged, label_counts, min_labels_per_class)}. "
                   f"By the model's own estimate its predictions are {state} ({figures_text})"
                   f"{audit_text}.")
    elif stable and audited and not supported:
        message = ("Keep labelling audit items: the predictions are stable "
                   f"({figures_text}){audit_text}.")
    elif stable:
        message = ("More labels are unlikely to change the model's predictions "
                   f"({figures_text}){audit_text}. "
                   "Stop when it suits you.")
    else:
        message = ("Keep labelling: by the model's own estimate its predictions are "
                   f"{state} ({figures_text}){audit_text}.")
    return Advice(stop=stop, message=message, figures=figures, flagged_classes=flagged)
