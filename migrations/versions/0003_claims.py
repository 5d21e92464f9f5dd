"""Claims: a labeller holds queue candidates for a while so parallel labellers see different ones.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-01 22:00:02
"""

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "claims",
        sa.Column("candidate_id", sa.Integer(), nullable=False),
        sa.Column("holder", sa.String(), nullable=False),
        sa.Column("expires_at", sa.String(), nullable=False),
        sa.ForeignKeyConstraint(
            ["candidate_id"], ["candidates.id"], name=op.f("fk_claims_candidate_id_candidates")
        ),
        sa.PrimaryKeyConstraint("candidate_id", name=op.f("pk_claims")),
    )


def downgrade() -> None:
    op.drop_table("claims")
