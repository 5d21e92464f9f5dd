"""Schema revisions: one head, upgrades that keep data, newer stores refused, models in step;
on both back ends (an SQLite file, a PostgreSQL database)."""

import pytest
from alembic import command
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import inspect, text

from labelq.store import NewerStoreError, Store
from labelq.store.engine import make_engine, reading, writing
from labelq.store.migrate import alembic_config, current_revision, head_revision, upgrade
from labelq.store.models import Base
from tests.conftest import engine_for

from .conftest import CLASSES, FEATURES, table_names, table_rows


def _query(location, sql: str) -> list[tuple]:
    """Rows of ``sql`` read through a plain SQLAlchemy engine."""
    engine = engine_for(location)
    try:
        with engine.connect() as connection:
            return [tuple(row) for row in connection.execute(text(sql))]
    finally:
        engine.dispose()


def _columns(location, table: str) -> list[str]:
    engine = engine_for(location)
    try:
        return [column["name"] for column in inspect(engine).get_columns(table)]
    finally:
        engine.dispose()


def test_there_is_exactly_one_head() -> None:
    heads = ScriptDirectory.from_config(alembic_config()).get_heads()
    assert heads == [head_revision()] == ["0007"]


def test_revisions_build_exactly_the_models(store: Store) -> None:
    with reading(store._engine) as connection:
        differences = compare_metadata(MigrationContext.configure(connection), Base.metadata)
    assert differences == []


def _store_at_first_revision(location) -> None:
    """A store as labelq wrote it at revision 0001, holding data written with plain SQL."""
    engine = make_engine(location)
    with writing(engine, lock=None) as connection:
        upgrade(connection, "0001")
        statements = [
            "INSERT INTO classes (name, position) VALUES ('export', 0), ('local', 1), ('juice', 2)",
            "INSERT INTO feature_schema (name, position, mean, scale) VALUES"
            " ('firmness_kgf', 0, 7.0, 1.0), ('sugar_brix', 1, 12.0, 2.0), ('hue_deg', 2, 60.0, 30.0)",
            "INSERT INTO candidates (key, features, meta, added_at) VALUES"
            " ('old-1', :features, '{\"bin\": \"B1\"}', '2026-01-01T00:00:00Z')",
            "INSERT INTO label_events (candidate_id, class, by, at, mark)"
            " VALUES (1, 'juice', 'ana', '2026-01-01T00:00:01Z', 1)",
            "INSERT INTO sessions (started_at, by) VALUES ('2026-01-01T00:00:00Z', 'ana')",
            "UPDATE store_info SET event_mark = 1",
        ]
        # the features blob is 7.0, 12.0, 42.0 as float64 little-endian (IEEE 754 by hand)
        features = bytes.fromhex("0000000000001C4000000000000028400000000000004540")
        for statement in statements:
            connection.execute(text(statement), {"features": features} if ":features" in statement else {})
    engine.dispose()


def test_open_upgrades_a_first_revision_store_with_its_data(store_at) -> None:
    location = store_at("old.db")
    _store_at_first_revision(location)
    assert "fits" not in table_rows(location)
    with Store.open(location) as store:
        assert store.check() == []
        assert store.classes == CLASSES
        assert store.feature_names == FEATURES
        record = store.candidate("old-1")
        assert record.features == {"firmness_kgf": 7.0, "sugar_brix": 12.0, "hue_deg": 42.0}
        assert record.meta == {"bin": "B1"} and record.label == "juice"
        assert store.event_mark() == 1
        assert store.sessions()[0]["by"] == "ana"
        assert store.last_fit() is None
        assert store.claim([record.id], "ana") == [record.id]
    assert _query(location, "SELECT version_num FROM alembic_version") == [("0007",)]


def test_open_refuses_a_store_from_a_newer_labelq(store: Store) -> None:
    with writing(store._engine) as connection:
        connection.execute(text("UPDATE alembic_version SET version_num = '0099_future'"))
    before = table_rows(store.path)
    with pytest.raises(NewerStoreError, match="0099_future"):
        Store.open(store.path)
    assert table_rows(store.path) == before


def test_a_store_with_fits_goes_down_to_0003_and_back_keeping_its_data(store: Store) -> None:
    """Revision 0004 (fit policy columns) on a store holding labels, fits and scores: down to the
    previous head and up again in place; every label, fit and score row is kept, the new columns
    come back empty (common practice for schema revisions, STYLE.md)."""
    from labelq.loop import actions

    from .conftest import orchard

    keys, X, meta = orchard(40)
    store.add_candidates(keys, X, meta, FEATURES)
    for key, grade in zip(keys[:4], ["export", "local", "juice", "export"]):
        actions.label(store, key, grade, "ana")
    before = table_rows(store.path)
    engine = store._engine
    with writing(engine) as connection:
        command.downgrade(alembic_config(connection), "0003")
    assert "hyper_mode" not in _columns(store.path, "fits")
    assert "reason" not in _columns(store.path, "scores")
    with writing(engine) as connection:
        upgrade(connection, "head")
    after = table_rows(store.path)
    assert after == before
    assert _query(store.path, "SELECT COUNT(*) FROM fits WHERE hyper_mode IS NULL") == [(before["fits"],)]
    assert store.check() == []


def test_revision_ids_read_without_alembic_agree_with_alembic() -> None:
    """labelq reads the revision graph from the files to spare Alembic's import at start-up; it
    must be Alembic's own graph (Alembic's ScriptDirectory is the reference)."""
    from labelq.store.migrate import known_revisions

    scripts = ScriptDirectory.from_config(alembic_config())
    assert head_revision() == scripts.get_current_head()
    assert known_revisions() == {s.revision for s in scripts.walk_revisions()}


def test_a_store_at_0004_with_data_upgrades_to_the_audit_tables(store: Store) -> None:
    """Revision 0005 (audits) on a store holding labels, fits and scores: down to 0004 (the audit
    tables go) and up again in place when Store.open finds it older; every label, skip, fit and
    score row is kept, and an audit can be drawn afterwards (common practice for schema
    revisions, STYLE.md). On PostgreSQL too: a server store at 0004 upgrades to the head."""
    from labelq.loop import actions

    from .conftest import orchard

    keys, X, meta = orchard(40)
    store.add_candidates(keys, X, meta, FEATURES)
    for key, grade in zip(keys[:4], ["export", "local", "juice", "export"]):
        actions.label(store, key, grade, "ana")
    store.skip(keys[5], "ana")
    with writing(store._engine) as connection:
        command.downgrade(alembic_config(connection), "0004")
    tables = table_names(store.path)
    assert "audits" not in tables and "audit_items" not in tables
    # revisions 0005-0007 (0007 also keeps only the head of the queue in `scores`)
    new_tables = ("audits", "audit_items", "disputes", "feature_blocks", "score_blocks", "scores")
    assert not set(new_tables[:-1]) & tables
    before = {t: n for t, n in table_rows(store.path).items() if t not in new_tables}
    with Store.open(store.path) as reopened:  # upgrades in place
        after = table_rows(store.path)
        assert {t: n for t, n in after.items() if t not in new_tables} == before
        assert reopened.draw_audit(5, "ana", seed=1).n == 5
        assert reopened.check() == []
        assert [r.key for r in reopened.current_labels()] == keys[:4]
        assert reopened.last_fit().n_labels == 4


def test_each_revision_goes_down_and_up_again(store: Store) -> None:
    """Every revision's downgrade and upgrade run on this back end: down one revision at a
    time to an empty database, then up one at a time; at the head the tables are the models
    again (Alembic's compare_metadata is the reference)."""
    scripts = ScriptDirectory.from_config(alembic_config())
    order = [s.revision for s in scripts.walk_revisions()]  # head first
    engine = store._engine
    for expected in [*order[1:], None]:
        with writing(engine, lock=None) as connection:
            command.downgrade(alembic_config(connection), "-1")
            assert current_revision(connection) == expected
    assert table_names(store.path) <= {"alembic_version"}
    for expected in reversed(order):
        with writing(engine, lock=None) as connection:
            command.upgrade(alembic_config(connection), "+1")
            assert current_revision(connection) == expected
    with reading(engine) as connection:
        assert compare_metadata(MigrationContext.configure(connection), Base.metadata) == []


def test_a_store_at_0005_with_an_audit_upgrades_to_the_dispute_tables(store: Store) -> None:
    """Revision 0006 (disputes, double audits) on a store holding an audit with a scored item:
    down to 0005 and up again through Store.open; the audit's rows are kept and its `double`
    flag comes back false (common practice for schema revisions, STYLE.md). A rebuild of the
    referenced `audits` table in SQLite's batch mode would break the foreign key of
    `audit_items`; the revision alters it in place."""
    from labelq.loop import actions

    from .conftest import orchard

    keys, X, meta = orchard(40)
    store.add_candidates(keys, X, meta, FEATURES)
    for key, grade in zip(keys[:4], ["export", "local", "juice", "export"]):
        actions.label(store, key, grade, "ana")
    store.draw_audit(5, "ana", seed=3)
    item = store.audit_items()[0]
    actions.label(store, item.key, "juice", "ana")
    with writing(store._engine) as connection:
        command.downgrade(alembic_config(connection), "0005")
    assert "disputes" not in table_names(store.path)
    later = ("disputes", "feature_blocks", "score_blocks", "scores")  # 0006, 0007
    before = {t: n for t, n in table_rows(store.path).items() if t not in later}
    with Store.open(store.path) as reopened:
        after = table_rows(store.path)
        assert {t: n for t, n in after.items() if t not in later} == before
        assert [i.key for i in reopened.audit_items()] == [i.key for i in store.audit_items()]
        assert reopened.audit_items()[0].predicted is not None
        assert reopened.double_pairs() == []
        assert reopened.check() == []


def test_a_store_at_0006_with_data_converts_to_column_blocks(store: Store) -> None:
    """Revision 0007 (column blocks) on a store made at 0006 with labels, a skip, an undo, fits
    and scores: down to 0006 (one feature blob and one score row per candidate again) and up
    through Store.open; every label, skip and event is kept, each candidate's features and the
    last fit's scores come back equal, the queue is the same and `check` finds nothing (common
    practice for schema revisions, STYLE.md)."""
    import numpy as np

    from labelq.loop import actions

    from .conftest import orchard

    keys, X, meta = orchard(60)
    store.add_candidates(keys[:40], X[:40], meta[:40], FEATURES)
    store.add_candidates(keys[40:], X[40:], meta[40:], FEATURES)  # a second import: two blocks
    for key, grade in zip(keys[:5], ["export", "local", "juice", "export", "local"]):
        actions.label(store, key, grade, "ana")
    store.skip(keys[7], "ana")
    actions.undo(store, "ana")
    actions.label(store, keys[8], "juice", "ana")
    queue = [(r.key, r.rank, r.priority) for r in store.queue(20)]
    scores = np.concatenate([c.probabilities for c in store.scores()])
    with writing(store._engine) as connection:
        command.downgrade(alembic_config(connection), "0006")
    assert "features" in _columns(store.path, "candidates")
    assert "feature_blocks" not in table_names(store.path)
    events = {t: _query(store.path, f"SELECT * FROM {t} ORDER BY id")
              for t in ("label_events", "skip_events")}
    assert table_rows(store.path)["scores"] == 60  # one row per candidate at 0006
    with Store.open(store.path) as reopened:
        assert reopened.check() == []
        assert "features" not in _columns(store.path, "candidates")
        for t, rows in events.items():
            assert _query(store.path, f"SELECT * FROM {t} ORDER BY id") == rows
        ids = reopened.pool_ids()
        np.testing.assert_array_equal(reopened.features(ids), X)
        assert [(r.key, r.rank, r.priority) for r in reopened.queue(20)] == queue
        np.testing.assert_array_equal(
            np.concatenate([c.probabilities for c in reopened.scores()]), scores)
        assert table_rows(store.path)["feature_blocks"] == 2
        # the head of the queue stays a table; the rest lives in the score blocks
        assert table_rows(store.path)["scores"] == 60 - 6  # six labelled (the undo took the skip)
        assert actions.label(reopened, keys[9], "export", "ana") is not None
        assert reopened.check() == []
