"""The chart of a condition trigger shows the trend its date came from.

A site engineer's review: on an axis drive's chart the "limit reached" dot sat on the limit line at one date
while the line joining the readings crossed the limit weeks earlier, and the date came from neither. Now the
readings are dots, and the Theil-Sen line the recompute fitted (calc/trend.py) is drawn over the readings it was
fitted to and on to the limit, where the forecast is marked; a limit already reached is marked on the reading
that reached it. The readings below lie on a straight line, so the Theil-Sen slope (the median of the pairwise
slopes, Sen 1968) is that line's slope, and the crossing is worked by hand.
"""
from __future__ import annotations

import datetime as dt
import math
import re

import pytest

from observatory_ops.logbook.models import Reading
from observatory_ops.planning import plots, selectors, services
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.registry.models import Site, Subsystem, Telescope

NOON = dt.time(12)
#: Settle times on 0.5 s + 0.004 s/day from the first reading after the plan's start: 1.0 s is reached
#: (1.0 - 0.5) / 0.004 = 125 days after that first reading (hand computation).
START_S, SLOPE_S_PER_DAY, LIMIT_S = 0.5, 0.004, 1.0
DAYS_TO_LIMIT = (LIMIT_S - START_S) / SLOPE_S_PER_DAY


def _drive(users, values_at: list[tuple[dt.date, float]], counting_from: dt.date):
    """A UTC site whose axis drive has one plan watching settle time (at most 1 s) and the given noon readings."""
    site = Site.objects.create(name="Trend chart", slug="trend-chart", latitude_deg=30, longitude_deg=0,
                               time_zone="UTC")
    telescope = Telescope.objects.create(site=site, name="S1", aperture_m=0.5, mount="fork")
    drive = Subsystem.objects.create(telescope=telescope, kind="axis1_drive", name="Drive")
    plan = ServicePlan.objects.create(subsystem=drive, name="Settle", counting_from=counting_from)
    Trigger.objects.create(plan=plan, metric="reading", limit=LIMIT_S, quantity="settle_time_s")
    for day, value in values_at:
        Reading.objects.create(subsystem=drive, quantity="settle_time_s", unit="s", value=value,
                               taken_at=dt.datetime.combine(day, NOON, tzinfo=dt.UTC), taken_by=users["technician"])
    services.site_recompute(site)
    return site, drive, plan


def _chart(drive, plan) -> str:
    return str(next(p for p in selectors.plans_with_plots(drive) if p.pk == plan.pk).plot)


def _trend_polyline(svg: str) -> list[tuple[float, float]]:
    """The points of the chart's one polyline: the trend (the readings are not joined)."""
    lines = re.findall(r'<polyline points="([^"]+)"', svg)
    assert len(lines) == 1, lines
    return [tuple(map(float, point.split(","))) for point in lines[0].split()]


def _circles(svg: str, radius: str) -> list[tuple[float, float, str]]:
    return [(float(x), float(y), fill) for x, y, fill in
            re.findall(rf'<circle cx="([\d.-]+)" cy="([\d.-]+)" r="{radius}" fill="([^"]+)"', svg)]


def _distance_to_segment(point, a, b) -> float:
    (px, py), (ax, ay), (bx, by) = point, a, b
    t = max(0.0, min(1.0, ((px - ax) * (bx - ax) + (py - ay) * (by - ay)) / ((bx - ax) ** 2 + (by - ay) ** 2)))
    return math.hypot(px - (ax + t * (bx - ax)), py - (ay + t * (by - ay)))


@pytest.fixture
def rising(db, users):
    """Readings every 10 days for 90 days on the line above (the first 95 days ago), and two high ones from
    before the plan's start that the trend must leave out."""
    today = services.site_today(Site(time_zone="UTC"))
    first = today - dt.timedelta(days=95)
    older = [(first - dt.timedelta(days=40), 0.95), (first - dt.timedelta(days=25), 0.97)]
    fitted = [(first + dt.timedelta(days=d), START_S + SLOPE_S_PER_DAY * d) for d in range(0, 91, 10)]
    site, drive, plan = _drive(users, older + fitted, counting_from=first - dt.timedelta(days=5))
    return {"site": site, "drive": drive, "plan": plan, "first": first, "today": today}


def test_the_selectors_trend_is_the_one_the_forecast_came_from(rising):
    status = PlanStatus.objects.get(plan=rising["plan"])
    first = rising["first"]
    assert status.forecast_date == first + dt.timedelta(days=DAYS_TO_LIMIT)  # 125 days after the first reading
    taken = list(rising["drive"].readings.order_by("taken_at").values_list("taken_at", "value"))
    line = selectors.reading_trend(taken, first - dt.timedelta(days=5), dt.UTC, LIMIT_S, True)
    noon_of_first = first.toordinal() + 0.5  # on the chart's axis of days: the first reading fitted, at noon
    assert line.start == pytest.approx(noon_of_first)
    assert line.slope_per_day == pytest.approx(SLOPE_S_PER_DAY)
    assert line.value_at(line.start) == pytest.approx(START_S)  # the older, higher readings are left out
    assert line.crossing == pytest.approx(noon_of_first + DAYS_TO_LIMIT)
    assert line.value_at(line.crossing) == pytest.approx(LIMIT_S)
    assert plots._date(line.crossing) == status.forecast_date


def test_the_drawn_trend_runs_through_its_readings_to_the_forecast_dot_on_the_limit(rising):
    status = PlanStatus.objects.get(plan=rising["plan"])
    svg = _chart(rising["drive"], rising["plan"])
    trend = _trend_polyline(svg)
    assert len(trend) == 2
    (marker_x, marker_y, _), = _circles(svg, "4.5")
    assert f"forecast {status.forecast_date:%d %b %Y}" in svg
    # The trend ends on the forecast dot, and the dot is on the limit line.
    assert math.hypot(trend[-1][0] - marker_x, trend[-1][1] - marker_y) < 0.2
    limit_y = float(re.search(r'<line x1="[\d.]+" x2="[\d.]+" y1="([\d.]+)" y2="[\d.]+" stroke="#a3261b"', svg)[1])
    assert marker_y == pytest.approx(limit_y, abs=0.1)
    readings = _circles(svg, "3.5")
    in_trend = [(x, y) for x, y, fill in readings if fill != plots.LEFT_OUT]
    left_out = [(x, y) for x, y, fill in readings if fill == plots.LEFT_OUT]
    assert len(in_trend) == 10 and len(left_out) == 2
    assert trend[0] == pytest.approx(in_trend[0], abs=0.11)  # the line starts at the first reading fitted
    for point in in_trend:  # and passes through every one (they lie on it, up to the SVG's 0.1 px rounding)
        assert _distance_to_segment(point, trend[0], trend[1]) < 0.2
    assert "Theil-Sen trend" in svg and "light dots: readings not in the trend" in svg


def test_a_reached_limit_is_marked_on_the_reading_that_reached_it_not_on_the_limit_line(db, users):
    """The review's case: the newest reading is past the limit. The state dates it by that reading (the first of
    the newest run past the limit), so the dot is that reading, and the trend still runs over all it was fitted to."""
    today = services.site_today(Site(time_zone="UTC"))
    first = today - dt.timedelta(days=95)
    values = [(first + dt.timedelta(days=d), START_S + SLOPE_S_PER_DAY * d) for d in range(0, 81, 10)]
    values.append((first + dt.timedelta(days=90), 1.1))  # past the limit; the one before, 0.82 s, is not
    site, drive, plan = _drive(users, values, counting_from=first)
    status = PlanStatus.objects.get(plan=plan)
    assert status.status == "overdue" and status.forecast_date == first + dt.timedelta(days=90)
    svg = _chart(drive, plan)
    assert f"past the limit: reading of {status.forecast_date:%d %b %Y}" in svg
    (marker_x, marker_y, _), = _circles(svg, "4.5")
    newest = max(_circles(svg, "3.5"))
    assert (marker_x, marker_y) == pytest.approx(newest[:2], abs=0.01)
    trend = _trend_polyline(svg)
    assert trend[-1][0] >= newest[0] - 0.1  # drawn over every reading it was fitted to
