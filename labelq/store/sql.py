"""SQL text shared by the SQLAlchemy store and the quick read path (`labelq.store.quick`).

Plain strings with ``:name`` parameters, which both SQLAlchemy's ``text()`` and the standard
``sqlite3`` module accept; this module imports nothing, so the quick path stays light. The text is
valid on PostgreSQL too (the store on a server runs it through SQLAlchemy): a parameter that is
only tested for NULL is cast, so the server knows its type.
"""

APPLICATION = "labelq"
"""Value of ``store_info.application`` that marks an SQLite file as a labelq store."""

LIVE_LABEL = (
    "+l.retracts_id IS NULL" " AND NOT EXISTS (SELECT 1 FROM label_events r WHERE r.retracts_id = l.id)"
)
"""SQL condition on ``label_events l``: the event is a label and has not been retracted."""

LIVE_SKIP = (
    "+s.retracts_id IS NULL" " AND NOT EXISTS (SELECT 1 FROM skip_events r WHERE r.retracts_id = s.id)"
)
"""SQL condition on ``skip_events s``: the event is a skip and has not been retracted.

The unary ``+`` in both conditions keeps SQLite from answering ``retracts_id IS NULL`` with the
retracts_id index (which matches nearly every row) instead of the candidate_id index; PostgreSQL
reads it as the identity on integers (its planner does not need the hint).
"""

OPEN_DISPUTE = (
    "NOT EXISTS (SELECT 1 FROM label_events r WHERE r.retracts_id = d.first_id"
    " OR r.retracts_id = d.second_id) AND (d.resolved_id IS NULL OR EXISTS"
    " (SELECT 1 FROM label_events r2 WHERE r2.retracts_id = d.resolved_id))"
)
"""SQL condition on ``disputes d``: the dispute is open (both its label events live, and no live
resolving label); see labelq.store.disputes."""

CURRENT_LABEL_IDS = (
    f"SELECT MAX(l.id) FROM label_events l WHERE {LIVE_LABEL} AND NOT EXISTS (SELECT 1 FROM"
    f" disputes d WHERE d.candidate_id = l.candidate_id AND {OPEN_DISPUTE}) GROUP BY l.candidate_id"
)
"""SQL yielding the id of every candidate's current label event (disputed candidates have none)."""

LAST_FIT = "(SELECT MAX(id) FROM fits)"
"""SQL for the id of the last fit. Only its scores are kept, so full reads filter on ``+fit_id``
(the ``+`` bars the fit_id index) and walk the rank or primary-key index instead of sorting."""

QUEUE_COLUMNS = ("candidate_id", "key", "meta", "probabilities", "predicted", "p_top", "entropy",
                 "margin", "bald", "priority", "rank", "reason")
"""The columns `queue_sql` selects, in order."""


def queue_sql(exclude_claimed: bool) -> str:
    """Unlabelled candidates of the last fit by rank (parameters :now, :holder, :limit,
    :offset); with ``exclude_claimed``, candidates held by someone other than :holder are left out."""
    claimed = (
        " AND NOT EXISTS (SELECT 1 FROM claims k WHERE k.candidate_id = sc.candidate_id"
        " AND k.expires_at > :now AND (CAST(:holder AS TEXT) IS NULL OR k.holder <> :holder))"
        if exclude_claimed
        else ""
    )
    return (
        "SELECT sc.candidate_id, c.key, c.meta, sc.probabilities, sc.predicted, sc.p_top, sc.entropy,"
        " sc.margin, sc.bald, sc.priority, sc.rank, sc.reason"
        " FROM scores sc JOIN candidates c ON c.id = sc.candidate_id"
        f" WHERE +sc.fit_id = {LAST_FIT} AND sc.rank IS NOT NULL"
        " AND NOT EXISTS (SELECT 1 FROM label_events l"
        f" WHERE l.candidate_id = sc.candidate_id AND {LIVE_LABEL})"
        f"{claimed} ORDER BY sc.rank LIMIT :limit OFFSET :offset"
    )


DROP_EXPIRED_CLAIMS = "DELETE FROM claims WHERE expires_at <= :now"

CLAIM = (
    "INSERT INTO claims (candidate_id, holder, expires_at) VALUES (:cid, :holder, :until)"
    " ON CONFLICT (candidate_id) DO UPDATE SET expires_at = excluded.expires_at"
    " WHERE claims.holder = excluded.holder"
)
"""Hold :cid for :holder until :until; a live claim by someone else is left alone."""

HELD_BY_OTHERS = (
    "SELECT COUNT(*), MAX(expires_at) FROM claims WHERE expires_at > :now"
    " AND (CAST(:holder AS TEXT) IS NULL OR holder <> :holder)"
)

QUEUE_HEAD_ROWS = 1000
"""Ranks kept as rows of the `scores` table (the head of the queue, read by `next` through SQL);
every candidate's scores are in the last fit's score blocks (labelq.store.columns)."""

HEAD_COUNT = f"SELECT COUNT(*) FROM scores WHERE +fit_id = {LAST_FIT}"
"""SQL: how many head rows the last fit keeps; `QUEUE_HEAD_ROWS` of them means the queue goes
on in the score blocks."""
