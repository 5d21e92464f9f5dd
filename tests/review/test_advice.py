"""Stopping advice after Bloodgood & Vijay-Shanker (2009), "stabilizing predictions"."""

import pytest

from labelq.review import stopping_advice

ENOUGH = {"export": 12, "local": 9, "juice": 5}


def test_run_that_stabilises_advises_stopping():
    """Bloodgood & Vijay-Shanker (2009): stop once kappa between successive fits' predictions on the
    stop set stays at or above 0.99 over a window of 3 fits."""
    kappas = [None, 0.42, 0.71, 0.88, 0.95, 0.991, 0.995, 1.0]
    advice = stopping_advice(kappas, ENOUGH)
    assert advice.stop is True
    assert advice.flagged_classes == []
    assert advice.figures == {"kappas": [0.991, 0.995, 1.0], "threshold": 0.99, "window": 3,
                              "stable_run": 3}
    assert "unlikely to change" in advice.message
    assert "model's own estimate" in advice.message


def test_run_that_has_not_stabilised_says_how_far():
    """Bloodgood & Vijay-Shanker (2009): a low fit inside the window blocks stopping."""
    kappas = [None, 0.5, 0.993, 0.97, 0.995, 0.999]
    advice = stopping_advice(kappas, ENOUGH)
    assert advice.stop is False
    assert advice.figures["stable_run"] == 2
    assert "0.999" in advice.message and "2 so far" in advice.message
    assert "model's own estimate" in advice.message


def test_first_fit_has_no_comparison():
    """Bloodgood & Vijay-Shanker (2009): kappa needs two successive fits; the first has none."""
    advice = stopping_advice([None], ENOUGH)
    assert advice.stop is False
    assert advice.figures["kappas"] == [None]
    assert "no two fits to compare" in advice.message


def test_window_and_threshold_are_adjustable():
    """Bloodgood & Vijay-Shanker (2009) argue for user-adjustable stopping: a looser rule stops sooner."""
    kappas = [None, 0.9, 0.96, 0.97]
    assert not stopping_advice(kappas, ENOUGH).stop
    assert stopping_advice(kappas, ENOUGH, threshold=0.95, window=2).stop


def test_classes_with_few_labels_are_flagged_and_block_stopping():
    """Common practice, no published source: a class with under 3 labels is not yet learnt, so
    stable predictions are not enough to stop."""
    counts = {"export": 12, "local": 2, "juice": 0}
    advice = stopping_advice([None, 0.995, 0.999, 1.0], counts)
    assert advice.stop is False
    assert advice.flagged_classes == ["local", "juice"]
    assert "local (2) and juice (0)" in advice.message


def test_message_is_one_or_two_sentences():
    """Common practice, no published source: short advice for people."""
    for kappas, counts in [([None], ENOUGH), ([None, 0.5], ENOUGH), ([None, 1, 1, 1], ENOUGH),
                           ([None, 1, 1, 1], {"a": 0})]:
        message = stopping_advice(kappas, counts).message
        assert 1 <= message.count(". ") + 1 <= 2 and message.endswith(".")


@pytest.mark.parametrize("kwargs", [{"window": 0}, {"threshold": 1.5}])
def test_rejects_bad_settings(kwargs):
    """Common practice, no published source."""
    with pytest.raises(ValueError):
        stopping_advice([None], ENOUGH, **kwargs)
