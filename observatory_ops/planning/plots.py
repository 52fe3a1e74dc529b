"""The picture of a plan on its subsystem page: what has accumulated, the limit, and the forecast."""
from __future__ import annotations

import datetime as dt
from collections.abc import Sequence

from django.utils.safestring import SafeString

from observatory_ops.charts import Chart


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
    counted_from: tuple[dt.date, str] | None = None,
) -> SafeString:
    """Accumulated value (or readings) against time, the limit, today, and the forecast with its band.

    The forecast is drawn as a dashed line from today's value to the limit at the forecast date; the band
    (earliest to latest) as a shaded strip, drawn to the plot's end when the slow case runs past it. A limit
    already reached is marked on the day it was reached (the "forecast" of a reached trigger).
    ``counted_from`` (day, label) marks where counting starts when older points are drawn too: readings from
    before the last service are shown but not in the trend.
    """
    start = points[0][0] if points else today - dt.timedelta(days=30)
    end = max(d for d in (today, forecast, latest, earliest) if d is not None) + dt.timedelta(days=7)
    values = [v for _, v in points] + [limit, value_now]
    low = 0.0 if rising else min(values) * 0.98
    chart = Chart(start, end, low, max(values) * (1.08 if rising else 1.01), title)
    chart.axes()
    if earliest and earliest != latest:
        chart.band(earliest, latest or end, "forecast band")
    chart.hline(limit, f"limit {limit:,.4g} {unit}")
    chart.line(points)
    if forecast and forecast < today:  # already reached: mark the day, draw no line back in time
        chart.marker(forecast, limit, f"limit reached {forecast:%d %b %Y}")
    elif forecast:
        chart.line([(today, value_now), (forecast, limit)], dashed=True, width=1.5)
        chart.marker(forecast, limit, f"forecast {forecast:%d %b %Y}")
    chart.vline(today, "today")
    if counted_from and counted_from[0] > start:
        chart.vline(*counted_from)
    return chart.svg()
