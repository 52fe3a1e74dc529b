"""A condition trigger's forecast is the site's own date, not the UTC date of the crossing.

A reviewer's case: a site west of Greenwich takes its readings in the local evening, so the trend reaches its limit
in the local evening too, when it is already the next day in UTC; the forecast came out a day late. The date of a
trend (its forecast and both ends of its band, and the chart's mark of the crossing) is now the local date at the
site (``planning.services.trend_date``, with ``Site.time_zone``).

Each expected date is worked out independently of the project's code (which calls ``scipy.stats.theilslopes``): the
trend from the Theil-Sen definition in plain Python (the median of all pairwise slopes, Theil 1950 / Sen 1968, and
Sen's rank-based 95 % interval, ``tests.test_calc_trend.sen_interval``), the line through the median point, the
crossing moment by hand from that line, and the local date with the IANA time zone database through ``zoneinfo``
(PEP 615).
"""
from __future__ import annotations

import datetime as dt
import re
import statistics
import zoneinfo

import pytest
from conftest import constant_sky

from observatory_ops.logbook.models import Reading
from observatory_ops.planning import plots, selectors, services
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.registry.models import Site, Subsystem, Telescope
from tests.test_calc_trend import sen_interval

ZONE_NAME = "America/Denver"  # UTC-7 in January and February (Mountain Standard Time)
DENVER = zoneinfo.ZoneInfo(ZONE_NAME)
#: The site's "today" for the recompute, and the first reading: in winter, so no daylight-saving change falls
#: between the readings and the crossing.
TODAY = dt.date(2026, 1, 20)
FIRST = dt.datetime(2026, 1, 2, 21, 0, tzinfo=DENVER)  # 21:00 local = 04:00 UTC on 3 Jan
LIMIT_S = 1.0
#: Days after the first reading on which the readings are taken, each at 21:00 local.
DAYS = (0, 2, 5, 7, 9, 12, 14, 16)


def _site_with_readings(users, values: list[float]) -> tuple[Site, ServicePlan, Subsystem]:
    """An invented site at about 111 degrees west on Mountain time, its drive watching settle time (at most 1 s),
    with ``values`` read at 21:00 local on ``DAYS`` after the first reading; recomputed on ``TODAY``."""
    site = Site.objects.create(name="Juniper Flat", slug="juniper-flat", latitude_deg=35.1, longitude_deg=-111.4,
                               elevation_m=2100, time_zone=ZONE_NAME)
    telescope = Telescope.objects.create(site=site, name="J1", aperture_m=0.4, mount="fork")
    drive = Subsystem.objects.create(telescope=telescope, kind="axis1_drive", name="Drive")
    plan = ServicePlan.objects.create(subsystem=drive, name="Settle", counting_from=dt.date(2026, 1, 1))
    Trigger.objects.create(plan=plan, metric="reading", limit=LIMIT_S, quantity="settle_time_s")
    for day, value in zip(DAYS, values, strict=True):
        Reading.objects.create(subsystem=drive, quantity="settle_time_s", unit="s", value=value,
                               taken_at=FIRST + dt.timedelta(days=day), taken_by=users["technician"])
    # A constant sky, so the recompute's usage model never waits for astropy (the reading trigger does not use it).
    constant_sky(site, TODAY - dt.timedelta(days=30), TODAY + dt.timedelta(days=services.HORIZON_DAYS + 1))
    services.site_recompute(site, TODAY)
    return site, plan, drive


def _local_date(offset_days: float) -> dt.date:
    """Independent: the Denver date of the moment ``offset_days`` after the first reading (zoneinfo)."""
    return (FIRST + dt.timedelta(days=float(offset_days))).astimezone(DENVER).date()


def test_an_evening_crossing_west_of_greenwich_is_dated_by_the_sites_own_calendar(db, users):
    # Settle time on the line 0.5 s + 0.01 s/day: 1 s is reached (1.0 - 0.5) / 0.01 = 50 days after the first
    # reading (hand computation), at 21:00 local on 21 Feb 2026, which is 04:00 UTC on 22 Feb.
    values = [0.5 + 0.01 * d for d in DAYS]
    site, plan, drive = _site_with_readings(users, values)
    status = PlanStatus.objects.get(plan=plan)

    # Independent check: the Theil-Sen line from its definition (plain Python), zoneinfo for the local date.
    slope, _, _ = sen_interval(DAYS, values)
    pivot_x, pivot_y = statistics.median(DAYS), statistics.median(values)
    crossing = pivot_x + (LIMIT_S - pivot_y) / slope
    assert crossing == pytest.approx(50.0)
    moment = FIRST + dt.timedelta(days=crossing)
    assert moment.astimezone(dt.UTC).date() == dt.date(2026, 2, 22)  # the UTC date: the day late the review found
    assert _local_date(crossing) == dt.date(2026, 2, 21)

    assert status.forecast_date == dt.date(2026, 2, 21)
    assert status.earliest == status.latest == dt.date(2026, 2, 21)  # readings on a line: no spread of slopes
    assert "forecast 21 Feb 2026" in status.reason

    # The subsystem chart marks the crossing on the same date (its label and its place on the axis of days).
    taken = list(drive.readings.order_by("taken_at").values_list("taken_at", "value"))
    line = selectors.reading_trend(taken, plan.counting_from, site.zone, LIMIT_S, True)
    assert line.crossing_on == dt.date(2026, 2, 21)
    assert plots._date(line.crossing) == dt.date(2026, 2, 21)


def test_the_forecast_and_both_ends_of_its_band_are_local_dates(db, users):
    """Scattered readings, so the slope's 95 % interval has width: each of the three dates is the local date of
    the moment its slope reaches the limit, the line pivoting on the median point (as theilslopes makes its
    intercept), and never before the site's today."""
    scatter = (0.004, -0.003, 0.002, -0.005, 0.001, 0.003, -0.002, 0.0)
    values = [0.5 + 0.01 * d + e for d, e in zip(DAYS, scatter, strict=True)]
    _, plan, _ = _site_with_readings(users, values)
    status = PlanStatus.objects.get(plan=plan)

    # Independent check: the Theil-Sen slope from its definition, the median of all pairwise slopes (Sen 1968,
    # Theil 1950), and Sen's (1968) rank-based 95 % interval, in plain Python (tests.test_calc_trend.sen_interval;
    # with n = 8 readings the ranks M1 = 6.08 and M2 = 21.92 are rounded to the nearest, 6 and 22); the line through
    # the median point (Conover's convention); zoneinfo for the local dates.
    slope, low, high = sen_interval(DAYS, values, 0.95)
    pivot_x, pivot_y = statistics.median(DAYS), statistics.median(values)
    central, earliest, latest = (max(_local_date(pivot_x + (LIMIT_S - pivot_y) / s), TODAY) for s in (slope, high, low))
    assert earliest < central < latest  # the scatter gives the band width
    assert (status.forecast_date, status.earliest, status.latest) == (central, earliest, latest)
    # The basis gives the line's value at the first reading too, so the date can be rebuilt from the page (an
    # onboarding review had to guess the intercept): the line through the median point, at day 0.
    from observatory_ops.planning.selectors import significant

    assert f"the line at {significant(pivot_y - slope * pivot_x)} s on " in status.basis
    # Its time is the site's, said so (a manager's review read a time with no zone on the due list).
    assert re.search(r"on \d\d \w{3} \d{4} \d\d:\d\d \(site time, [A-Za-z_/]+\), the first of them", status.basis)
