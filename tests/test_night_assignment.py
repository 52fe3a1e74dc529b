"""Specifications for observatory_ops.calc.night_of: which night a moment belongs to (no database).

Outside reference: the IANA time zone database, read through the standard library's zoneinfo (PEP 615),
and the legal daylight-saving rules it encodes, written out beside each case:

- United States (America/Denver, MST = UTC-7, MDT = UTC-6), Energy Policy Act of 2005: daylight time
  starts at 02:00 local on the second Sunday of March and ends at 02:00 local on the first Sunday of
  November. In 2025: 9 March and 2 November.
- European Union (Europe/Madrid, CET = UTC+1, CEST = UTC+2), Directive 2000/84/EC: summer time starts
  at 01:00 UTC on the last Sunday of March and ends at 01:00 UTC on the last Sunday of October. In 2025:
  30 March and 26 October.
- New South Wales (Australia/Sydney, AEST = UTC+10, AEDT = UTC+11): daylight time ends at 03:00 local
  on the first Sunday of April and starts at 02:00 local on the first Sunday of October. In 2025:
  6 April and 5 October.
"""
from __future__ import annotations

import datetime as dt
from zoneinfo import ZoneInfo

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from observatory_ops.calc.night_of import night_of

UTC = dt.UTC


def utc(*args: int) -> dt.datetime:
    return dt.datetime(*args, tzinfo=UTC)


# (zone, instant in UTC, the local wall clock it shows per the rules above, the night it belongs to)
CASES = [
    # Denver, spring change, night of Saturday 8 March 2025.
    ("America/Denver", utc(2025, 3, 9, 6, 30), "2025-03-08T23:30-07:00", dt.date(2025, 3, 8)),  # 23:30 MST
    ("America/Denver", utc(2025, 3, 9, 7, 30), "2025-03-09T00:30-07:00", dt.date(2025, 3, 8)),  # past midnight
    ("America/Denver", utc(2025, 3, 9, 9, 30), "2025-03-09T03:30-06:00", dt.date(2025, 3, 8)),  # after the jump
    ("America/Denver", utc(2025, 3, 9, 17, 59), "2025-03-09T11:59-06:00", dt.date(2025, 3, 8)),
    ("America/Denver", utc(2025, 3, 9, 18, 0), "2025-03-09T12:00-06:00", dt.date(2025, 3, 9)),  # next night
    # Denver, autumn change, night of Saturday 1 November 2025.
    ("America/Denver", utc(2025, 11, 2, 5, 30), "2025-11-01T23:30-06:00", dt.date(2025, 11, 1)),  # 23:30 MDT
    ("America/Denver", utc(2025, 11, 2, 7, 30), "2025-11-02T01:30-06:00", dt.date(2025, 11, 1)),  # first 01:30
    ("America/Denver", utc(2025, 11, 2, 8, 30), "2025-11-02T01:30-07:00", dt.date(2025, 11, 1)),  # second 01:30
    ("America/Denver", utc(2025, 11, 2, 10, 30), "2025-11-02T03:30-07:00", dt.date(2025, 11, 1)),
    # Madrid, spring change, night of Saturday 29 March 2025.
    ("Europe/Madrid", utc(2025, 3, 29, 22, 30), "2025-03-29T23:30+01:00", dt.date(2025, 3, 29)),  # 23:30 CET
    ("Europe/Madrid", utc(2025, 3, 29, 23, 30), "2025-03-30T00:30+01:00", dt.date(2025, 3, 29)),
    ("Europe/Madrid", utc(2025, 3, 30, 1, 30), "2025-03-30T03:30+02:00", dt.date(2025, 3, 29)),  # after jump
    # Madrid, autumn change, night of Saturday 25 October 2025.
    ("Europe/Madrid", utc(2025, 10, 25, 21, 30), "2025-10-25T23:30+02:00", dt.date(2025, 10, 25)),
    ("Europe/Madrid", utc(2025, 10, 26, 0, 30), "2025-10-26T02:30+02:00", dt.date(2025, 10, 25)),  # first
    ("Europe/Madrid", utc(2025, 10, 26, 1, 30), "2025-10-26T02:30+01:00", dt.date(2025, 10, 25)),  # second
    ("Europe/Madrid", utc(2025, 10, 26, 10, 59), "2025-10-26T11:59+01:00", dt.date(2025, 10, 25)),
    ("Europe/Madrid", utc(2025, 10, 26, 11, 0), "2025-10-26T12:00+01:00", dt.date(2025, 10, 26)),
    # Sydney: southern hemisphere, daylight time ends in April and starts in October.
    ("Australia/Sydney", utc(2025, 4, 5, 13, 30), "2025-04-06T00:30+11:00", dt.date(2025, 4, 5)),
    ("Australia/Sydney", utc(2025, 4, 5, 17, 30), "2025-04-06T03:30+10:00", dt.date(2025, 4, 5)),
    ("Australia/Sydney", utc(2025, 10, 4, 13, 30), "2025-10-04T23:30+10:00", dt.date(2025, 10, 4)),
    ("Australia/Sydney", utc(2025, 10, 4, 16, 30), "2025-10-05T03:30+11:00", dt.date(2025, 10, 4)),
]


@pytest.mark.parametrize(("zone", "instant", "wall_clock", "night"), CASES)
def test_night_is_the_local_date_of_its_evening_across_midnight_and_dst_changes(zone, instant, wall_clock, night):
    # The wall clock written in the case is derived by hand from the legal rule; zoneinfo must agree,
    # which shows the instant sits where the case says (before or after the clock change).
    assert instant.astimezone(ZoneInfo(zone)).isoformat(timespec="minutes") == wall_clock
    assert night_of(instant, zone) == night


@pytest.mark.parametrize(
    ("zone", "evening", "late_evening_utc", "early_morning_utc"),
    [
        # Denver 2025-03-08 23:30 MST = 06:30 UTC; 2025-03-09 03:30 MDT = 09:30 UTC (the clock jumped 02:00 -> 03:00).
        ("America/Denver", dt.date(2025, 3, 8), utc(2025, 3, 9, 6, 30), utc(2025, 3, 9, 9, 30)),
        # Madrid 2025-03-29 23:30 CET = 22:30 UTC; 2025-03-30 03:30 CEST = 01:30 UTC (02:00 -> 03:00 local).
        ("Europe/Madrid", dt.date(2025, 3, 29), utc(2025, 3, 29, 22, 30), utc(2025, 3, 30, 1, 30)),
    ],
)
def test_night_of_the_spring_change_is_one_night(zone, evening, late_evening_utc, early_morning_utc):
    # Four hours apart on the wall clock (23:30 -> 03:30) but only three in real time: the jump lies between.
    assert early_morning_utc - late_evening_utc == dt.timedelta(hours=3)
    assert late_evening_utc.astimezone(ZoneInfo(zone)).hour == 23
    assert early_morning_utc.astimezone(ZoneInfo(zone)).hour == 3
    assert night_of(late_evening_utc, zone) == night_of(early_morning_utc, zone) == evening


@pytest.mark.parametrize(
    ("zone", "evening", "hours_long"),
    [
        ("America/Denver", dt.date(2025, 3, 8), 23),  # spring: one hour skipped
        ("America/Denver", dt.date(2025, 11, 1), 25),  # autumn: one hour repeated
        ("Europe/Madrid", dt.date(2025, 3, 29), 23),
        ("Europe/Madrid", dt.date(2025, 10, 25), 25),
        ("Europe/Madrid", dt.date(2025, 6, 14), 24),  # an ordinary summer night
    ],
)
def test_every_moment_from_local_noon_to_next_local_noon_belongs_to_one_night(zone, evening, hours_long):
    tz = ZoneInfo(zone)
    opens = dt.datetime.combine(evening, dt.time(12), tz).astimezone(UTC)
    closes = dt.datetime.combine(evening + dt.timedelta(days=1), dt.time(12), tz).astimezone(UTC)
    assert closes - opens == dt.timedelta(hours=hours_long)  # the IANA rules make this night 23, 24 or 25 h
    steps = int((closes - opens) / dt.timedelta(minutes=10))
    moments = [opens + dt.timedelta(minutes=10 * i) for i in range(steps)] + [closes - dt.timedelta(seconds=1)]
    assert {night_of(m, zone) for m in moments} == {evening}
    assert night_of(opens - dt.timedelta(seconds=1), zone) == evening - dt.timedelta(days=1)
    assert night_of(closes, zone) == evening + dt.timedelta(days=1)


def test_the_same_instant_written_with_another_offset_belongs_to_the_same_night():
    instant = utc(2025, 3, 9, 9, 30)
    as_tokyo = instant.astimezone(ZoneInfo("Asia/Tokyo"))
    assert night_of(as_tokyo, "America/Denver") == night_of(instant, "America/Denver") == dt.date(2025, 3, 8)


ZONES = [
    "UTC", "America/Denver", "Europe/Madrid", "Australia/Sydney", "America/Santiago", "Asia/Kathmandu",
    "Australia/Lord_Howe", "Pacific/Chatham", "Atlantic/Canary", "Pacific/Honolulu",
]


@settings(max_examples=100, deadline=None)
@given(
    instant=st.datetimes(dt.datetime(2000, 1, 1), dt.datetime(2037, 12, 31), timezones=st.just(UTC)),
    zone=st.sampled_from(ZONES),
)
def test_a_moment_lies_between_the_local_noons_that_open_and_close_its_night(instant, zone):
    # Checked the other way round from the function: zoneinfo turns the two local noons into instants.
    tz = ZoneInfo(zone)
    night = night_of(instant, zone)
    opens = dt.datetime.combine(night, dt.time(12), tz)
    closes = dt.datetime.combine(night + dt.timedelta(days=1), dt.time(12), tz)
    assert opens <= instant < closes


@pytest.mark.parametrize(
    ("moment", "zone", "message"),
    [
        (dt.datetime(2025, 3, 9, 6, 30), "America/Denver", "aware datetime"),
        (utc(2025, 3, 9, 6, 30), "Mars/Olympus_Mons", "IANA time zone"),
        (utc(2025, 3, 9, 6, 30), "", "IANA time zone"),
    ],
)
def test_a_naive_moment_or_an_unknown_zone_is_refused_with_a_clear_error(moment, zone, message):
    with pytest.raises(ValueError, match=message):
        night_of(moment, zone)
