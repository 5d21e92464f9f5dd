"""Column blocks: the pool's features and each fit's scores as arrays in blobs.

Features move from one blob per candidate (``candidates.features``) to `feature_blocks`: each block
holds up to 32,768 candidates of one import (their ids and a float64 matrix) with a CRC-32. The
last fit's scores are copied into `score_blocks` (one structured array per block); the `scores`
table keeps only the head of the queue (ranks 1-1,000), which `next` reads. Existing stores are
converted in place, in chunks; nothing about labels, skips or events changes.

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-02 14:00:00
"""

import numpy as np
import sqlalchemy as sa
from alembic import op

from labelq.store.columns import (
    BLOCK_ROWS,
    pack_features,
    pack_scores,
    score_dtype,
    unpack_features,
)
from labelq.store.sql import QUEUE_HEAD_ROWS

revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "feature_blocks",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("first_id", sa.Integer(), nullable=False, index=True),
        sa.Column("last_id", sa.Integer(), nullable=False),
        sa.Column("n_rows", sa.Integer(), nullable=False),
        sa.Column("mark", sa.Integer(), nullable=False),
        sa.Column("data", sa.LargeBinary(), nullable=False),
        sa.Column("checksum", sa.BigInteger(), nullable=False),
    )
    op.create_table(
        "score_blocks",
        sa.Column("fit_id", sa.Integer(), sa.ForeignKey("fits.id"), primary_key=True),
        sa.Column("block", sa.Integer(), primary_key=True),
        sa.Column("first_id", sa.Integer(), nullable=False),
        sa.Column("last_id", sa.Integer(), nullable=False),
        sa.Column("n_rows", sa.Integer(), nullable=False),
        sa.Column("data", sa.LargeBinary(), nullable=False),
        sa.Column("checksum", sa.BigInteger(), nullable=False),
    )
    connection = op.get_bind()
    _features_to_blocks(connection)
    with op.batch_alter_table("candidates", recreate="never") as batch:
        batch.drop_column("features")
    _scores_to_blocks(connection)


def downgrade() -> None:
    connection = op.get_bind()
    with op.batch_alter_table("candidates", recreate="never") as batch:
        batch.add_column(sa.Column("features", sa.LargeBinary(), nullable=True))
    width = connection.execute(sa.text("SELECT COUNT(*) FROM feature_schema")).scalar_one()
    blocks = connection.execute(sa.text(
        "SELECT id, n_rows, data, checksum FROM feature_blocks ORDER BY first_id")).all()
    for block_id, n_rows, data, crc in blocks:
        ids, X = unpack_features(data, n_rows, width, crc, f"feature block {block_id}")
        connection.execute(sa.text("UPDATE candidates SET features = :f WHERE id = :id"),
                           [{"f": row.tobytes(), "id": int(i)} for i, row in zip(ids, X)])
    _blocks_to_scores(connection)
    op.drop_table("score_blocks")
    op.drop_table("feature_blocks")


def _features_to_blocks(connection) -> None:
    """One block per run of at most BLOCK_ROWS consecutive candidates of the same import."""
    width = connection.execute(sa.text("SELECT COUNT(*) FROM feature_schema")).scalar_one()
    result = connection.execute(sa.text(
        "SELECT id, added_mark, features FROM candidates ORDER BY id"))
    pending: list = []

    def flush():
        if not pending:
            return
        ids = np.array([r[0] for r in pending], dtype=np.int64)
        X = np.frombuffer(b"".join(r[2] for r in pending), dtype="<f8").reshape(len(pending), width)
        block = pack_features(ids, X)
        connection.execute(sa.text(
            "INSERT INTO feature_blocks (first_id, last_id, n_rows, mark, data, checksum)"
            " VALUES (:first, :last, :n, :mark, :data, :crc)"),
            {"first": block.first_id, "last": block.last_id, "n": block.n_rows,
             "mark": int(pending[0][1]), "data": block.data, "crc": block.checksum})
        pending.clear()

    for row in result:
        if pending and (row[1] != pending[0][1] or len(pending) >= BLOCK_ROWS):
            flush()
        pending.append((row[0], row[1], bytes(row[2])))
    flush()


def _scores_to_blocks(connection) -> None:
    """The last fit's score rows as score blocks; the `scores` table keeps the head only."""
    last = connection.execute(sa.text("SELECT MAX(id) FROM fits")).scalar()
    connection.execute(sa.text("DELETE FROM scores WHERE fit_id <> :fit"), {"fit": last or -1})
    if last is None:
        return
    n_classes = connection.execute(sa.text("SELECT COUNT(*) FROM classes")).scalar_one()
    rows = connection.execute(sa.text(
        "SELECT candidate_id, probabilities, predicted, p_low, p_high, entropy, margin, bald,"
        " priority, rank FROM scores WHERE fit_id = :fit ORDER BY candidate_id"),
        {"fit": last}).all()
    records = np.zeros(len(rows), dtype=score_dtype(n_classes))
    if rows:
        cid, blobs, predicted, p_low, p_high, entropy, margin, bald, priority, rank = zip(*rows)
        records["candidate_id"] = cid
        records["probabilities"] = np.frombuffer(b"".join(bytes(b) for b in blobs),
                                                 dtype="<f8").reshape(len(rows), n_classes)
        for name, values in (("predicted", predicted), ("p_low", p_low), ("p_high", p_high),
                             ("entropy", entropy), ("margin", margin), ("bald", bald),
                             ("priority", priority)):
            records[name] = values
        records["rank"] = [-1 if r is None else r for r in rank]
        records["exact"] = 1
    for block_no, start in enumerate(range(0, len(records), BLOCK_ROWS)):
        block = pack_scores(records[start:start + BLOCK_ROWS])
        connection.execute(sa.text(
            "INSERT INTO score_blocks (fit_id, block, first_id, last_id, n_rows, data, checksum)"
            " VALUES (:fit, :block, :first, :last, :n, :data, :crc)"),
            {"fit": last, "block": block_no, "first": block.first_id, "last": block.last_id,
             "n": block.n_rows, "data": block.data, "crc": block.checksum})
    connection.execute(sa.text(
        "DELETE FROM scores WHERE rank IS NULL OR rank > :head"), {"head": QUEUE_HEAD_ROWS})


def _blocks_to_scores(connection) -> None:
    """Back to one score row per candidate of the last fit (revision 0006's layout)."""
    from labelq.store.columns import unpack_scores

    n_classes = connection.execute(sa.text("SELECT COUNT(*) FROM classes")).scalar_one()
    blocks = connection.execute(sa.text(
        "SELECT fit_id, block, n_rows, data, checksum FROM score_blocks"
        " WHERE fit_id = (SELECT MAX(id) FROM fits) ORDER BY block")).all()
    for fit_id, block_no, n_rows, data, crc in blocks:
        records = unpack_scores(data, n_rows, n_classes, crc, f"score block {block_no}")
        # the head of the queue is already there (with its reasons): add the other rows
        records = records[(records["rank"] < 0) | (records["rank"] > QUEUE_HEAD_ROWS)]
        params = []
        for r in records:
            p = r["probabilities"]
            params.append({
                "cid": int(r["candidate_id"]), "fit": fit_id, "proba": p.astype("<f8").tobytes(),
                "pred": int(r["predicted"]), "top": float(p[r["predicted"]]),
                "low": float(r["p_low"]), "high": float(r["p_high"]), "ent": float(r["entropy"]),
                "marg": float(r["margin"]), "bald": float(r["bald"]),
                "prio": float(r["priority"]), "rank": None if r["rank"] < 0 else int(r["rank"])})
        connection.execute(sa.text(
            "INSERT INTO scores (candidate_id, fit_id, probabilities, predicted, p_top, p_low,"
            " p_high, entropy, margin, bald, priority, rank) VALUES (:cid, :fit, :proba, :pred,"
            " :top, :low, :high, :ent, :marg, :bald, :prio, :rank)"), params)
