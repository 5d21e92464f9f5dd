"""Teams: disputes between labellers and double-labelled audits.

A dispute is opened when a second labeller gives a labelled candidate another class; it keeps
both label events and takes the candidate out of the training set until a resolving label.

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-02 12:00:00
"""

import sqlalchemy as sa
from alembic import op

revision = "0006"
down_revision = "0005"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "disputes",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("candidate_id", sa.Integer(), sa.ForeignKey("candidates.id"), nullable=False,
                  index=True),
        sa.Column("first_id", sa.Integer(), sa.ForeignKey("label_events.id"), nullable=False),
        sa.Column("second_id", sa.Integer(), sa.ForeignKey("label_events.id"), nullable=False),
        sa.Column("resolved_id", sa.Integer(), sa.ForeignKey("label_events.id"), nullable=True),
        sa.Column("at", sa.String(), nullable=False),
    )
    # ALTER TABLE ... ADD COLUMN in place: rebuilding `audits` in batch mode would drop a table
    # that `audit_items` references, which the store's foreign-key checks refuse
    with op.batch_alter_table("audits", recreate="never") as batch:
        batch.add_column(sa.Column("double", sa.Boolean(), nullable=False,
                                   server_default=sa.false()))


def downgrade() -> None:
    with op.batch_alter_table("audits", recreate="never") as batch:
        batch.drop_column("double")
    op.drop_table("disputes")
