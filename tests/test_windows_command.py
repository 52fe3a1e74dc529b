"""The `windows` command: at a registered site the work follows the site's crew as the recoat planner page does
(it starts on a crew working day and pauses over the weekend and the listed days off, whose nights are lost too
and counted); at a bare position there is no crew, and every day counts as a working day.

References checked against: hand-worked calendars in the comments (December 2026: Thursday 24 and Friday 25 are
the invented closure, Saturday 19 the first weekend day); numpy's business-day calendar (``numpy.is_busday`` with
the days off as holidays, independent of calc.windows) for the days a window may start on; and, at a bare position,
the plain search of N consecutive nights the command made before the crew: ``calc.windows.cheapest_crew_windows``
for one job of N days with a crew working every day and no day off (its own tests in tests/test_calc_windows.py).
The site and its nights are invented.
"""
from __future__ import annotations

import datetime as dt
import json
from io import StringIO

import numpy as np
import pytest
from django.core.management import call_command
from django.core.management.base import CommandError

from observatory_ops.calc import forecast, nights, windows

START = dt.date(2026, 12, 17)  # a Thursday
HORIZON = 21  # to Wednesday 6 January 2027
#: The demo's invented end-of-year closure.
CLOSURE = {day: "end-of-year closure" for day in (dt.date(2026, 12, 24), dt.date(2026, 12, 25), dt.date(2026, 12, 31),
                                                  dt.date(2027, 1, 1))}
BRIGHT = (dt.date(2026, 12, 22), dt.date(2026, 12, 29))  # nights without moonless dark hours, inclusive
PRIOR = forecast.PRIOR_OPEN_FRACTION  # a site without history: every month uses the prior open fraction


@pytest.fixture
def site(site):
    """A Monday-to-Friday crew (the default) off for the end-of-year closure; 4 moonless dark hours every night
    except from Tuesday 22 to Tuesday 29 December, which have none (they cost nothing to lose)."""
    from observatory_ops.planning.models import NightSky
    from observatory_ops.registry.models import CrewDayOff

    for day, note in CLOSURE.items():
        CrewDayOff.objects.create(site=site, date=day, note=note)
    NightSky.objects.bulk_create(
        NightSky(site=site, night=night, dark_hours=8, moon_illumination=0.5,
                 moonless_dark_hours=0 if BRIGHT[0] <= night <= BRIGHT[1] else 4)
        for night in (START + dt.timedelta(days=i) for i in range(HORIZON))
    )
    return site


def _run(*args: str) -> str:
    out = StringIO()
    call_command("windows", *args, stdout=out)
    return out.getvalue()


def _at_site(*more: str) -> str:
    return _run("--site", "test-hill", "--days", "3", "--start", START.isoformat(), "--horizon-days", str(HORIZON),
                *more)


def test_at_a_site_the_windows_follow_the_crew_and_list_its_days_off(site) -> None:
    # By hand, 3 crew working days (Mon-Fri, less Thu 24, Fri 25, Thu 31 December and Fri 1 January), nights of
    # 4 h x 50 % = 2 h except the free nights 22-29 December:
    # - begun Tue 22: Tue 22, Wed 23, then (closure, weekend) Mon 28: 22-28, 7 nights, all free: 0 h, days off 24, 25
    #   (Wed 23 to Tue 29 costs 0 h too, but the earlier start wins the tie, and it overlaps);
    # - then, overlapping none: Mon 4-Wed 6 January, 3 nights, 6 h (Thu 17 costs 10 h, Tue 29 to Mon 4 12 h, Wed 30
    #   to Tue 5 14 h; Fri 18, Mon 21 and Mon 28 overlap the first);
    # - then Thu 17, Fri 18, (weekend) Mon 21: 17-21, 5 nights, 10 h (Tue 29 and Wed 30 overlap 4 January);
    # - nothing else fits without overlapping.
    text = _at_site()
    assert "3 crew working days at Test Hill (Mon–Fri, less its listed crew days off)" in text
    lines = [line for line in text.splitlines() if " to " in line]
    assert lines == [
        "Tue 2026-12-22 to Mon 2026-12-28: 7 nights lost, 0.0 h; crew days off inside: "
        "Thu 2026-12-24 (end-of-year closure); Fri 2026-12-25 (end-of-year closure)",
        "Mon 2027-01-04 to Wed 2027-01-06: 3 nights lost, 6.0 h; crew days off inside: none",
        "Thu 2026-12-17 to Mon 2026-12-21: 5 nights lost, 10.0 h; crew days off inside: none",
    ]


def test_at_a_site_the_json_gives_each_windows_nights_lost_cost_and_days_off(site) -> None:
    found = json.loads(_at_site("--json"))
    assert set(found) == {"site", "days_of_work", "crew_weekdays", "windows"}
    assert (found["site"], found["days_of_work"], found["crew_weekdays"]) == ("test-hill", 3, [1, 2, 3, 4, 5])
    first = found["windows"][0]
    assert first == {"start": "2026-12-22", "end": "2026-12-28", "nights_lost": 7, "cost": 0.0,
                     "days_off": [{"date": "2026-12-24", "note": "end-of-year closure"},
                                  {"date": "2026-12-25", "note": "end-of-year closure"}]}
    # Nights x 4 moonless dark hours x the prior open fraction: 0, then 3 and 5 nights.
    assert [w["cost"] for w in found["windows"]] == [0.0, 3 * 4 * PRIOR, 5 * 4 * PRIOR]


@pytest.mark.parametrize("alternatives", ["0", "3"])
def test_no_window_starts_on_a_weekend_or_a_crew_day_off(site, alternatives: str) -> None:
    found = json.loads(_at_site("--json", "--alternatives", alternatives))["windows"]
    assert found
    holidays = np.array(list(CLOSURE), dtype="datetime64[D]")
    for window in found:
        # Source: numpy.is_busday, Monday-to-Friday weekmask, the closure as holidays.
        assert np.is_busday(np.datetime64(window["start"]), weekmask="1111100", holidays=holidays)


def test_a_site_whose_crew_works_every_day_gets_consecutive_nights(site) -> None:
    from observatory_ops.registry.models import CrewDayOff

    site.crew_weekdays = "1234567"
    site.save()
    CrewDayOff.objects.filter(site=site).delete()
    found = json.loads(_at_site("--json", "--alternatives", "0"))["windows"]
    # By hand: three free nights in a row, the earliest being Tue 22-Thu 24 December.
    assert found == [{"start": "2026-12-22", "end": "2026-12-24", "nights_lost": 3, "cost": 0.0, "days_off": []}]


def test_at_a_bare_position_every_day_is_a_working_day_as_before(db) -> None:
    args = ["--lat", "40", "--lon", "-3", "--tz", "Europe/Madrid", "--days", "4", "--start", "2027-03-01",
            "--horizon-days", "30"]
    text = _run(*args)
    assert "4 consecutive days: a bare position has no crew, so every day counts as a working day." in text
    assert "crew days off" not in text
    found = json.loads(_run(*args, "--json"))
    assert (found["site"], found["crew_weekdays"]) == (None, [1, 2, 3, 4, 5, 6, 7])
    # Source: the plain search of 4 consecutive nights over the same nights, the command's search before the crew
    # (one job of 4 days, a crew working every day and no day off).
    sky = nights.nights_for_range(nights.Site(40, -3, 0, "Europe/Madrid"), dt.date(2027, 3, 1), 30)
    plain = windows.cheapest_crew_windows(windows.night_cost(sky.moonless_dark_hours, np.full(30, PRIOR)),
                                          [windows.Phase("work", 4, windows.TELESCOPE_WORK)], 1, windows.EVERY_DAY)
    assert [(w["start"], w["nights_lost"], w["cost"], w["days_off"]) for w in found["windows"]] == [
        ((dt.date(2027, 3, 1) + dt.timedelta(days=w.start_index)).isoformat(), 4, round(w.cost, 3), [])
        for w in plain
    ]


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--days", "0", "--horizon-days", "21"], "--days must be at least 1, not 0"),
        (["--days", "-2", "--horizon-days", "21"], "--days must be at least 1, not -2"),
        (["--days", "30", "--horizon-days", "21"], r"--days 30 is longer than the horizon \(--horizon-days 21\)"),
        (["--days", "3", "--horizon-days", "21", "--alternatives", "-1"], "--alternatives must be at least 0, not -1"),
    ],
)
def test_bad_options_are_refused_naming_the_option(site, args: list[str], message: str) -> None:
    with pytest.raises(CommandError, match=message):
        _run("--site", "test-hill", "--start", START.isoformat(), *args)


def test_a_horizon_the_crews_days_off_make_too_short_is_refused_saying_so(site) -> None:
    # By hand: 5 crew working days from Saturday 19 December over 7 nights (to Friday 25): no start fits. Begun on
    # Monday 21 the work takes Mon 21-Wed 23 and, after the closure and the weekend, Mon 28-Tue 29; later starts
    # end later still. Five days of work would fit seven nights were it not for the crew's days.
    with pytest.raises(CommandError, match="^no window for 5 days of work at the telescope: .* runs longer than the "
                                           "horizon of 7 days allows: lengthen the horizon$"):
        _run("--site", "test-hill", "--days", "5", "--start", "2026-12-19", "--horizon-days", "7")


def test_a_bare_position_off_the_earth_is_refused_naming_the_latitude(db) -> None:
    with pytest.raises(CommandError, match="^latitude must be between -90 and 90 degrees, not 95.0$"):
        _run("--lat", "95", "--lon", "-3", "--tz", "Europe/Madrid", "--days", "4", "--start", "2027-03-01")
