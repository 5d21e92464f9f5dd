"""Sittings and calendar days: how the label events of a store are grouped for its history.

Pure logic on event times and labellers; no store, no model.

A *sitting* is a run of label events (undos included) by one labeller in which each event comes
less than 30 minutes after that labeller's previous one; a gap of 30 minutes or more starts a new
sitting. This is the usual inactivity-gap rule for cutting an event log into sessions, with the
30-minute timeout common in web analytics. Interleaved events of two labellers form two sittings.

A *calendar day* is the local date of an event in a time zone: an IANA zone from ``zoneinfo``,
or the process's local zone (``None``: what ``datetime.astimezone()`` uses, which follows the
``TZ`` environment variable the process started with).
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone, tzinfo
from typing import Mapping, Optional, Sequence
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

SITTING_GAP = timedelta(minutes=30)
"""Consecutive label events of one labeller less than this apart belong to one sitting."""


@dataclass(frozen=True)
class Group:
    """Label events grouped together: one sitting or one calendar day.

    ``name`` is the local date (``2026-12-01``) of a day or the local start
    (``2026-12-01 22:03``) of a sitting; ``start`` and ``end`` are the first and last event times
    (timezone-aware, UTC); ``by`` is the sitting's labeller (None for a day); ``members`` are the
    positions of the group's events in the input, in time order.
    """

    name: str
    start: datetime
    end: datetime
    by: Optional[str]
    members: tuple[int, ...]


def parse_utc(at: str) -> datetime:
    """A stored timestamp (``2026-12-01T22:03:10Z``) as a timezone-aware UTC datetime."""
    return datetime.strptime(at, "%Y-%m-%dT%H:%M:%SZ").replace(tzinfo=timezone.utc)


def zone_named(name: str) -> ZoneInfo:
    """The IANA time zone ``name`` (e.g. ``Europe/Helsinki``); ValueError naming it if unknown."""
    try:
        return ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError):
        raise ValueError(f"unknown time zone {name!r}; give an IANA name such as "
                         f"Europe/Helsinki or Etc/UTC") from None


def resolve_zone(name: Optional[str], environ: Mapping[str, str] = os.environ) -> Optional[tzinfo]:
    """The zone to group days in: ``name`` if given (ValueError if unknown); else ``TZ`` from
    ``environ`` when it names an IANA zone (so a ``TZ`` set after the process started is honoured
    too); else None, the process's local zone."""
    if name is not None:
        return zone_named(name)
    setting = environ.get("TZ", "").strip().lstrip(":")
    if setting:
        try:
            return zone_named(setting)
        except ValueError:  # a POSIX rule such as "EST5EDT,M3.2.0,M11.1.0": the C library's
            return None
    return None


def zone_label(zone: Optional[tzinfo]) -> str:
    """How a zone is named for people and scripts: its IANA key, else its abbreviation now
    (``local time (CET)`` for the process's local zone)."""
    if isinstance(zone, ZoneInfo):
        return zone.key
    now = datetime.now(timezone.utc).astimezone(zone)
    return now.tzname() if zone is not None else f"local time ({now.tzname()})"


def local(moment: datetime, zone: Optional[tzinfo]) -> datetime:
    """``moment`` (timezone-aware) as wall time in ``zone`` (None: the process's local zone)."""
    return moment.astimezone(zone)


def _time_order(times: Sequence[datetime]) -> list[int]:
    """Positions of ``times`` in time order (input order among equal times)."""
    return sorted(range(len(times)), key=lambda i: (times[i], i))


def _group(name: str, members: list[int], times: Sequence[datetime], by=None) -> Group:
    return Group(name=name, start=times[members[0]], end=times[members[-1]], by=by,
                 members=tuple(members))


def calendar_days(times: Sequence[datetime], zone: Optional[tzinfo]) -> list[Group]:
    """Group event ``times`` (timezone-aware) by their local date in ``zone``, earliest day
    first."""
    by_day: dict[str, list[int]] = {}
    for i in _time_order(times):
        by_day.setdefault(local(times[i], zone).date().isoformat(), []).append(i)
    return [_group(day, members, times) for day, members in sorted(by_day.items())]


def sittings(times: Sequence[datetime], labellers: Sequence[str], zone: Optional[tzinfo],
             gap: timedelta = SITTING_GAP) -> list[Group]:
    """Group event ``times`` (timezone-aware) into sittings: per labeller, an event less than
    ``gap`` after that labeller's previous event continues the sitting, a longer pause (or one
    of exactly ``gap``) starts a new one. Sittings are ordered by start (then labeller); each is
    named by its local start time in ``zone``."""
    if len(times) != len(labellers):
        raise ValueError(f"{len(times)} times but {len(labellers)} labellers")
    open_runs: dict[str, list[int]] = {}
    runs: list[tuple[str, list[int]]] = []
    for i in _time_order(times):
        who = labellers[i]
        run = open_runs.get(who)
        if run is None or times[i] - times[run[-1]] >= gap:
            run = open_runs[who] = []
            runs.append((who, run))
        run.append(i)
    runs.sort(key=lambda r: (times[r[1][0]], r[0], r[1][0]))
    return [_group(local(times[members[0]], zone).strftime("%Y-%m-%d %H:%M"), members, times,
                   by=who) for who, members in runs]
