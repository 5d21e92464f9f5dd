"""Consistency checks of a store, reported as one-line problems."""

import numpy as np
from sqlalchemy import Connection, text

from labelq.store.columns import block_problem, score_dtype

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
    """Every feature block intact (size and CRC-32), and every candidate in exactly one block."""
    width = connection.execute(text("SELECT COUNT(*) FROM feature_schema")).scalar_one()
    problems, held = [], []
    for block_id, n_rows, data, crc in connection.execute(
            text("SELECT id, n_rows, data, checksum FROM feature_blocks ORDER BY first_id")):
        problem = block_problem(data, n_rows * (8 + 8 * width), crc)
        if problem is not None:
            problems.append(f"feature block {block_id} is damaged ({problem}); features are"
                            " primary data: restore the store from a backup or import again")
            continue
        held.append(np.frombuffer(bytes(data), dtype="<i8", count=n_rows))
    stored = np.sort(np.concatenate(held)) if held else np.zeros(0, dtype=np.int64)
    ids = np.fromiter(connection.execute(text("SELECT id FROM candidates ORDER BY id")).scalars(),
                      dtype=np.int64)
    twice = int((np.diff(stored) == 0).sum())
    missing = int((~np.isin(ids, stored)).sum())
    stray = int((~np.isin(stored, ids)).sum())
    if twice:
        problems.append(f"{twice} candidates have features in more than one feature block")
    if missing and len(problems) == 0:
        problems.append(f"{missing} candidates have no features in any feature block")
    if stray:
        problems.append(f"{stray} rows of feature blocks belong to no candidate")
    return problems


def _score_problems(connection: Connection) -> list[str]:
    """The last fit's score blocks intact and covering the pool it saw; the head table its own."""
    last = connection.execute(text("SELECT MAX(id) FROM fits")).scalar()
    stray = connection.execute(
        text("SELECT COUNT(*) FROM scores WHERE fit_id <> :fit"), {"fit": -1 if last is None else last}
    ).scalar_one()
    stray_blocks = connection.execute(
        text("SELECT COUNT(*) FROM score_blocks WHERE fit_id <> :fit"),
        {"fit": -1 if last is None else last}).scalar_one()
    problems = [f"{stray} scores do not belong to the last fit"] if stray else []
    if stray_blocks:
        problems.append(f"{stray_blocks} score blocks do not belong to the last fit")
    if last is None:
        return problems
    n_classes = connection.execute(text("SELECT COUNT(*) FROM classes")).scalar_one()
    size = score_dtype(n_classes).itemsize
    held, damaged = [], 0
    for block, n_rows, data, crc in connection.execute(
            text("SELECT block, n_rows, data, checksum FROM score_blocks WHERE fit_id = :fit"
                 " ORDER BY block"), {"fit": last}):
        problem = block_problem(data, n_rows * size, crc)
        if problem is not None:
            damaged += 1
            problems.append(f"score block {block} of the last fit is damaged ({problem});"
                            " `labelq rebuild` remakes it")
            continue
        held.append(np.frombuffer(bytes(data), dtype=score_dtype(n_classes))["candidate_id"])
    scored = np.concatenate(held) if held else np.zeros(0, dtype=np.int64)
    seen = np.fromiter(connection.execute(text(
        "SELECT c.id FROM candidates c WHERE c.added_mark <= (SELECT event_mark FROM fits"
        " WHERE id = :fit) ORDER BY c.id"), {"fit": last}).scalars(), dtype=np.int64)
    missing = int((~np.isin(seen, scored)).sum())
    if missing and not damaged:
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
