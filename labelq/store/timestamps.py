"""UTC timestamps as ISO-8601 strings with whole seconds, e.g. ``2026-12-01T22:03:10Z``.

The fixed-width format sorts lexicographically in time order, so SQL compares them as text.

The clock can be set: when the environment variable ``LABELQ_NOW`` holds an ISO-8601 time
(``2026-12-01T22:03:10Z``; an offset such as ``+02:00`` is converted to UTC, no offset means
UTC), ``utc_now()`` returns that time and ``utc_after()`` counts from it. It is meant for tests
and demos that need events stamped on different days; every store write takes its time from
``utc_now()``, so one setting stamps everything a command writes.
"""

import os
from datetime import datetime, timedelta, timezone

from labelq.errors import LabelqError

_FORMAT = "%Y-%m-%dT%H:%M:%SZ"

CLOCK_VARIABLE = "LABELQ_NOW"
"""The environment variable that sets the clock (for tests and demos)."""


class ClockSettingError(LabelqError):
    """``LABELQ_NOW`` holds something other than an ISO-8601 time."""


def _now() -> datetime:
    """The time ``LABELQ_NOW`` sets, else the system clock; timezone-aware, UTC."""
    setting = os.environ.get(CLOCK_VARIABLE, "").strip()
    if not setting:
        return datetime.now(timezone.utc)
    try:
        # fromisoformat reads "Z" as UTC from Python 3.11 on; older versions need it spelled out
        moment = datetime.fromisoformat(setting.replace("Z", "+00:00").replace("z", "+00:00"))
    except ValueError:
        raise ClockSettingError(
            f"{CLOCK_VARIABLE}={setting!r} is not an ISO-8601 time such as 2026-12-01T22:03:10Z"
        ) from None
    if moment.tzinfo is None:
        return moment.replace(tzinfo=timezone.utc)
    return moment.astimezone(timezone.utc)


def utc_now() -> str:
    """The current UTC time (or the time ``LABELQ_NOW`` sets), to the second."""
    return _now().strftime(_FORMAT)


def utc_after(seconds: float) -> str:
    """The UTC time ``seconds`` from now (from ``LABELQ_NOW`` when set), to the second."""
    return (_now() + timedelta(seconds=seconds)).strftime(_FORMAT)
