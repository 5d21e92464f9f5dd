"""Sittings and calendar days (labelq.review.grouping).

Sources: the sitting rule is the inactivity-gap rule common practice uses to cut event logs into
sessions (a pause of 30 minutes or more ends one); expected groups are hand computations. Zone
offsets: ``Etc/GMT-2`` is UTC+2 all year (POSIX sign convention, IANA tz database) and
``Europe/Helsinki`` is UTC+2 in December (Eastern European Time, IANA tz database).
"""

from __future__ import annotations

from datetime import datetime, timedelta, timezone

import pytest

from labelq.review.grouping import (SITTING_GAP, calendar_days, parse_utc, resolve_zone, sittings,
                                    zone_label, zone_named)

T0 = datetime(2026, 12, 1, 9, 0, tzinfo=timezone.utc)


def minutes(*offsets):
    return [T0 + timedelta(minutes=m) for m in offsets]


def members(groups):
    return [list(g.members) for g in groups]


def test_gaps_of_10_29_31_and_120_minutes():
    """Gaps 10 and 29 minutes stay in the sitting; 31 and 120 start new ones (hand computation:
    events at 0, 10, 39, 70 and 190 minutes)."""
    times = minutes(0, 10, 39, 70, 190)
    groups = sittings(times, ["ana"] * 5, timezone.utc)
    assert members(groups) == [[0, 1, 2], [3], [4]]
    assert [g.name for g in groups] == ["2026-12-01 09:00", "2026-12-01 10:10",
                                        "2026-12-01 12:10"]
    assert groups[0].start == times[0] and groups[0].end == times[2]
    assert {g.by for g in groups} == {"ana"}


def test_a_gap_of_exactly_30_minutes_starts_a_new_sitting():
    """'Less than 30 minutes apart' is one sitting, so exactly 30 is two (the rule as stated)."""
    assert SITTING_GAP == timedelta(minutes=30)
    times = minutes(0, 30) + [T0 + timedelta(minutes=59, seconds=59)]
    assert members(sittings(times, ["ana"] * 3, timezone.utc)) == [[0], [1, 2]]


def test_each_labeller_has_sittings_of_their_own():
    """Interleaved events of two labellers form one sitting each; the gap is measured from the
    same labeller's previous event (hand computation)."""
    times = minutes(0, 5, 20, 25, 40)
    groups = sittings(times, ["ana", "bo", "ana", "bo", "ana"], timezone.utc)
    assert [(g.by, list(g.members)) for g in groups] == [("ana", [0, 2, 4]), ("bo", [1, 3])]


def test_sittings_do_not_depend_on_input_order():
    """Events are taken in time order whatever order they come in (hand computation)."""
    times = minutes(190, 0, 70, 10, 39)
    assert members(sittings(times, ["ana"] * 5, timezone.utc)) == [[1, 3, 4], [2], [0]]


def test_sittings_are_named_by_their_local_start():
    """09:00 UTC is 11:00 in Etc/GMT-2 (UTC+2)."""
    groups = sittings(minutes(0), ["ana"], zone_named("Etc/GMT-2"))
    assert groups[0].name == "2026-12-01 11:00"


def test_sittings_need_one_labeller_per_time():
    with pytest.raises(ValueError, match="2 times but 1 labellers"):
        sittings(minutes(0, 1), ["ana"], timezone.utc)


@pytest.mark.parametrize("zone_name", ["Etc/GMT-2", "Europe/Helsinki"])
def test_a_label_at_23_30_utc_falls_on_the_next_day_at_utc_plus_2(zone_name):
    """23:30 UTC on 1 December is 01:30 on 2 December at UTC+2; 21:59 UTC stays on the 1st
    (23:59 local). Hand computation with the offsets named in the module docstring."""
    times = [parse_utc("2026-12-01T21:59:00Z"), parse_utc("2026-12-01T23:30:00Z"),
             parse_utc("2026-12-02T10:00:00Z")]
    local_days = calendar_days(times, zone_named(zone_name))
    assert [(d.name, list(d.members)) for d in local_days] == [("2026-12-01", [0]),
                                                              ("2026-12-02", [1, 2])]
    utc_days = calendar_days(times, timezone.utc)
    assert [(d.name, list(d.members)) for d in utc_days] == [("2026-12-01", [0, 1]),
                                                            ("2026-12-02", [2])]
    assert all(d.by is None for d in local_days)


def test_parse_utc_reads_the_store_format():
    assert parse_utc("2026-12-01T22:03:10Z") == datetime(2026, 12, 1, 22, 3, 10,
                                                          tzinfo=timezone.utc)


def test_the_zone_comes_from_the_name_then_tz_then_the_system():
    """--tz wins over $TZ; $TZ naming an IANA zone is used; a POSIX rule in $TZ (or no $TZ)
    leaves the process's local zone (None)."""
    assert zone_label(resolve_zone("Europe/Helsinki", {"TZ": "Etc/GMT-2"})) == "Europe/Helsinki"
    assert zone_label(resolve_zone(None, {"TZ": "Etc/GMT-2"})) == "Etc/GMT-2"
    assert zone_label(resolve_zone(None, {"TZ": ":Europe/Helsinki"})) == "Europe/Helsinki"
    assert resolve_zone(None, {"TZ": "EST5EDT,M3.2.0,M11.1.0"}) is None
    assert resolve_zone(None, {}) is None
    assert zone_label(None).startswith("local time (")


@pytest.mark.parametrize("name", ["Mars/Olympus", "", "../etc/passwd"])
def test_an_unknown_zone_is_named_in_the_error(name):
    with pytest.raises(ValueError, match="unknown time zone"):
        zone_named(name)
