"""Named errors raised by the store; each message is one line naming the offending value."""

from labelq.errors import LabelqError


class StoreExistsError(LabelqError):
    """A file already exists where a new store was to be created, or the database already holds
    a labelq store (or tables of the same names)."""


class MissingDirectoryError(LabelqError):
    """The directory that should hold a new store does not exist."""


class MissingStoreError(LabelqError):
    """No store file exists at the given path, or the database holds no tables yet."""


class NotAStoreError(LabelqError):
    """The path is a directory, not an SQLite database, or a database that is not a labelq store."""


class UnsupportedStoreError(LabelqError):
    """The URL names a database labelq cannot keep a store in (neither SQLite nor PostgreSQL)."""


class StoreUnreachableError(LabelqError):
    """The database server cannot be reached, or refuses the connection (login, no such database)."""


class NewerStoreError(LabelqError):
    """The store was written by a newer labelq whose schema revision this version does not know."""


class InvalidClassesError(LabelqError):
    """The class names are not at least two distinct non-empty names."""


class DuplicateKeyError(LabelqError):
    """A candidate key is already stored or repeated in the input."""


class FeatureMismatchError(LabelqError):
    """Imported feature names differ from the store's feature schema."""


class UnknownClassError(LabelqError):
    """A label names a class the store does not have."""


class UnknownKeyError(LabelqError):
    """No candidate has the given key."""


class UnknownCandidateError(LabelqError):
    """No candidate has the given id."""


class UnknownSessionError(LabelqError):
    """No session has the given id."""


class AlreadyLabelledError(LabelqError):
    """The candidate already has a label."""


class NothingToUndoError(LabelqError):
    """There is no label or skip left to retract."""


class AuditError(LabelqError):
    """An audit cannot be drawn as asked (too few unlabelled candidates, no model yet, ...)."""
