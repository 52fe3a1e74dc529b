"""Server-rendered SVG pictures of a plan: what has accumulated, the limit, and the forecast.

Plain SVG text (no plotting library, no JavaScript), so it prints and shows on any tablet.
"""
from __future__ import annotations

import datetime as dt
from collections.abc import Sequence

from django.utils.html import escape
from django.utils.safestring import SafeString, mark_safe

WIDTH, HEIGHT = 720, 260
LEFT, RIGHT, TOP, BOTTOM = 64, 16, 16, 40


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
) -> SafeString:
    """A line of the accumulated value (or the readings) against time, the limit, today and the forecast.

    The forecast is drawn as a dashed line from today's value to the limit at the forecast date, and the
    band (earliest to latest) as a shaded strip; a band that runs past the plot's end is drawn to the end.
    """
    start = points[0][0] if points else today - dt.timedelta(days=30)
    end = max(d for d in (today, forecast, latest, earliest) if d is not None) + dt.timedelta(days=7)
    values = [v for _, v in points] + [limit, value_now]
    y_low = 0.0 if rising else min(values) * 0.98
    y_high = max(values) * (1.08 if rising else 1.01) or 1.0
    span_days = max((end - start).days, 1)

    def x(day: dt.date) -> float:
        return LEFT + (WIDTH - LEFT - RIGHT) * (day - start).days / span_days

    def y(value: float) -> float:
        return TOP + (HEIGHT - TOP - BOTTOM) * (1 - (value - y_low) / ((y_high - y_low) or 1.0))

    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {WIDTH} {HEIGHT}" role="img" '
        f'aria-label="{escape(title)}">',
        f'<rect x="{LEFT}" y="{TOP}" width="{WIDTH - LEFT - RIGHT}" height="{HEIGHT - TOP - BOTTOM}" '
        'fill="#fbfbfa" stroke="#d5dbe0"/>',
    ]
    for i in range(5):
        value = y_low + (y_high - y_low) * i / 4
        parts.append(
            f'<text x="{LEFT - 6}" y="{y(value) + 4:.1f}" text-anchor="end" font-size="11" fill="#5b6975">'
            f"{value:,.4g}</text>"
        )
    for i in range(5):
        day = start + dt.timedelta(days=round(span_days * i / 4))
        parts.append(
            f'<text x="{x(day):.1f}" y="{HEIGHT - BOTTOM + 16}" text-anchor="middle" font-size="11" '
            f'fill="#5b6975">{day:%d %b %y}</text>'
        )
    if earliest and (latest or end) and earliest != latest:
        band_end = latest or end
        parts.append(
            f'<rect x="{x(earliest):.1f}" y="{TOP}" width="{max(x(band_end) - x(earliest), 1):.1f}" '
            f'height="{HEIGHT - TOP - BOTTOM}" fill="#a86a00" fill-opacity="0.15"><title>forecast band</title></rect>'
        )
    parts.append(
        f'<line x1="{LEFT}" x2="{WIDTH - RIGHT}" y1="{y(limit):.1f}" y2="{y(limit):.1f}" stroke="#a3261b" '
        f'stroke-width="1.5" stroke-dasharray="6 4"/>'
        f'<text x="{WIDTH - RIGHT - 4}" y="{y(limit) - 5:.1f}" text-anchor="end" font-size="11" fill="#a3261b">'
        f"limit {limit:,.4g} {escape(unit)}</text>"
    )
    if points:
        path = " ".join(f"{x(d):.1f},{y(v):.1f}" for d, v in points)
        parts.append(f'<polyline points="{path}" fill="none" stroke="#2e5d7a" stroke-width="2"/>')
    if forecast:
        parts.append(
            f'<line x1="{x(today):.1f}" y1="{y(value_now):.1f}" x2="{x(forecast):.1f}" y2="{y(limit):.1f}" '
            'stroke="#2e5d7a" stroke-width="1.5" stroke-dasharray="3 3"/>'
            f'<circle cx="{x(forecast):.1f}" cy="{y(limit):.1f}" r="4" fill="#a86a00"/>'
            f'<text x="{x(forecast):.1f}" y="{y(limit) + 16:.1f}" text-anchor="middle" font-size="11" '
            f'fill="#1f2a33">forecast {forecast:%d %b %Y}</text>'
        )
    parts.append(
        f'<line x1="{x(today):.1f}" x2="{x(today):.1f}" y1="{TOP}" y2="{HEIGHT - BOTTOM}" stroke="#1f2a33" '
        f'stroke-width="1"/><text x="{x(today) + 3:.1f}" y="{TOP + 12}" font-size="11" fill="#1f2a33">today</text>'
    )
    parts.append("</svg>")
    return mark_safe("".join(parts))  # noqa: S308 (every interpolated text is escaped above)
