"""The subsystem page's chart of a recoat line draws the fitted decline its forecast came from.

A reviewer's finding: on a primary mirror's subsystem page the recoat-line chart joined the measurements with a
line, while the mirror page drew the fitted decline. Now the chart shows the band measurements as dots, the recoat
line, and the fit of ``mirrors.services.mirror_forecast`` (the function the recompute and the mirror page use)
through its value at the coating, each measurement, each cleaning and today, dashed on to the forecast date on the
recoat line; a caption under it names the fit with its figures.

The measurements below lie exactly on the model R = R0 - b (E - f c) with R0 = 0.90, b = 2e-5 per dust-weighted
hour and f = 0.5 (calc/reflectance.py's model; the values are made from it by hand), so a least-squares fit gives
those figures back and runs through every measurement.
"""
from __future__ import annotations

import datetime as dt
import html
import math
import re

import pytest
from conftest import site_in_use
from django.utils.html import strip_tags

from observatory_ops.calc import reflectance
from observatory_ops.mirrors.models import CleaningEvent, CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.mirrors.services import MirrorForecast, mirror_forecast
from observatory_ops.planning import metrics, plots, selectors
from observatory_ops.planning.models import PlanStatus, ServicePlan
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Subsystem

#: site_in_use logs 6 open hours a night at PM10 35 ug/m3; at the mirror's dust sensitivity 1 each open hour weighs
#: 1 + (35 - 20) / 20 = 1.75 (calc.exposure.dust_weight), so E grows by 10.5 dust-weighted hours a night.
DUST_HOURS_PER_NIGHT = 6 * 1.75
R0, RATE, RECOVERY = 0.90, 2e-5, 0.5
COATED_DAYS_AGO, CLEANED_ON_DAY = 280, 140
MEASURED_ON_DAYS = (10, 40, 70, 100, 130, 160, 190, 220, 250)


def _model(day: int) -> float:
    """Reflectance ``day`` days after the coating: E counts the nights before that day."""
    exposure = DUST_HOURS_PER_NIGHT * day
    cleaning = DUST_HOURS_PER_NIGHT * CLEANED_ON_DAY if day >= CLEANED_ON_DAY else 0.0
    return R0 - RATE * (exposure - RECOVERY * cleaning)


def _primary(measured_days, users) -> tuple[Subsystem, ServicePlan]:
    site = site_in_use("recoat-chart", kinds=("primary_mirror",), nights=300)
    primary = Subsystem.objects.get(telescope__site=site, kind="primary_mirror")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    coated = site_today(site) - dt.timedelta(days=COATED_DAYS_AGO)
    CoatingEvent.objects.create(mirror=mirror, coated_on=coated, metal="al")
    CleaningEvent.objects.create(mirror=mirror, cleaned_on=coated + dt.timedelta(days=CLEANED_ON_DAY),
                                 method="co2_snow")
    for day in measured_days:
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=coated + dt.timedelta(days=day),
                                              value=_model(day), taken_by=users["technician"])
    site_recompute(site)
    return primary, ServicePlan.objects.get(subsystem=primary, triggers__metric=metrics.RECOAT_LINE)


def _shown(primary, plan) -> ServicePlan:
    return next(p for p in selectors.plans_with_plots(primary) if p.pk == plan.pk)


def _polylines(svg: str, dashed: bool) -> list[list[tuple[float, float]]]:
    found = re.findall(r'<polyline points="([^"]+)"([^>]*)/>', svg)
    return [[tuple(map(float, p.split(","))) for p in points.split()] for points, rest in found
            if ("stroke-dasharray" in rest) == dashed]


def _circles(svg: str, radius: str) -> list[tuple[float, float]]:
    return [(float(x), float(y)) for x, y in re.findall(rf'<circle cx="([\d.-]+)" cy="([\d.-]+)" r="{radius}"', svg)]


def _distance_to_polyline(point, line) -> float:
    def to_segment(a, b) -> float:
        (px, py), (ax, ay), (bx, by) = point, a, b
        length = (bx - ax) ** 2 + (by - ay) ** 2
        t = 0.0 if length == 0 else max(0.0, min(1.0, ((px - ax) * (bx - ax) + (py - ay) * (by - ay)) / length))
        return math.hypot(px - (ax + t * (bx - ax)), py - (ay + t * (by - ay)))

    return min(to_segment(a, b) for a, b in zip(line, line[1:], strict=False))


def test_the_chart_draws_the_fit_the_forecast_came_from_through_the_measurements(db, users):
    primary, plan = _primary(MEASURED_ON_DAYS, users)
    status = PlanStatus.objects.get(plan=plan)
    assert status.metric == metrics.RECOAT_LINE  # the recoat line governs the plan (its calendar limit is later)
    state = mirror_forecast(primary.mirror)
    # The fit gives the model back (least squares on exact data), and the stored forecast is the state's.
    assert (state.fit.r0, state.fit.rate_per_hour, state.fit.recovery_fraction) == pytest.approx(
        (R0, RATE, RECOVERY), rel=1e-6)
    assert status.forecast_date == state.crossing

    svg = str(_shown(primary, plan).plot)
    (fitted,) = _polylines(svg, dashed=False)
    dots = _circles(svg, "3.5")
    assert len(dots) == len(MEASURED_ON_DAYS)  # the measurements are dots, not joined by a line of their own
    for dot in dots:  # the fitted line runs through every one (to the SVG's 0.1 px rounding)
        assert _distance_to_polyline(dot, fitted) < 0.2
    xs = [x for x, _ in fitted]
    assert xs == sorted(xs)  # drawn against dates, oldest first
    # At the cleaning it rises by f b c = 0.5 x 2e-5 x 1470 h = 0.0147 (hand computation), straight up on its day.
    rise = [(a, b) for a, b in zip(fitted, fitted[1:], strict=False) if a[0] == b[0] and b[1] < a[1]]
    assert len(rise) == 1
    (forecast_line,) = _polylines(svg, dashed=True)
    assert forecast_line[0] == pytest.approx(fitted[-1], abs=0.11)  # the dashed line goes on from today's estimate
    (marker,) = _circles(svg, "4.5")
    assert forecast_line[-1] == pytest.approx(marker, abs=0.11)  # to the forecast dot
    recoat_y = float(re.search(r'<line x1="[\d.]+" x2="[\d.]+" y1="([\d.]+)" y2="[\d.]+" stroke="#a3261b"', svg)[1])
    assert marker[1] == pytest.approx(recoat_y, abs=0.1)  # on the recoat line
    assert f"forecast {status.forecast_date:%d %b %Y}" in svg
    assert f"recoat line {state.threshold:.4f}" in svg and "fitted decline" in svg


def test_the_caption_names_the_fit_its_figures_and_the_measurements(db, users, client):
    primary, plan = _primary(MEASURED_ON_DAYS, users)
    state = mirror_forecast(primary.mirror)
    caption = _shown(primary, plan).caption
    cleaned = state.cleanings[0][0]
    for words in ("least-squares fit of R = R0 − b·(E − f·c)", f"to the {len(MEASURED_ON_DAYS)} band measurements",
                  "R0 = 0.9000", "b = 2.000e-05 per hour", "f = 0.50", f"{cleaned:%d %b %Y}",
                  f"today (E = {state.exposure_now_h:,.1f} h)", "the forecast comes from the same fit",
                  f"bring E to {state.crossing_exposure_h:,.1f} h"):
        assert words in caption, words
    client.force_login(users["viewer"])
    page = re.sub(r"\s+", " ", html.unescape(strip_tags(client.get(primary.get_absolute_url()).content.decode())))
    assert caption in page


def test_without_a_fit_the_chart_shows_the_measurements_and_says_why(db, users):
    primary, plan = _primary(MEASURED_ON_DAYS[:2], users)  # two measurements: a decline needs three
    plan.triggers.exclude(metric=metrics.RECOAT_LINE).delete()  # else its calendar limit, with a date, governs
    site_recompute(primary.telescope.site)
    assert PlanStatus.objects.get(plan=plan).metric == metrics.RECOAT_LINE
    shown = _shown(primary, plan)
    svg = str(shown.plot)
    assert len(_circles(svg, "3.5")) == 2 and "<polyline" not in svg
    assert "recoat line" in svg
    assert "no fit yet: need at least 3 readings" in shown.caption
    assert "so no decline is drawn and no crossing is forecast" in shown.caption


def test_a_measurement_at_a_cleanings_exposure_dated_before_it_stays_before_the_rise():
    """No night logged between a measurement and a later cleaning: both have the same E, and the measurement is
    before the cleaning by date (calc/reflectance.py, ``cleanings_before``), so the line keeps the measurement's
    pre-cleaning value on its day and rises on the cleaning's own day, never running back in time."""
    day = dt.date(2026, 1, 1)
    on = [day + dt.timedelta(days=d) for d in (10, 30, 50, 60, 80)]
    exposures = [100.0, 300.0, 400.0, 500.0, 700.0]
    cleaning = (day + dt.timedelta(days=52), 400.0)
    after = [d >= cleaning[0] for d in on]  # by date: the measurement of day 50 is before the cleaning of day 52
    values = [R0 - RATE * (e - RECOVERY * (400.0 if done else 0.0)) for e, done in zip(exposures, after, strict=True)]
    fit = reflectance.fit_decline(exposures, values, [cleaning[1]], [int(done) for done in after])
    state = MirrorForecast(mirror=None, coated_on=day, recipe="", fresh_band=None, fresh_basis="",
                           exposure_now_h=800.0, points=list(zip(on, exposures, values, strict=True)),
                           cleanings=[cleaning], fit=fit)
    today = day + dt.timedelta(days=90)
    drawn = plots.fitted_decline_by_date(state, today)
    assert [d for d, _ in drawn] == sorted(d for d, _ in drawn)
    assert drawn[0] == (day, pytest.approx(R0))
    assert drawn[-1] == (today, pytest.approx(R0 - RATE * (800.0 - RECOVERY * 400.0)))
    # Hand computation: at E = 400 h before the cleaning, R = 0.90 - 2e-5 x 400 = 0.892; after it,
    # 0.90 - 2e-5 x (400 - 0.5 x 400) = 0.896.
    assert (on[2], pytest.approx(0.892)) in drawn
    rise = [(a, b) for a, b in zip(drawn, drawn[1:], strict=False) if a[0] == b[0] and b[1] > a[1]]
    assert rise == [((cleaning[0], pytest.approx(0.892)), (cleaning[0], pytest.approx(0.896)))]
