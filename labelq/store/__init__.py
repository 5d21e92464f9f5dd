"""The labelq store: pool, labels and derived model state in one SQLite file or PostgreSQL database.

``Store.create`` / ``Store.open`` return a :class:`Store`; the schema is upgraded on open. Every
error meant for the user is a named subclass of :class:`labelq.errors.LabelqError`.
"""

from labelq.store.errors import (
    AlreadyLabelledError,
    DuplicateKeyError,
    FeatureMismatchError,
    InvalidClassesError,
    MissingDirectoryError,
    MissingStoreError,
    NewerStoreError,
    NotAStoreError,
    NothingToUndoError,
    StoreExistsError,
    StoreUnreachableError,
    UnknownCandidateError,
    UnknownClassError,
    UnknownKeyError,
    UnknownSessionError,
    UnsupportedStoreError,
)
from labelq.lazy import lazy_exports

_WHERE = {
    **dict.fromkeys(["CandidateRecord", "FitRecord", "LabelRecord", "ScoreChunk", "ScoreRow",
                     "UndoRecord"], "labelq.store.records"),
    "Store": "labelq.store.store",
}
"""Imported on first use (labelq.lazy): SQLAlchemy costs about half a second to import, and the
quick read path (`labelq.store.quick`) and `labelq --version` need none of it."""

__all__ = [
    "AlreadyLabelledError",
    "CandidateRecord",
    "DuplicateKeyError",
    "FeatureMismatchError",
    "FitRecord",
    "InvalidClassesError",
    "LabelRecord",
    "MissingDirectoryError",
    "MissingStoreError",
    "NewerStoreError",
    "NotAStoreError",
    "NothingToUndoError",
    "ScoreChunk",
    "ScoreRow",
    "Store",
    "StoreExistsError",
    "StoreUnreachableError",
    "UndoRecord",
    "UnknownCandidateError",
    "UnknownClassError",
    "UnknownKeyError",
    "UnknownSessionError",
    "UnsupportedStoreError",
]

__getattr__, __dir__ = lazy_exports(__name__, _WHERE)
