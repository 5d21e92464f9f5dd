"""Keeping a store sound: verify it, and rebuild everything derived from the label events."""

from __future__ import annotations

from labelq.loop import settings
from labelq.loop.refit import Progress, asked_strategy, load_state, refit


def check(store) -> list[str]:
    """Problems found in the store (empty when it is consistent); see Store.check."""
    return store.check()


def _generation(fit) -> int:
    return (fit.info or {}).get("generation", 0)


def rebuild_plan(store) -> tuple[list, list]:
    """(plan, stale fit ids): the (event mark, strategy, session) of each fit to remake, oldest
    first, and the ids of fits a rebuild must drop.

    The plan is the recorded fits of the oldest generation present: a rebuild writes a new
    generation and drops the old one only once it is complete, so a newer generation beside an
    older one is a rebuild that was interrupted, and is dropped and made again. With no fits
    recorded, one fit per distinct event mark of the label and skip events.
    """
    fits = store.fits()
    if not fits:
        return [(mark, settings.DEFAULT_STRATEGY, None) for mark in store.event_marks()], []
    oldest = min(_generation(f) for f in fits)
    keep = [f for f in fits if _generation(f) == oldest]
    plan = [(f.event_mark, asked_strategy(f), f.session_id) for f in keep]
    return plan, [f.id for f in fits]


def rebuild(store, progress: Progress = None) -> int:
    """Remake every fit, score and snapshot in order from the label events; the number remade.

    Each fit sees the pool, labels and skips as they stood at its event mark and warm-starts from
    the fit remade before it, exactly as the original sequence did, so the snapshots come out the
    same. The new fits are written beside the old ones (a new generation) and the old ones are
    dropped in one transaction at the end, so an interrupted rebuild loses nothing: run it again.
    """
    plan, old_ids = rebuild_plan(store)
    fits = store.fits()
    oldest = min((_generation(f) for f in fits), default=0)
    partial = [f.id for f in fits if _generation(f) > oldest]
    store.drop_fits(partial)
    # new fits get ids above every fit left, and reuse models only from among themselves
    boundary = max((f.id for f in fits if _generation(f) == oldest), default=0)
    generation = max((_generation(f) for f in fits), default=-1) + 1
    previous = None
    for i, (mark, strategy, session_id) in enumerate(plan):
        if progress:
            progress("rebuilding", i, len(plan))
        refit(store, load_state(store, mark), strategy, session_id=session_id, previous=previous,
              reuse_after=boundary, generation=generation)
        previous = store.last_fit()
    store.drop_fits([i for i in old_ids if i not in set(partial)])
    if progress:
        progress("rebuilding", len(plan), len(plan))
    return len(plan)
