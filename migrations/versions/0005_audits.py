"""Audits: seeded random samples of unlabelled candidates, each scored against the prediction the
model made for it before its label (test-then-train).

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-02 11:30:00
"""

import sqlalchemy as sa
from alembic import op

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "audits",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("by", sa.String(), nullable=False),
        sa.Column("at", sa.String(), nullable=False),
        sa.Column("seed", sa.Integer(), nullable=False),
        sa.Column("opened_mark", sa.Integer(), nullable=False),
        sa.Column("drawn_from", sa.Integer(), nullable=False),
    )
    op.create_table(
        "audit_items",
        sa.Column("candidate_id", sa.Integer(), sa.ForeignKey("candidates.id"), primary_key=True),
        sa.Column("audit_id", sa.Integer(), sa.ForeignKey("audits.id"), nullable=False, index=True),
        sa.Column("position", sa.Integer(), nullable=False),
        sa.Column("fit_id", sa.Integer(), nullable=True),
        sa.Column("predicted", sa.Integer(), nullable=True),
        sa.Column("p_top", sa.Float(), nullable=True),
        sa.Column("probabilities", sa.LargeBinary(), nullable=True),
        sa.Column("scored_mark", sa.Integer(), nullable=True),
    )


def downgrade() -> None:
    op.drop_table("audit_items")
    op.drop_table("audits")
