"""UTC timestamps as ISO-8601 strings with whole seconds, e.g. ``2026-12-01T22:03:10Z``.

The fixed-width format sorts lexicographically in time order, so SQL compares them as text.
"""

from datetime import datetime, timedelta, timezone

_FORMAT = "%Y-%m-%dT%H:%M:%SZ"


def utc_now() -> str:
    """The current UTC time, to the second."""
    return datetime.now(timezone.utc).strftime(_FORMAT)


def utc_after(seconds: float) -> str:
    """The UTC time ``seconds`` from now, to the second."""
    return (datetime.now(timezone.utc) + timedelta(seconds=seconds)).strftime(_FORMAT)
