"""Time and place: the "longer than the night" check under the midnight sun, and on the nights the clocks change.

A review of time and place at four invented sites (52.2 N in Europe/London, 67.9 N in Europe/Stockholm, 44.1 S in
Pacific/Auckland, 19.8 N in Pacific/Honolulu) found:

1. a night with no sunset was never checked: ``{"night": "2026-06-21", "open_hours": 20}`` at 67.9 N came back with
   ``"check": []``. Under the midnight sun (the Sun never sets) the night lasts 0 h and open hours beyond the usual
   allowance (``LONGER_THAN_THE_NIGHT_H``) are named, saying so; in the polar night (the Sun never rises) nothing is
   questioned, as before;
2. on the night the clocks go back, "that night lasts 13.9 h there (sunset 17:46 to sunrise 06:42)" reads wrong to
   someone subtracting the clock times (12.9 h): such a night now says the clocks changed.

References, named beside each check: PyEphem (``ephem``, libastro, an independent ephemeris) for sunset, sunrise and
whether the Sun sets at all (``ephem.AlwaysUpError``: the midnight sun; ``ephem.NeverUpError``: the polar night), with
the conventions of tests/test_calc_nights.py (``pyephem_night``: the Sun's centre at -0:50, no refraction model); the
IANA time zone database through Python's ``zoneinfo`` for the clock changes (Europe/London leaves summer time at
01:00 UTC on the last Sunday of October and enters it at 01:00 UTC on the last Sunday of March; Pacific/Auckland
leaves it on the first Sunday of April and enters it on the last Sunday of September).
"""
from __future__ import annotations

import datetime as dt
import json
import re
from zoneinfo import ZoneInfo

import ephem
import numpy as np
import pytest
from django.urls import reverse
from test_calc_nights import PYEPHEM_SUNSET_HORIZON, _observer, pyephem_night

from observatory_ops.api import services as api_services
from observatory_ops.calc import nights as sky_calc
from observatory_ops.logbook import selectors, services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.logbook.selectors import LONGER_THAN_THE_NIGHT_H
from observatory_ops.planning.services import site_sky_refresh

#: The invented sites of the review (names and coordinates invented; the time zones real).
SITES = {
    "london": dict(name="Birch Knoll", slug="birch-knoll", latitude_deg=52.2, longitude_deg=-1.3, elevation_m=90,
                   time_zone="Europe/London"),
    "stockholm": dict(name="Fell Ridge", slug="fell-ridge", latitude_deg=67.9, longitude_deg=20.2, elevation_m=420,
                      time_zone="Europe/Stockholm"),
    "auckland": dict(name="Tussock Rise", slug="tussock-rise", latitude_deg=-44.1, longitude_deg=170.4,
                     elevation_m=1000, time_zone="Pacific/Auckland"),
    "honolulu": dict(name="Cinder Flat", slug="cinder-flat", latitude_deg=19.8, longitude_deg=-155.9, elevation_m=900,
                     time_zone="Pacific/Honolulu"),
}

MIDSUMMER = dt.date(2026, 6, 21)  # 67.9 N: the Sun does not set (PyEphem: AlwaysUpError, checked below)
MIDWINTER = dt.date(2025, 12, 21)  # 67.9 N: the Sun does not rise (PyEphem: NeverUpError, checked below)
#: Long after every night below: each is measured whole (``now`` past its sunrise).
LONG_AFTER = dt.datetime(2027, 6, 1, tzinfo=dt.UTC)


def _site(key: str):
    from observatory_ops.registry.models import Site

    return Site.objects.create(**SITES[key])


def _sky(site, *nights: dt.date):
    for night in nights:
        site_sky_refresh(site, night - dt.timedelta(days=1), night + dt.timedelta(days=1))
    return site


def _pyephem_sun_sets(site, night: dt.date) -> bool | None:
    """PyEphem: does the Sun's centre go below -0:50 after the local noon of ``night``? False where it never sets
    (``AlwaysUpError``), None where it never rises (``NeverUpError``), True where it sets."""
    noon = dt.datetime.combine(night, dt.time(12), ZoneInfo(site.time_zone))
    try:
        _observer(site, noon, PYEPHEM_SUNSET_HORIZON).next_setting(ephem.Sun(), use_center=True)
    except ephem.AlwaysUpError:
        return False
    except ephem.NeverUpError:
        return None
    return True


def _night(site, night: dt.date, open_hours: float) -> NightUsage:
    return NightUsage.objects.create(site=site, night=night, open_hours=open_hours)


# --- 1. the midnight sun -----------------------------------------------------------------------------------------


@pytest.mark.django_db
def test_the_api_names_open_hours_under_the_midnight_sun(client):
    site = _sky(_site("stockholm"), MIDSUMMER)
    assert _pyephem_sun_sets(site, MIDSUMMER) is False  # PyEphem: AlwaysUpError, the Sun never sets that night
    secret = api_services.api_token_create(site, "dome computer")[1]
    answer = client.post(reverse("api-nights", args=[site.slug]), data=json.dumps({"night": "2026-06-21",
                         "open_hours": 20}), content_type="application/json", HTTP_AUTHORIZATION=f"Bearer {secret}")
    assert answer.status_code == 200 and answer.json()["created"] == 1  # stored as sent, as any night
    assert answer.json()["check"] == [
        "21 Jun 2026: 20 h open, but the Sun does not set that night there (midnight sun)"]


@pytest.mark.django_db
def test_under_the_midnight_sun_the_night_is_0_h_and_the_usual_allowance_holds(recomputes_recorded):
    site = _sky(_site("stockholm"), MIDSUMMER)
    within = _night(site, MIDSUMMER, LONGER_THAN_THE_NIGHT_H)  # opened in the light night, within the allowance
    assert selectors.nights_longer_than_the_night(site, [within], now=LONG_AFTER) == []
    within.open_hours = LONGER_THAN_THE_NIGHT_H + 0.5
    (said,) = selectors.nights_longer_than_the_night(site, [within], now=LONG_AFTER)
    assert said == "21 Jun 2026: 2.5 h open, but the Sun does not set that night there (midnight sun)"


@pytest.mark.django_db
def test_the_polar_night_is_not_questioned(client):
    """The Sun never rises: the whole day is night, and any open hours may be."""
    site = _sky(_site("stockholm"), MIDWINTER)
    assert _pyephem_sun_sets(site, MIDWINTER) is None  # PyEphem: NeverUpError, the Sun never rises that day
    secret = api_services.api_token_create(site, "dome computer")[1]
    answer = client.post(reverse("api-nights", args=[site.slug]), data=json.dumps({"night": "2025-12-21",
                         "open_hours": 22}), content_type="application/json", HTTP_AUTHORIZATION=f"Bearer {secret}")
    assert answer.status_code == 200 and answer.json()["created"] == 1 and answer.json()["check"] == []


@pytest.mark.django_db
def test_the_import_and_the_log_page_say_so_too(client, users, recomputes_recorded):
    site = _sky(_site("stockholm"), MIDSUMMER)
    report = services.nights_import(site, b"night,open_hours\n2026-06-21,19.5\n")
    assert report.longer_than_the_night == [
        "21 Jun 2026: 19.5 h open, but the Sun does not set that night there (midnight sun)"]
    assert "Check 1 night longer than the night, stored as sent" in report.summary
    client.force_login(users["technician"])
    page = client.post(reverse("night-log", args=[site.slug]), {"night": "2026-06-22", "open_hours": "18"},
                       follow=True).content.decode()
    assert "22 Jun 2026: 18 h open, but the Sun does not set that night there (midnight sun)" in page


def test_the_sun_up_at_midnight_agrees_with_pyephem_over_a_year_at_67_9_n():
    """``calc.nights.sun_up_at_midnight`` (a pure helper: it changes none of ``nights_for_range``'s results) tells the
    midnight sun from the polar night on every night of 2026 that has neither sunset nor sunrise; the reference is
    PyEphem's AlwaysUpError / NeverUpError after the night's local noon."""
    where = sky_calc.Site(67.9, 20.2, 420.0, "Europe/Stockholm")
    table = sky_calc.nights_for_range(where, dt.date(2026, 1, 1), 365)
    no_crossing = np.isnat(table.sunset_utc) & np.isnat(table.sunrise_utc)
    nights = [night.astype(dt.date) for night in table.dates[no_crossing]]
    up = sky_calc.sun_up_at_midnight(where, nights)
    expected = [_pyephem_sun_sets(where, night) for night in nights]
    compared = [(bool(u), e) for u, e in zip(up, expected, strict=True) if e is not True]  # a grazing night: skip
    assert sum(u for u, _ in compared) > 30 and sum(not u for u, _ in compared) > 20  # both seasons are there
    assert all(u == (e is False) for u, e in compared)
    assert len(compared) >= len(nights) - 2


# --- 2. the nights the clocks change -----------------------------------------------------------------------------


def _clock(text: str) -> dt.timedelta:
    hours, minutes = map(int, text.split(":"))
    return dt.timedelta(hours=hours, minutes=minutes)


def _near_clock(text: str, moment: dt.datetime, zone: str) -> bool:
    """The clock time ``text`` is PyEphem's ``moment`` in ``zone`` to the minute (either side of a minute's edge)."""
    local = moment.astimezone(ZoneInfo(zone))
    near = {f"{local + dt.timedelta(seconds=s):%H:%M}" for s in (-60, 0, 60)}
    return text in near


NIGHT_SAID = re.compile(r"that night lasts ([\d.]+) h there \(sunset (\d\d:\d\d) to sunrise (\d\d:\d\d)\)(.*)$")


@pytest.mark.django_db
@pytest.mark.parametrize(("key", "night", "change", "by_the_clock_h"), [
    ("london", dt.date(2026, 10, 24), "back", +1),  # 25 Oct 2026, 01:00 UTC: BST (UTC+1) to GMT (UTC+0)
    ("london", dt.date(2026, 3, 28), "forward", -1),  # 29 Mar 2026, 01:00 UTC: GMT to BST
    ("auckland", dt.date(2026, 4, 4), "back", +1),  # 5 Apr 2026, 03:00 NZDT: UTC+13 to UTC+12
    ("auckland", dt.date(2026, 9, 26), "forward", -1),  # 27 Sep 2026, 02:00 NZST: UTC+12 to UTC+13
])
def test_a_night_the_clocks_change_says_so(recomputes_recorded, key, night, change, by_the_clock_h):
    site = _sky(_site(key), night)
    reference = pyephem_night(site, night)
    length_h = (reference["sunrise"] - reference["sunset"]) / dt.timedelta(hours=1)
    zone = ZoneInfo(site.time_zone)
    # zoneinfo (the IANA time zone database): the offset at sunrise differs from that at sunset by the hour said.
    shift = reference["sunrise"].astimezone(zone).utcoffset() - reference["sunset"].astimezone(zone).utcoffset()
    assert shift == dt.timedelta(hours=-by_the_clock_h)
    report = services.nights_import(site, f"night,open_hours\n{night},20\n".encode())
    (said,) = report.longer_than_the_night
    found = NIGHT_SAID.search(said)
    assert found, said
    lasts, sunset, sunrise, note = float(found.group(1)), found.group(2), found.group(3), found.group(4)
    assert lasts == pytest.approx(length_h, abs=0.06)  # PyEphem's sunset to sunrise
    assert _near_clock(sunset, reference["sunset"], site.time_zone)
    assert _near_clock(sunrise, reference["sunrise"], site.time_zone)
    assert note == f" (the clocks went {change} an hour that night)"
    # What the note explains: the clock times subtract to the night's length the other way by the hour.
    by_the_clock = (_clock(sunrise) - _clock(sunset)) % dt.timedelta(days=1) / dt.timedelta(hours=1)
    assert by_the_clock == pytest.approx(length_h - by_the_clock_h, abs=0.06)
    assert f"(the clocks went {change} an hour that night)" in report.summary


@pytest.mark.django_db
@pytest.mark.parametrize(("key", "night"), [
    ("london", dt.date(2026, 10, 23)),  # the night before the change: BST all night (zoneinfo)
    ("honolulu", dt.date(2026, 10, 24)),  # Pacific/Honolulu keeps UTC-10 all year (zoneinfo)
    ("auckland", dt.date(2026, 6, 20)),
])
def test_a_night_the_clocks_do_not_change_says_nothing_of_them(key, night):
    site = _sky(_site(key), night)
    reference = pyephem_night(site, night)
    zone = ZoneInfo(site.time_zone)
    assert reference["sunrise"].astimezone(zone).utcoffset() == reference["sunset"].astimezone(zone).utcoffset()
    (said,) = selectors.nights_longer_than_the_night(site, [_night(site, night, 23)], now=LONG_AFTER)
    found = NIGHT_SAID.search(said)
    assert found and found.group(4) == ""
    by_the_clock = (_clock(found.group(3)) - _clock(found.group(2))) % dt.timedelta(days=1) / dt.timedelta(hours=1)
    length_h = (reference["sunrise"] - reference["sunset"]) / dt.timedelta(hours=1)
    assert by_the_clock == pytest.approx(length_h, abs=0.04)  # PyEphem: the clock times subtract to the length


@pytest.mark.django_db
def test_a_night_still_going_on_across_the_change_says_so_too():
    """Measured to now (the night not over): the clocks went back between its sunset and now."""
    site = _sky(_site("london"), dt.date(2026, 10, 24))
    reference = pyephem_night(site, dt.date(2026, 10, 24))
    now = dt.datetime(2026, 10, 25, 3, 0, tzinfo=dt.UTC)  # 03:00 GMT, after the change at 01:00 UTC (zoneinfo)
    (said,) = selectors.nights_longer_than_the_night(site, [_night(site, dt.date(2026, 10, 24), 20)], now=now)
    lasted = float(re.search(r"has lasted ([\d.]+) h there so far", said).group(1))
    assert lasted == pytest.approx((now - reference["sunset"]) / dt.timedelta(hours=1), abs=0.06)  # PyEphem's sunset
    assert said.endswith(", now 03:00) (the clocks went back an hour that night)")
