"""The picture of a plan on its subsystem page: what has accumulated (or was read), the limit, and the forecast."""
from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from typing import NamedTuple

from django.utils.safestring import SafeString

from observatory_ops.charts import ACCENT, LINE_PX, MUTED, Chart

from . import metrics
from .models import figure_text

#: Fill of the readings a trend leaves out (before the last service, or older than the newest it takes): drawn, but
#: lighter than those it was fitted to.
LEFT_OUT = "#a9b4bd"


class TrendLine(NamedTuple):
    """The Theil-Sen line of a condition trigger on a chart's axis of days (date ordinals, with the time of day as a
    fraction: ``day_of``): value = ``value_at_start`` + ``slope_per_day`` x (day - ``start``)."""

    start: float  # the first reading fitted
    last: float  # the last reading fitted
    value_at_start: float
    slope_per_day: float
    crossing: float | None  # the day it reaches the limit; None when it moves away from it

    def value_at(self, day: float) -> float:
        return self.value_at_start + self.slope_per_day * (day - self.start)


def day_of(moment: dt.datetime, zone) -> float:
    """``moment`` on a chart's axis of days: the ordinal of its local date plus the time of day as a fraction."""
    local = moment.astimezone(zone)
    midnight = dt.datetime.combine(local.date(), dt.time(), tzinfo=zone)
    return local.toordinal() + (local - midnight).total_seconds() / 86400


def _date(day: float) -> dt.date:
    return dt.date.fromordinal(int(day))


def _frame(
    start: dt.date, end: dt.date, values: list[float], limit: float, limit_label: str, rising: bool, title: str,
    earliest: dt.date | None, latest: dt.date | None,
) -> Chart:
    """The picture every plan's chart starts from: axes, the forecast band and the limit."""
    low = 0.0 if rising else min(values) * 0.98
    chart = Chart(start, end, low, max(values) * (1.08 if rising else 1.01), title)
    chart.axes()
    if earliest and earliest != latest:
        chart.band(earliest, latest or end, "forecast band")
    chart.hline(limit, limit_label)
    return chart


def accumulation_svg(
    points: Sequence[tuple[dt.date, float]],
    limit: float,
    unit: str,
    today: dt.date,
    value_now: float,
    forecast: dt.date | None,
    earliest: dt.date | None,
    latest: dt.date | None,
    rising: bool = True,
    title: str = "",
    metric: str = "",
) -> SafeString:
    """Accumulated value against time, the limit, today, and the forecast with its band.

    The forecast is drawn as a dashed line from today's value to the limit at the forecast date; the band
    (earliest to latest) as a shaded strip, drawn to the plot's end when the slow case runs past it. A limit
    already reached is marked on the day it was reached (the "forecast" of a reached trigger). The limit is
    written as ``models.figure_text`` writes the ``metric``'s figures.
    """
    start = points[0][0] if points else today - dt.timedelta(days=30)
    end = max(d for d in (today, forecast, latest, earliest) if d is not None) + dt.timedelta(days=7)
    values = [v for _, v in points] + [limit, value_now]
    chart = _frame(start, end, values, limit, f"limit {figure_text(metric, unit, limit)} {unit}".strip(), rising,
                   title, earliest, latest)
    chart.line(points)
    if forecast and forecast < today:  # already reached: mark the day, draw no line back in time
        chart.marker(forecast, limit, f"limit reached {forecast:%d %b %Y}")
    elif forecast:
        chart.line([(today, value_now), (forecast, limit)], dashed=True, width=1.5)
        chart.marker(forecast, limit, f"forecast {forecast:%d %b %Y}")
    chart.vline(today, "today")
    return chart.svg()


def readings_svg(
    readings: Sequence[tuple[float, float]],
    trend: TrendLine | None,
    limit: float,
    unit: str,
    today: dt.date,
    reached: bool,
    forecast: dt.date | None,
    earliest: dt.date | None,
    latest: dt.date | None,
    rising: bool,
    title: str,
    counted_from: tuple[dt.date, str],
) -> SafeString:
    """A condition trigger's readings as dots against the limit, with the Theil-Sen trend its forecast came from.

    ``readings`` are (``day_of`` the reading, value), oldest first: those the trend was fitted to drawn in ink,
    older ones (before ``counted_from``, the last service or the plan's start, or past the newest the trend takes)
    muted. The trend is drawn over the readings it was fitted to and on to the day it reaches the limit, where the
    forecast is marked: on the line it was read from. A limit already reached is marked on the reading that
    reached it (the first of the newest run past the limit), which gives that date, not on the trend.
    """
    start = _date(readings[0][0]) if readings else counted_from[0]
    end = max(d for d in (today, forecast, latest, earliest) if d is not None) + dt.timedelta(days=7)
    drawn: list[tuple[float, float]] = []
    if trend:
        until = trend.crossing if trend.crossing is not None else max(trend.last, today.toordinal())
        until = min(max(until, trend.last), end.toordinal())  # over every reading fitted, inside the plot
        drawn = [(trend.start, trend.value_at(trend.start)), (until, trend.value_at(until))]
    values = [v for _, v in readings] + [v for _, v in drawn] + [limit]
    limit_label = f"limit {figure_text(metrics.READING, unit, limit)} {unit}".strip()
    chart = _frame(start, end, values, limit, limit_label, rising, title, earliest, latest)
    fitted = trend.start if trend else float("inf")
    left_out = [r for r in readings if r[0] < fitted]
    chart.dots(left_out, colour=LEFT_OUT, label="reading, not in the trend")
    chart.dots([r for r in readings if r[0] >= fitted], label="reading in the Theil-Sen trend")
    if trend:
        chart.line(drawn, width=1.5)
        (first, _), (last, _) = drawn
        along = [first + (last - first) * k / 8 for k in range(9)]  # places for its label, along it
        chart.label([(chart.x(x), chart.y(trend.value_at(x)) + dy, "start") for x in along for dy in (-6, 14)],
                    "Theil-Sen trend", ACCENT)
    if reached and forecast:
        on = next(((x, v) for x, v in readings if _date(x) == forecast and (v >= limit if rising else v <= limit)),
                  (forecast, limit))
        chart.marker(*on, f"limit reached {forecast:%d %b %Y}")
    elif trend and trend.crossing is not None and forecast:
        said = f"forecast {forecast:%d %b %Y}" if trend.crossing >= today.toordinal() else (
            f"trend at the limit {_date(trend.crossing):%d %b %Y}")  # the forecast is then today, the earliest
        chart.marker(trend.crossing, limit, said)
    chart.vline(today, "today")
    if counted_from[0] > start:
        chart.vline(*counted_from)
    if left_out:  # a line along the foot of the plot, where it is clear of the rest
        x0, _, x1, y1 = chart.area
        chart.label([(x, y, "start") for y in (y1 - 6, y1 - 6 - LINE_PX) for x in range(int(x0) + 6, int(x1), 24)],
                    "light dots: readings not in the trend", MUTED)
    return chart.svg()

