"""Keeping a store sound: verify it, and rebuild everything derived from the label events."""

from __future__ import annotations

from labelq.loop.refit import Progress, load_state, refit


def check(store) -> list[str]:
    """Problems found in the store (empty when it is consistent); see Store.check."""
    return store.check()


def rebuild_plan(store) -> list[tuple[int, str, object]]:
    """(event mark, strategy, session) of each fit to remake, oldest first.

    The recorded fits say when fits were made; with none recorded (or after they were lost), one
    fit per distinct event mark of the label and skip events, with the default strategy.
    """
    fits = store.fits()
    if fits:
        return [(f.event_mark, (f.info or {}).get("strategy", f.strategy), f.session_id)
                for f in fits]
    from labelq.loop import settings

    return [(mark, settings.DEFAULT_STRATEGY, None) for mark in store.event_marks()]


def rebuild(store, progress: Progress = None) -> int:
    """Delete every fit, score and snapshot and remake them in order from the label events.

    Each fit sees the pool, labels and skips as they stood at its event mark and warm-starts from
    the fit remade before it, exactly as the original sequence did, so the snapshots come out the
    same. Returns the number of fits remade.
    """
    plan = rebuild_plan(store)
    store.clear_derived()
    for i, (mark, strategy, session_id) in enumerate(plan):
        if progress:
            progress("rebuilding", i, len(plan))
        refit(store, load_state(store, mark), strategy, session_id=session_id)
    if progress:
        progress("rebuilding", len(plan), len(plan))
    return len(plan)
