"""Pool and labels: candidates, feature schema, classes, label and skip events, sessions.

Also the ``store_info`` marker row that identifies the file as a labelq store and holds the event
mark counter.

Revision ID: 0001
Revises:
Create Date: 2026-12-01 22:00:00
"""

from datetime import datetime, timezone

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    store_info = op.create_table(
        "store_info",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("application", sa.String(), nullable=False),
        sa.Column("created_at", sa.String(), nullable=False),
        sa.Column("event_mark", sa.Integer(), nullable=False),
        sa.CheckConstraint("id = 1", name=op.f("ck_store_info_single_row")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_store_info")),
    )
    op.bulk_insert(
        store_info,
        [
            {
                "id": 1,
                "application": "labelq",
                "created_at": datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
                "event_mark": 0,
            }
        ],
    )
    op.create_table(
        "candidates",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("key", sa.String(), nullable=False),
        sa.Column("features", sa.LargeBinary(), nullable=False),
        sa.Column("meta", sa.JSON(), nullable=False),
        sa.Column("added_at", sa.String(), nullable=False),
        sa.Column("added_mark", sa.Integer(), nullable=False, server_default="0"),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_candidates")),
        sa.UniqueConstraint("key", name=op.f("uq_candidates_key")),
    )
    op.create_table(
        "feature_schema",
        sa.Column("name", sa.String(), nullable=False),
        sa.Column("position", sa.Integer(), nullable=False),
        sa.Column("mean", sa.Float(), nullable=False),
        sa.Column("scale", sa.Float(), nullable=False),
        sa.PrimaryKeyConstraint("name", name=op.f("pk_feature_schema")),
        sa.UniqueConstraint("position", name=op.f("uq_feature_schema_position")),
    )
    op.create_table(
        "classes",
        sa.Column("name", sa.String(), nullable=False),
        sa.Column("position", sa.Integer(), nullable=False),
        sa.PrimaryKeyConstraint("name", name=op.f("pk_classes")),
        sa.UniqueConstraint("position", name=op.f("uq_classes_position")),
    )
    op.create_table(
        "sessions",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("started_at", sa.String(), nullable=False),
        sa.Column("ended_at", sa.String(), nullable=True),
        sa.Column("by", sa.String(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_sessions")),
    )
    op.create_table(
        "label_events",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("candidate_id", sa.Integer(), nullable=False),
        sa.Column("class", sa.String(), nullable=True),
        sa.Column("by", sa.String(), nullable=False),
        sa.Column("note", sa.Text(), nullable=True),
        sa.Column("at", sa.String(), nullable=False),
        sa.Column("mark", sa.Integer(), nullable=False),
        sa.Column("retracts_id", sa.Integer(), nullable=True),
        sa.CheckConstraint(
            '("class" IS NULL) <> (retracts_id IS NULL)',
            name=op.f("ck_label_events_label_or_retraction"),
        ),
        sa.ForeignKeyConstraint(
            ["candidate_id"], ["candidates.id"], name=op.f("fk_label_events_candidate_id_candidates")
        ),
        sa.ForeignKeyConstraint(["class"], ["classes.name"], name=op.f("fk_label_events_class_classes")),
        sa.ForeignKeyConstraint(
            ["retracts_id"], ["label_events.id"], name=op.f("fk_label_events_retracts_id_label_events")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_label_events")),
        sa.UniqueConstraint("retracts_id", name=op.f("uq_label_events_retracts_id")),
    )
    op.create_index(op.f("ix_label_events_candidate_id"), "label_events", ["candidate_id"])
    op.create_table(
        "skip_events",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("candidate_id", sa.Integer(), nullable=False),
        sa.Column("by", sa.String(), nullable=False),
        sa.Column("at", sa.String(), nullable=False),
        sa.Column("mark", sa.Integer(), nullable=False),
        sa.Column("retracts_id", sa.Integer(), nullable=True),
        sa.ForeignKeyConstraint(
            ["candidate_id"], ["candidates.id"], name=op.f("fk_skip_events_candidate_id_candidates")
        ),
        sa.ForeignKeyConstraint(
            ["retracts_id"], ["skip_events.id"], name=op.f("fk_skip_events_retracts_id_skip_events")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_skip_events")),
        sa.UniqueConstraint("retracts_id", name=op.f("uq_skip_events_retracts_id")),
    )
    op.create_index(op.f("ix_skip_events_candidate_id"), "skip_events", ["candidate_id"])


def downgrade() -> None:
    for table in (
        "skip_events",
        "label_events",
        "sessions",
        "classes",
        "feature_schema",
        "candidates",
        "store_info",
    ):
        op.drop_table(table)
