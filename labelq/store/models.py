"""SQLAlchemy 2 typed models of the store; the Alembic revisions in ``migrations/`` build them.

Label and skip events are append-only: undo appends a retraction whose ``retracts_id`` points at the
event it cancels. Every event carries the store's event mark at the moment it was written, which
orders labels and skips on one time line. Fits, scores and snapshots are derived from the labels
and may be deleted and rebuilt at any time.
"""

from typing import Any

from sqlalchemy import (
    JSON,
    BigInteger,
    Boolean,
    CheckConstraint,
    Float,
    ForeignKey,
    Integer,
    LargeBinary,
    MetaData,
    String,
    Text,
    false,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column

NAMING_CONVENTION = {
    "ix": "ix_%(table_name)s_%(column_0_N_name)s",
    "uq": "uq_%(table_name)s_%(column_0_N_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}

from labelq.store.sql import APPLICATION  # noqa: F401 (re-exported)


class Base(DeclarativeBase):
    """Declarative base of every store table."""

    metadata = MetaData(naming_convention=NAMING_CONVENTION)


class StoreInfo(Base):
    """The single marker row: which application owns the file, and the event mark counter."""

    __tablename__ = "store_info"
    __table_args__ = (CheckConstraint("id = 1", name="single_row"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    application: Mapped[str] = mapped_column(String)
    created_at: Mapped[str] = mapped_column(String)
    event_mark: Mapped[int] = mapped_column(Integer)


class Candidate(Base):
    """An item of the pool: a unique key and free-form metadata; its features are in a
    feature block (revision 0007)."""

    __tablename__ = "candidates"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    key: Mapped[str] = mapped_column(String, unique=True)
    meta: Mapped[dict[str, Any]] = mapped_column(JSON)
    added_at: Mapped[str] = mapped_column(String)
    added_mark: Mapped[int] = mapped_column(Integer, server_default="0")


class FeatureBlock(Base):
    """Features of up to BLOCK_ROWS consecutive candidates of one import (labelq.store.columns)."""

    __tablename__ = "feature_blocks"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    first_id: Mapped[int] = mapped_column(Integer, index=True)
    last_id: Mapped[int] = mapped_column(Integer)
    n_rows: Mapped[int] = mapped_column(Integer)
    mark: Mapped[int] = mapped_column(Integer)
    """The event mark of the import that added the block's candidates."""
    data: Mapped[bytes] = mapped_column(LargeBinary)
    checksum: Mapped[int] = mapped_column(BigInteger)


class FeatureColumn(Base):
    """One feature: its name, column position and the pool-wide mean and scale."""

    __tablename__ = "feature_schema"

    name: Mapped[str] = mapped_column(String, primary_key=True)
    position: Mapped[int] = mapped_column(Integer, unique=True)
    mean: Mapped[float] = mapped_column(Float)
    scale: Mapped[float] = mapped_column(Float)


class LabelClass(Base):
    """One class a candidate can be labelled with, in display order."""

    __tablename__ = "classes"

    name: Mapped[str] = mapped_column(String, primary_key=True)
    position: Mapped[int] = mapped_column(Integer, unique=True)


class LabelEvent(Base):
    """A label given to a candidate, or (``class_`` NULL) the retraction of an earlier label event."""

    __tablename__ = "label_events"
    __table_args__ = (
        CheckConstraint('("class" IS NULL) <> (retracts_id IS NULL)', name="label_or_retraction"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), index=True)
    class_: Mapped[str | None] = mapped_column("class", ForeignKey("classes.name"))
    by: Mapped[str] = mapped_column(String)
    note: Mapped[str | None] = mapped_column(Text)
    at: Mapped[str] = mapped_column(String)
    mark: Mapped[int] = mapped_column(Integer)
    retracts_id: Mapped[int | None] = mapped_column(ForeignKey("label_events.id"), unique=True)


class SkipEvent(Base):
    """A skip of a candidate, or (``retracts_id`` set) the retraction of an earlier skip."""

    __tablename__ = "skip_events"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), index=True)
    by: Mapped[str] = mapped_column(String)
    at: Mapped[str] = mapped_column(String)
    mark: Mapped[int] = mapped_column(Integer)
    retracts_id: Mapped[int | None] = mapped_column(ForeignKey("skip_events.id"), unique=True)


class LabelSession(Base):
    """One sitting at the terminal."""

    __tablename__ = "sessions"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    started_at: Mapped[str] = mapped_column(String)
    ended_at: Mapped[str | None] = mapped_column(String)
    by: Mapped[str] = mapped_column(String)


class Fit(Base):
    """One model run: hyperparameters, evidence, timing and the serialised model."""

    __tablename__ = "fits"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    session_id: Mapped[int | None] = mapped_column(ForeignKey("sessions.id"))
    n_labels: Mapped[int] = mapped_column(Integer)
    strategy: Mapped[str] = mapped_column(String)
    hyperparameters: Mapped[dict[str, Any]] = mapped_column(JSON)
    log_marginal_likelihood: Mapped[float | None] = mapped_column(Float)
    seconds: Mapped[float] = mapped_column(Float)
    at: Mapped[str] = mapped_column(String)
    event_mark: Mapped[int] = mapped_column(Integer)
    model: Mapped[dict[str, Any] | None] = mapped_column(JSON(none_as_null=True))
    fingerprint: Mapped[str | None] = mapped_column(String, index=True)
    info: Mapped[dict[str, Any] | None] = mapped_column(JSON)
    warnings: Mapped[list[str]] = mapped_column(JSON)
    full_optimize: Mapped[bool] = mapped_column()
    settings: Mapped[dict[str, Any] | None] = mapped_column(JSON)
    """The fit policy's settings (labelq.policy.PolicySettings.to_dict); None before revision 0004."""
    hyper_mode: Mapped[str | None] = mapped_column(String)
    """How the hyperparameters were set: average (grid), learnt (this fit) or held."""
    learnt_at: Mapped[int | None] = mapped_column(Integer)
    """Label count at the last gradient-based learning of the hyperparameters (0: never)."""


class Score(Base):
    """A row of the head of the queue: a candidate's class probabilities and acquisition scores
    under the last fit (ranks 1 to sql.QUEUE_HEAD_ROWS; every candidate's are in score_blocks)."""

    __tablename__ = "scores"

    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), primary_key=True)
    fit_id: Mapped[int] = mapped_column(ForeignKey("fits.id"), primary_key=True, index=True)
    probabilities: Mapped[bytes] = mapped_column(LargeBinary)
    predicted: Mapped[int] = mapped_column(Integer)
    p_top: Mapped[float] = mapped_column(Float)
    p_low: Mapped[float] = mapped_column(Float)
    p_high: Mapped[float] = mapped_column(Float)
    entropy: Mapped[float] = mapped_column(Float)
    margin: Mapped[float] = mapped_column(Float)
    bald: Mapped[float] = mapped_column(Float)
    priority: Mapped[float] = mapped_column(Float)
    rank: Mapped[int | None] = mapped_column(Integer, index=True)
    reason: Mapped[str | None] = mapped_column(String)
    """Why a row of the head of the queue is there, in words; None below the head."""


class ScoreBlock(Base):
    """Every candidate's scores under one fit, in blocks of structured arrays
    (labelq.store.columns.score_dtype); the `scores` table keeps only the head of the queue."""

    __tablename__ = "score_blocks"

    fit_id: Mapped[int] = mapped_column(ForeignKey("fits.id"), primary_key=True)
    block: Mapped[int] = mapped_column(Integer, primary_key=True)
    first_id: Mapped[int] = mapped_column(Integer)
    last_id: Mapped[int] = mapped_column(Integer)
    n_rows: Mapped[int] = mapped_column(Integer)
    data: Mapped[bytes] = mapped_column(LargeBinary)
    checksum: Mapped[int] = mapped_column(BigInteger)


class Snapshot(Base):
    """Pool-wide uncertainty summary taken after a fit."""

    __tablename__ = "snapshots"

    fit_id: Mapped[int] = mapped_column(ForeignKey("fits.id"), primary_key=True)
    mean_entropy: Mapped[float] = mapped_column(Float)
    n_uncertain: Mapped[int] = mapped_column(Integer)
    expected_accuracy: Mapped[float] = mapped_column(Float)
    agreement_kappa: Mapped[float | None] = mapped_column(Float)
    class_counts: Mapped[dict[str, int]] = mapped_column(JSON)


class Claim(Base):
    """A candidate held by one labeller until ``expires_at`` so others are not shown it."""

    __tablename__ = "claims"

    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), primary_key=True)
    holder: Mapped[str] = mapped_column(String)
    expires_at: Mapped[str] = mapped_column(String)


class Audit(Base):
    """A seeded, uniformly random sample of the unlabelled candidates, drawn to measure accuracy."""

    __tablename__ = "audits"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    by: Mapped[str] = mapped_column(String)
    at: Mapped[str] = mapped_column(String)
    seed: Mapped[int] = mapped_column(Integer)
    opened_mark: Mapped[int] = mapped_column(Integer)
    """The store's event mark when the sample was drawn (labels after it count for interleaving)."""
    drawn_from: Mapped[int] = mapped_column(Integer)
    """How many unlabelled candidates the sample was drawn from."""
    double: Mapped[bool] = mapped_column(Boolean, server_default=false())
    """Each item is to be labelled by two labellers (their agreement: Cohen's kappa)."""


class AuditItem(Base):
    """One audit candidate and, once labelled, the prediction made for it before its first label."""

    __tablename__ = "audit_items"

    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), primary_key=True)
    audit_id: Mapped[int] = mapped_column(ForeignKey("audits.id"), index=True)
    position: Mapped[int] = mapped_column(Integer)
    """Order within the sample (the order items are offered in)."""
    fit_id: Mapped[int | None] = mapped_column(Integer)
    """The fit whose prediction was recorded (None: not labelled yet, or no model then)."""
    predicted: Mapped[int | None] = mapped_column(Integer)
    p_top: Mapped[float | None] = mapped_column(Float)
    probabilities: Mapped[bytes | None] = mapped_column(LargeBinary)
    scored_mark: Mapped[int | None] = mapped_column(Integer)
    """Event mark of the first label of the item (when the prediction was recorded)."""



class Dispute(Base):
    """Two labellers' different classes for one candidate; open while ``resolved_id`` is None
    and both label events are live. An open dispute keeps the candidate out of training."""

    __tablename__ = "disputes"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), index=True)
    first_id: Mapped[int] = mapped_column(ForeignKey("label_events.id"))
    second_id: Mapped[int] = mapped_column(ForeignKey("label_events.id"))
    resolved_id: Mapped[int | None] = mapped_column(ForeignKey("label_events.id"))
    at: Mapped[str] = mapped_column(String)

