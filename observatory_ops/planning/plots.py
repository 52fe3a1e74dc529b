"""The picture of a plan on its subsystem page: what has accumulated (or was read), the limit, and the forecast."""
from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from typing import TYPE_CHECKING, NamedTuple

from django.utils.safestring import SafeString

from observatory_ops.calc import reflectance
from observatory_ops.charts import ACCENT, CHAR_PX, LINE_PX, MUTED, Chart
from observatory_ops.logbook.quantities import reflectance_text

from . import metrics
from .models import figure_text

if TYPE_CHECKING:  # mirrors builds on planning: imported for the annotations only
    from observatory_ops.mirrors.services import MirrorForecast

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
    crossing_on: dt.date | None  # the site's date of that day (``services.trend_date``), as the due state dates it

    def value_at(self, day: float) -> float:
        return self.value_at_start + self.slope_per_day * (day - self.start)


def day_of(moment: dt.datetime, zone) -> float:
    """``moment`` on a chart's axis of days: the ordinal of its local date plus the time of day as a fraction."""
    local = moment.astimezone(zone)
    midnight = dt.datetime.combine(local.date(), dt.time(), tzinfo=zone)
    return local.toordinal() + (local - midnight).total_seconds() / 86400


def _label_along(chart: Chart, points: Sequence[tuple], words: str) -> None:
    """Name a drawn line beside the first of its ``points`` where the words keep clear, above it or below: reaching
    right of the point, or left of it where they would run past the plot's right edge (so that even a label placed
    where nothing is clear stays inside the picture)."""
    right = chart.area[2] - CHAR_PX * len(words)
    chart.label([(chart.x(x), chart.y(y) + dy, "start" if chart.x(x) <= right else "end") for x, y in points
                 for dy in (-6, 14)], words, ACCENT)


def _date(day: float) -> dt.date:
    return dt.date.fromordinal(int(day))


def _frame(
    start: dt.date, end: dt.date, values: list[float], limit: float, limit_label: str, rising: bool, title: str,
    earliest: dt.date | None, latest: dt.date | None, described_by: str,
) -> Chart:
    """The picture every plan's chart starts from: axes, the forecast band and the limit. ``described_by``: the ids
    of the page's words that carry its figures (``Chart``)."""
    low = 0.0 if rising else min(values) * 0.98
    chart = Chart(start, end, low, max(values) * (1.08 if rising else 1.01), title, described_by=described_by)
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
    described_by: str = "",
    flat: Sequence[tuple[dt.date, dt.date]] = (),
) -> SafeString:
    """Accumulated value against time, the limit, today, and the forecast with its band.

    The forecast is drawn as a dashed line from today's value to the limit at the forecast date, level over the
    nights of ``flat`` (downtimes: a closure, a recoat, (first, last) both counted, on which it counts no use) and
    rising evenly over the rest; the band (earliest to latest) as a shaded strip, drawn to the plot's end when the
    slow case runs past it. A limit already reached is marked on the day it was reached (the "forecast" of a reached
    trigger). The limit is written as ``models.figure_text`` writes the ``metric``'s figures.
    """
    start = points[0][0] if points else today - dt.timedelta(days=30)
    end = max(d for d in (today, forecast, latest, earliest) if d is not None) + dt.timedelta(days=7)
    values = [v for _, v in points] + [limit, value_now]
    chart = _frame(start, end, values, limit, f"limit {figure_text(metric, unit, limit)} {unit}".strip(), rising,
                   title, earliest, latest, described_by)
    chart.line(points)
    if forecast and forecast < today:  # already reached: mark the day, draw no line back in time
        chart.marker(forecast, limit, f"limit reached {forecast:%d %b %Y}")
    elif forecast:
        chart.line(_forecast_path(today, value_now, forecast, limit, flat), dashed=True, width=1.5)
        chart.marker(forecast, limit, f"forecast {forecast:%d %b %Y}")
    chart.vline(today, "today")
    return chart.svg()


def _forecast_path(today: dt.date, value_now: float, forecast: dt.date, limit: float,
                   flat: Sequence[tuple[dt.date, dt.date]]) -> list[tuple[dt.date, float]]:
    """The forecast's dashed path from (today, value_now) to (forecast, limit): level on the days of ``flat`` between
    them, rising evenly on the others (a sketch of the forecast, whose own steps follow each night's expected use)."""
    days = [today + dt.timedelta(days=i) for i in range((forecast - today).days + 1)]
    out = {d for first, last in flat for d in days if first <= d <= last}
    rising_days = sum(1 for d in days[1:] if d not in out)
    if not out or not rising_days:
        return [(today, value_now), (forecast, limit)]
    step, value, path = (limit - value_now) / rising_days, value_now, [(today, value_now)]
    for before, day in zip(days, days[1:], strict=False):
        if (day in out) != (before in out):  # a turn: the line bends where a downtime begins or ends
            path.append((before, value))
        value += 0.0 if day in out else step
    path.append((forecast, limit))
    return path


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
    described_by: str = "",
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
    chart = _frame(start, end, values, limit, limit_label, rising, title, earliest, latest, described_by)
    fitted = trend.start if trend else float("inf")
    left_out = [r for r in readings if r[0] < fitted]
    chart.dots(left_out, colour=LEFT_OUT, label="reading, not in the trend")
    chart.dots([r for r in readings if r[0] >= fitted], label="reading in the Theil-Sen trend")
    if trend:
        chart.line(drawn, width=1.5)
        (first, _), (last, _) = drawn
        along = [first + (last - first) * k / 8 for k in range(9)]  # places for its label, along it
        _label_along(chart, [(x, trend.value_at(x)) for x in along], "Theil-Sen trend")
    if reached and forecast:
        on = next(((x, v) for x, v in readings if _date(x) == forecast and (v >= limit if rising else v <= limit)),
                  (forecast, limit))
        chart.marker(*on, f"past the limit: reading of {forecast:%d %b %Y}")
    elif trend and trend.crossing_on is not None and forecast:
        said = f"forecast {forecast:%d %b %Y}" if trend.crossing_on >= today else (
            f"trend at the limit {trend.crossing_on:%d %b %Y}")  # the forecast is then today, the earliest
        chart.marker(trend.crossing, limit, said)
    chart.vline(today, "today")
    if counted_from[0] > start:
        chart.vline(*counted_from)
    if left_out:  # a line along the foot of the plot, where it is clear of the rest
        x0, _, x1, y1 = chart.area
        chart.label([(x, y, "start") for y in (y1 - 6, y1 - 6 - LINE_PX) for x in range(int(x0) + 6, int(x1), 24)],
                    "light dots: readings not in the trend", MUTED)
    return chart.svg()



def _counted_cleanings(state: MirrorForecast) -> list[tuple[dt.date, float]]:
    """The cleanings (date, exposure) the fit of ``state`` counts: all since the coating, or none when it counts
    none (``MirrorForecast.cleaning_note`` then says why)."""
    return state.cleanings if state.fit.cleaning_exposure_h else []


def fitted_decline_by_date(state: MirrorForecast, today: dt.date) -> list[tuple[dt.date, float]]:
    """The fitted decline of ``state`` (``mirrors.services.mirror_forecast``: the fit the recompute forecasts from
    and the mirror page draws against exposure) at each date whose dust-weighted exposure the forecast knows,
    oldest first: the coating (E = 0; the first logged night where the coating predates the log, ``log_begins``:
    exposure counts from it), every band measurement, each cleaning the fit counts, and today (E now).
    The values are ``calc.reflectance.predict`` of the fit at those exposures, each date after the cleanings dated
    on or before it, as the fit counts them for its measurements; on a cleaning's date the line rises from the
    fit's value with only the cleanings dated before.

    A date's exposure is that of the nights before it, so date order is exposure order; a measurement dated
    before a cleaning is before it even at the same exposure (no night logged between the two)."""
    fit = state.fit
    counted = _counted_cleanings(state)
    dated = [(state.log_begins or state.coated_on, 0.0), *((day, hours) for day, hours, _ in state.points), *counted,
             (today, state.exposure_now_h)]

    def fitted(day: dt.date, hours: float, with_that_days: bool) -> float:
        done = [c for cleaned, c in counted if cleaned < day or (with_that_days and cleaned == day)]
        return float(reflectance.predict(fit, [hours], done)[0])

    knots = [(day, 1, fitted(day, hours, True)) for day, hours in dated]
    knots += [(day, 0, fitted(day, hours, False)) for day, hours in counted]
    return [(day, value) for day, _, value in sorted(knots, key=lambda knot: knot[:2])]


def recoat_svg(state: MirrorForecast, today: dt.date, title: str, described_by: str = "") -> SafeString:
    """A recoat-line trigger's picture against dates: the mirror's band measurements since its coating as dots,
    the recoat line, and the fitted decline its forecast came from (``fitted_decline_by_date``), dashed on from
    today's estimate to the forecast date on the line, with the forecast band. Every date and figure is the
    state's, the one the recompute stores; ``recoat_caption`` words the fit under it."""
    limit, forecast = state.threshold, state.crossing
    fitted = fitted_decline_by_date(state, today) if state.fit else []
    dates = (today, forecast, state.crossing_earliest, state.crossing_latest)
    end = max(d for d in dates if d is not None) + dt.timedelta(days=7)
    values = [value for _, _, value in state.points] + [value for _, value in fitted] + [limit]
    limit_label = f"recoat line {figure_text(metrics.RECOAT_LINE, '', limit)}"
    chart = _frame(state.coated_on, end, values, limit, limit_label, False, title, state.crossing_earliest,
                   state.crossing_latest, described_by)
    if fitted:
        chart.line(fitted, width=1.5)
        _label_along(chart, fitted, "fitted decline")
    chart.dots([(day, value) for day, _, value in state.points], label="band measurement")
    if state.current is not None and forecast:
        if state.current <= limit:  # reached: the state dates it today, where the fit is now
            chart.marker(today, state.current, f"limit reached {forecast:%d %b %Y}")
        else:
            chart.line([(today, state.current), (forecast, limit)], dashed=True, width=1.5)
            chart.marker(forecast, limit, f"forecast {forecast:%d %b %Y}")
    chart.vline(today, "today")
    return chart.svg()


def recoat_caption(state: MirrorForecast) -> str:
    """What ``recoat_svg`` draws, in words: the fit with its figures, the measurements it was made from, and how
    the line is laid on dates and carried to the forecast."""
    coated = f"{state.coated_on:%d %b %Y}"
    if state.fit is None:
        return (f"Dots: the mirror's band measurements since its coating of {coated}; {state.fit_note}, so no "
                "decline is drawn and no crossing is forecast.")
    fit, counted = state.fit, _counted_cleanings(state)
    figures = f"R0 = {reflectance_text(fit.r0)}, b = {fit.rate_per_hour:.3e} per hour"
    formula, cleanings = "R = R0 − b·E", ""
    if counted:
        formula = "R = R0 − b·(E − f·c)"
        # Of the loss since the cleaning before, not of the whole loss since the coating (calc.reflectance): a recoat
        # review read it as the whole and weighed a cleaning at four times what it would bring back.
        figures += (f", f = {fit.recovery_fraction:.2f} (the share a cleaning recovers of the loss since the cleaning "
                    "before it, or since the coating; c: E at the last cleaning)")
        cleanings = f", on either side of each cleaning ({', '.join(f'{day:%d %b %Y}' for day, _ in counted)})"
    since = f"the coating of {coated}"
    if state.log_begins:
        since = f"the first logged night, {state.log_begins:%d %b %Y} (the coating of {coated} predates the log)"
    words = (
        f"Fitted decline: the least-squares fit of {formula} to the {fit.n_points} band measurements (dots) against "
        f"E, the dust-weighted open hours since {since}: {figures}. The line is the fit at {state.exposure_since}, "
        f"at each measurement{cleanings} and today (E = {state.exposure_now_h:,.1f} h), straight between them; the "
        "forecast comes from the same fit, and the mirror's page draws it against E."
    )
    if state.crossing and state.current is not None and state.current > state.threshold:
        words += (f" Dashed: from today to the day the dust-weighted hours expected each night bring E to "
                  f"{state.crossing_exposure_h:,.1f} h, where the fit meets the recoat line.")
    return f"{words} {state.cleaning_note}".strip()
