"""Consistency checks of a store, reported as one-line problems."""

from sqlalchemy import Connection, text

from labelq.store.core import StoreCore
from labelq.store.engine import is_sqlite
from labelq.store.migrate import current_revision, head_revision
from labelq.store.models import APPLICATION


class CheckMixin(StoreCore):
    """Find problems a healthy store never has."""

    def check(self) -> list[str]:
        """Problems found in the store, one line each; empty when it is consistent."""
        with self._read() as connection:
            return [
                *_schema_problems(connection),
                *_integrity_problems(connection),
                *_feature_problems(connection),
                *_score_problems(connection),
                *_event_problems(connection, "label_events"),
                *_event_problems(connection, "skip_events"),
            ]


def _schema_problems(connection: Connection) -> list[str]:
    problems = []
    revision, head = current_revision(connection), head_revision()
    if revision != head:
        problems.append(f"schema revision is {revision}, expected {head}")
    application = connection.execute(text("SELECT application FROM store_info WHERE id = 1")).scalar()
    if application != APPLICATION:
        problems.append(f"store_info marker is {application!r}, expected {APPLICATION!r}")
    n_classes = connection.execute(text("SELECT COUNT(*) FROM classes")).scalar_one()
    if n_classes < 2:
        problems.append(f"the store has {n_classes} classes, at least 2 are needed")
    return problems


def _integrity_problems(connection: Connection) -> list[str]:
    """SQLite's own check of the file and of the foreign keys; a PostgreSQL server keeps both
    itself (foreign keys are always enforced there), so there is nothing to ask it."""
    if not is_sqlite(connection):
        return []
    problems = [
        f"sqlite integrity: {message}"
        for (message,) in connection.exec_driver_sql("PRAGMA quick_check")
        if message != "ok"
    ]
    orphans = connection.exec_driver_sql(
        'SELECT "table", parent, COUNT(*) FROM pragma_foreign_key_check GROUP BY "table", parent'
    )
    problems += [
        f"{count} rows of {table} point at missing rows of {parent}" for table, parent, count in orphans
    ]
    return problems


def _feature_problems(connection: Connection) -> list[str]:
    width = connection.execute(text("SELECT COUNT(*) FROM feature_schema")).scalar_one()
    bad = connection.execute(
        text("SELECT COUNT(*) FROM candidates WHERE length(features) <> :size"), {"size": 8 * width}
    ).scalar_one()
    return [f"{bad} candidates do not have {width} float64 features"] if bad else []


def _score_problems(connection: Connection) -> list[str]:
    stray = connection.execute(
        text("SELECT COUNT(*) FROM scores WHERE fit_id <> COALESCE((SELECT MAX(id) FROM fits), -1)")
    ).scalar_one()
    missing = connection.execute(
        text(
            "SELECT COUNT(*) FROM candidates c WHERE c.added_mark <= (SELECT event_mark FROM fits"
            " WHERE id = (SELECT MAX(id) FROM fits)) AND NOT EXISTS (SELECT 1 FROM scores s"
            " WHERE s.candidate_id = c.id AND s.fit_id = (SELECT MAX(id) FROM fits))"
        )
    ).scalar_one()
    problems = [f"{stray} scores do not belong to the last fit"] if stray else []
    if missing:
        problems.append(f"{missing} candidates have no score under the last fit")
    return problems


def _event_problems(connection: Connection, table: str) -> list[str]:
    """Retractions must point at an earlier event of the same candidate that is not itself a
    retraction, and no event may be retracted twice."""
    bad_target = connection.execute(
        text(
            f"SELECT COUNT(*) FROM {table} r LEFT JOIN {table} e ON e.id = r.retracts_id"
            " WHERE r.retracts_id IS NOT NULL AND (e.id IS NULL OR e.id >= r.id"
            " OR e.candidate_id <> r.candidate_id OR e.retracts_id IS NOT NULL)"
        )
    ).scalar_one()
    twice = connection.execute(
        text(
            f"SELECT COUNT(*) FROM (SELECT retracts_id FROM {table} WHERE retracts_id IS NOT NULL"
            " GROUP BY retracts_id HAVING COUNT(*) > 1) AS twice"
        )
    ).scalar_one()
    problems = []
    if bad_target:
        problems.append(
            f"{bad_target} retractions in {table} do not point at an earlier event of their candidate"
        )
    if twice:
        problems.append(f"{twice} events in {table} are retracted more than once")
    return problems
