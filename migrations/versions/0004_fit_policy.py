"""Fit policy: how each fit was made (settings, hyperparameter mode, last learning) and why each
row of the head of the queue is there.

Revision ID: 0004
Revises: 0003
Create Date: 2026-12-02 08:20:00
"""

import sqlalchemy as sa
from alembic import op

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("fits") as batch:
        batch.add_column(sa.Column("settings", sa.JSON(), nullable=True))
        batch.add_column(sa.Column("hyper_mode", sa.String(), nullable=True))
        batch.add_column(sa.Column("learnt_at", sa.Integer(), nullable=True))
    with op.batch_alter_table("scores") as batch:
        batch.add_column(sa.Column("reason", sa.String(), nullable=True))


def downgrade() -> None:
    # ALTER TABLE ... DROP COLUMN in place (SQLite 3.35 and later): rebuilding `fits` in batch
    # mode would drop a table that `scores` still references, which the store's foreign-key
    # checks refuse
    with op.batch_alter_table("scores", recreate="never") as batch:
        batch.drop_column("reason")
    with op.batch_alter_table("fits", recreate="never") as batch:
        batch.drop_column("learnt_at")
        batch.drop_column("hyper_mode")
        batch.drop_column("settings")
