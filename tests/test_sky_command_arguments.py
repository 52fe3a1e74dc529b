"""The place and start arguments the `nights` and `windows` commands share (planning/management/place.py): a
registered site as --site SLUG, as `due` and `import_nights` take it, or a bare position with --lat, --lon and --tz;
and --start, by default the place's today (the site's local date, or the local date in --tz), as the recoat planner
page defaults it. Bad combinations are refused naming the options.

References checked against: the IANA time-zone offsets written beside each moment (Europe/Madrid is UTC+1 in winter,
UTC+2 in summer; Pacific/Kiritimati UTC+14, since 1995), checked by ``zoneinfo`` in the first test; the commands'
own output for the same explicit --start. The site and its nights are invented.
"""
from __future__ import annotations

import datetime as dt
import json
from io import StringIO
from zoneinfo import ZoneInfo

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError
from django.utils import timezone

# 16 Dec 2026 23:30 UTC: already 17 Dec (00:30) in Madrid (UTC+1 in winter), still 16 Dec in UTC.
WINTER_NIGHT_UTC = dt.datetime(2026, 12, 16, 23, 30, tzinfo=dt.UTC)
# 19 Mar 2026 23:30 UTC: 20 Mar (00:30) in Madrid, still 19 Mar in UTC.
MARCH_NIGHT_UTC = dt.datetime(2026, 3, 19, 23, 30, tzinfo=dt.UTC)
# 15 Jun 2026 11:30 UTC: 16 Jun (01:30) on Kiritimati (UTC+14).
JUNE_NOON_UTC = dt.datetime(2026, 6, 15, 11, 30, tzinfo=dt.UTC)


def test_the_hand_worked_local_dates_agree_with_the_tz_database():
    assert WINTER_NIGHT_UTC.astimezone(ZoneInfo("Europe/Madrid")).date() == dt.date(2026, 12, 17)
    assert MARCH_NIGHT_UTC.astimezone(ZoneInfo("Europe/Madrid")).date() == dt.date(2026, 3, 20)
    assert JUNE_NOON_UTC.astimezone(ZoneInfo("Pacific/Kiritimati")).date() == dt.date(2026, 6, 16)


def _run(command: str, *args: str) -> str:
    out = StringIO()
    call_command(command, *args, stdout=out)
    return out.getvalue()


@pytest.fixture
def sky(site):
    """Four moonless dark hours every night of December 2026 and January 2027 at the site (no astropy needed)."""
    from observatory_ops.planning.models import NightSky

    first = dt.date(2026, 12, 1)
    NightSky.objects.bulk_create(
        NightSky(site=site, night=first + dt.timedelta(days=i), dark_hours=8, moon_illumination=0.5,
                 moonless_dark_hours=4) for i in range(62)
    )
    return site


def test_windows_takes_the_site_as_an_option_and_starts_on_the_sites_today(sky, monkeypatch):
    """`windows --site SLUG --days 3` with no --start: the same windows as from the site's today given by hand (17
    December in Madrid while it is still the 16th in UTC)."""
    monkeypatch.setattr(timezone, "now", lambda: WINTER_NIGHT_UTC)
    defaulted = json.loads(_run("windows", "--site", "test-hill", "--days", "3", "--horizon-days", "21", "--json"))
    given = json.loads(_run("windows", "--site", "test-hill", "--days", "3", "--horizon-days", "21", "--start",
                            "2026-12-17", "--json"))
    assert defaulted == given
    assert defaulted["site"] == "test-hill"
    # By hand (Monday-to-Friday crew, every night costing the same): from Thursday 17 three working days span the
    # weekend, 5 nights; the cheapest is Monday 21 to Wednesday 23, 3 nights. Had the search begun on UTC's date, the
    # 16th, Wednesday 16 to Friday 18 would have been as cheap and earlier.
    assert [(w["start"], w["end"]) for w in defaulted["windows"][:1]] == [("2026-12-21", "2026-12-23")]
    from_utc_date = json.loads(_run("windows", "--site", "test-hill", "--days", "3", "--horizon-days", "21",
                                    "--start", "2026-12-16", "--json"))
    assert from_utc_date["windows"][0]["start"] == "2026-12-16"


def test_nights_takes_the_site_as_an_option_and_starts_on_the_sites_today(site, monkeypatch):
    monkeypatch.setattr(timezone, "now", lambda: MARCH_NIGHT_UTC)
    records = json.loads(_run("nights", "--site", "test-hill", "--days", "2", "--json"))
    assert [r["date"] for r in records] == ["2026-03-20", "2026-03-21"]
    assert records == json.loads(_run("nights", "--site", "test-hill", "--start", "2026-03-20", "--days", "2",
                                      "--json"))


def test_at_a_bare_position_the_start_is_today_in_its_time_zone(db, monkeypatch):
    monkeypatch.setattr(timezone, "now", lambda: JUNE_NOON_UTC)
    records = json.loads(_run("nights", "--lat", "1.9", "--lon", "-157.4", "--tz", "Pacific/Kiritimati", "--days",
                              "1", "--json"))
    assert [r["date"] for r in records] == ["2026-06-16"]
    found = json.loads(_run("windows", "--lat", "1.9", "--lon", "-157.4", "--tz", "Pacific/Kiritimati", "--days", "2",
                            "--horizon-days", "7", "--alternatives", "0", "--json"))
    assert "2026-06-16" <= found["windows"][0]["start"] <= "2026-06-21"  # within the 7 nights from the 16th


@pytest.mark.parametrize("command", ["nights", "windows"])
@pytest.mark.parametrize(
    ("args", "message"),
    [
        # The site given bare, as these commands once took it: refused with the option to use.
        (["test-hill"], r"^give the site as --site test-hill \(the site is an option now"),
        (["--site", "test-hill", "--lat", "40"], r"^give either --site or --lat/--lon/--tz, not both$"),
        (["--site", "nowhere"], r"^no site with slug 'nowhere'$"),
        (["--lat", "40", "--lon", "-3"], r"^give --site SLUG, or all of --lat, --lon and --tz \(missing --tz\)$"),
        (["--site", "test-hill", "--start", "17/12/2026"], r"^--start must be a date as YYYY-MM-DD, not '17/12/2026'$"),
    ],
)
def test_bad_place_or_start_is_refused_naming_the_option(site, command: str, args: list[str], message: str):
    with pytest.raises(CommandError, match=message):
        _run(command, *args, "--days", "3")


@pytest.mark.parametrize("command", ["nights", "windows"])
def test_a_bare_position_with_an_unknown_time_zone_and_no_start_is_refused_naming_it(db, command: str):
    with pytest.raises(CommandError, match="unknown time zone 'Mars/Olympus'"):
        _run(command, "--lat", "10", "--lon", "0", "--tz", "Mars/Olympus", "--days", "3")
