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


STABLE = [None, 0.995, 0.999, 1.0]


def test_a_narrow_audit_lets_the_advice_quote_a_measured_accuracy():
    """This project's rule (issue 11): with an audit, stop only when its 95% interval is at most
    0.05 on each side of the accuracy quoted. 380 of 400 right: Wilson interval 0.924-0.967
    (statsmodels proportion_confint(380, 400, method="wilson"), computed for this test)."""
    audit = {"n": 400, "accuracy": 0.95, "low": 0.9240, "high": 0.9674, "pending": 0}
    advice = stopping_advice(STABLE, ENOUGH, audit=audit)
    assert advice.stop is True
    assert "audit measured accuracy 0.95 (95% interval 0.92-0.97, 400 items)" in advice.message
    assert "model's own estimate" not in advice.message


def test_a_wide_audit_blocks_stopping_and_says_how_many_more_items():
    """Sample size for a half-width h: n = z^2 p (1 - p) / h^2 (normal approximation; common
    practice): p = 0.8, h = 0.05 -> 1.96^2 * 0.16 / 0.0025 = 245.9, so 246 - 30 = 216 more."""
    audit = {"n": 30, "accuracy": 0.8, "low": 0.627, "high": 0.905, "pending": 0}
    advice = stopping_advice(STABLE, ENOUGH, audit=audit)
    assert advice.stop is False
    assert advice.figures["audit_items_needed"] == 216
    assert "labelq audit -n 216" in advice.message
    waiting = stopping_advice(STABLE, ENOUGH, audit={**audit, "pending": 20})
    assert "label the 20 audit items waiting and about 196 more" in waiting.message


def test_without_an_audit_the_advice_says_its_figures_are_the_models_own():
    """Issue 11: without an audit the advice says that its figures are the model's own."""
    for kappas in ([None, 0.5], STABLE):
        message = stopping_advice(kappas, ENOUGH).message
        assert "model's own estimate" in message and "labelq audit" in message

