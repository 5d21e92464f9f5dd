"""Derived model state: fits, per-candidate scores of the last fit, and pool snapshots.

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-01 22:00:01
"""

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "fits",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("session_id", sa.Integer(), nullable=True),
        sa.Column("n_labels", sa.Integer(), nullable=False),
        sa.Column("strategy", sa.String(), nullable=False),
        sa.Column("hyperparameters", sa.JSON(), nullable=False),
        sa.Column("log_marginal_likelihood", sa.Float(), nullable=True),
        sa.Column("seconds", sa.Float(), nullable=False),
        sa.Column("at", sa.String(), nullable=False),
        sa.Column("event_mark", sa.Integer(), nullable=False),
        sa.Column("model", sa.JSON(), nullable=True),
        sa.Column("fingerprint", sa.String(), nullable=True),
        sa.Column("info", sa.JSON(), nullable=True),
        sa.Column("warnings", sa.JSON(), nullable=False),
        sa.Column("full_optimize", sa.Boolean(), nullable=False),
        sa.ForeignKeyConstraint(["session_id"], ["sessions.id"], name=op.f("fk_fits_session_id_sessions")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_fits")),
    )
    op.create_index(op.f("ix_fits_fingerprint"), "fits", ["fingerprint"])
    op.create_table(
        "scores",
        sa.Column("candidate_id", sa.Integer(), nullable=False),
        sa.Column("fit_id", sa.Integer(), nullable=False),
        sa.Column("probabilities", sa.LargeBinary(), nullable=False),
        sa.Column("predicted", sa.Integer(), nullable=False),
        sa.Column("p_top", sa.Float(), nullable=False),
        sa.Column("p_low", sa.Float(), nullable=False),
        sa.Column("p_high", sa.Float(), nullable=False),
        sa.Column("entropy", sa.Float(), nullable=False),
        sa.Column("margin", sa.Float(), nullable=False),
        sa.Column("bald", sa.Float(), nullable=False),
        sa.Column("priority", sa.Float(), nullable=False),
        sa.Column("rank", sa.Integer(), nullable=True),
        sa.ForeignKeyConstraint(
            ["candidate_id"], ["candidates.id"], name=op.f("fk_scores_candidate_id_candidates")
        ),
        sa.ForeignKeyConstraint(["fit_id"], ["fits.id"], name=op.f("fk_scores_fit_id_fits")),
        sa.PrimaryKeyConstraint("candidate_id", "fit_id", name=op.f("pk_scores")),
    )
    op.create_index(op.f("ix_scores_fit_id"), "scores", ["fit_id"])
    op.create_index(op.f("ix_scores_rank"), "scores", ["rank"])
    op.create_table(
        "snapshots",
        sa.Column("fit_id", sa.Integer(), nullable=False),
        sa.Column("mean_entropy", sa.Float(), nullable=False),
        sa.Column("n_uncertain", sa.Integer(), nullable=False),
        sa.Column("expected_accuracy", sa.Float(), nullable=False),
        sa.Column("agreement_kappa", sa.Float(), nullable=True),
        sa.Column("class_counts", sa.JSON(), nullable=False),
        sa.ForeignKeyConstraint(["fit_id"], ["fits.id"], name=op.f("fk_snapshots_fit_id_fits")),
        sa.PrimaryKeyConstraint("fit_id", name=op.f("pk_snapshots")),
    )


def downgrade() -> None:
    op.drop_table("snapshots")
    op.drop_index(op.f("ix_scores_rank"), table_name="scores")
    op.drop_index(op.f("ix_scores_fit_id"), table_name="scores")
    op.drop_table("scores")
    op.drop_index(op.f("ix_fits_fingerprint"), table_name="fits")
    op.drop_table("fits")
