"""The labelq store: pool, labels and derived model state in one SQLite file.

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
    UnknownCandidateError,
    UnknownClassError,
    UnknownKeyError,
    UnknownSessionError,
)
from labelq.store.records import CandidateRecord, FitRecord, LabelRecord, ScoreChunk, ScoreRow, UndoRecord
from labelq.store.store import Store

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
    "UndoRecord",
    "UnknownCandidateError",
    "UnknownClassError",
    "UnknownKeyError",
    "UnknownSessionError",
]
