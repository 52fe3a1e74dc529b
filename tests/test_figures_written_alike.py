"""One figure reads the same wherever it is shown.

A site engineer's review found one recoat line written 0.83 (trigger table), 0.828 (sentence, mirror chart) and
0.8277 (mirror page, subsystem chart), a trend interval written "+0.0021 to +0.002648", a dust basis naming "the
rest" of 12 months out of 12, and "ug/m3" on the pages. Every reflectance is now written to four decimals by one
function (logbook.quantities.reflectance_text), both ends of an interval to three significant figures, and
concentrations in µg/m³ (the CSV columns and API fields keep their names: those are formats).
"""
from __future__ import annotations

import datetime as dt
import html
import re

import numpy as np
import pytest
from conftest import site_in_use

from observatory_ops.calc import exposure
from observatory_ops.calc.triggers import TriggerState
from observatory_ops.logbook import nights_csv
from observatory_ops.logbook.models import Reading
from observatory_ops.logbook.quantities import reflectance_text, significant
from observatory_ops.mirrors.models import CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.mirrors.services import mirror_forecast
from observatory_ops.planning import services
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger, figure_text
from observatory_ops.registry.models import Subsystem


def test_a_reflectance_is_written_to_four_decimals_and_other_figures_as_before():
    assert reflectance_text(0.82768) == "0.8277" and reflectance_text(0.839) == "0.8390"
    assert figure_text("recoat_line", "", 0.839) == "0.8390"
    assert figure_text("reading", "fraction", 0.86) == "0.8600"  # a band reflectance logged as a reading
    assert figure_text("reading", "s", 1.0954) == "1.095" and figure_text("open_hours", "h", 934.7) == "935"
    recoat = PlanStatus(metric="recoat_line", value=0.83912, limit=0.82768, unit="")
    assert recoat.progress == "0.8391 / 0.8277 fraction"  # the unit as the CSV and the API give it
    state = TriggerState(metric="recoat_line", value=0.83912, limit=0.82768, rate_per_day=None,
                         forecast=dt.date(2027, 3, 1), rising=False)
    assert services.reason_text(state).startswith("Reflectance now about 0.8391, recoat line 0.8277; forecast")


def test_both_ends_of_an_interval_carry_three_significant_figures():
    # The review's interval: 0.0021 kept only two figures where 0.002648 had four.
    assert f"{significant(0.0021, signed=True)} to {significant(0.002648, signed=True)}" == "+0.00210 to +0.00265"
    assert significant(-0.000123, signed=True) == "-0.000123" and significant(12345.6) == "12,300"


def test_a_trend_sentence_writes_its_slope_and_interval_to_three_significant_figures(db, users):
    site = site_in_use("interval", kinds=("axis1_drive",))
    drive = Subsystem.objects.get(telescope__site=site)
    plan = ServicePlan.objects.create(subsystem=drive, name="Settle", counting_from=services.site_today(site)
                                      - dt.timedelta(days=80))
    Trigger.objects.create(plan=plan, metric="reading", limit=1.0, quantity="settle_time_s")
    noon = dt.datetime.combine(services.site_today(site), dt.time(12), tzinfo=dt.UTC)
    for days_ago, value in ((70, 0.52), (60, 0.55), (50, 0.53), (40, 0.61), (30, 0.60), (20, 0.66), (10, 0.64)):
        Reading.objects.create(subsystem=drive, quantity="settle_time_s", unit="s", value=value,
                               taken_at=noon - dt.timedelta(days=days_ago), taken_by=users["technician"])
    services.site_recompute(site)
    reason = PlanStatus.objects.get(plan=plan).reason
    found = re.search(r"s/day \(95 % interval ([+-][\d.]+) to ([+-][\d.]+)\)", reason)
    slope = re.search(r"Theil-Sen trend of .*?: ([+-][\d.]+) s/day", reason)[1]
    for figure in (slope, *found.groups()):
        digits = figure.lstrip("+-").replace(".", "").lstrip("0")
        assert len(digits) == 3, (figure, reason)


@pytest.fixture
def coated_primary(db, users):
    """A primary coated 100 nights ago, measured every 10 nights on a steady decline, and recomputed."""
    site = site_in_use("written-alike", kinds=("primary_mirror",))
    today = services.site_today(site)
    subsystem = Subsystem.objects.get(telescope__site=site)
    mirror = Mirror.objects.create(subsystem=subsystem, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=today - dt.timedelta(days=100), metal="al")
    for days_ago in range(95, 0, -10):
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=today - dt.timedelta(days=days_ago),
                                              value=0.90 - 0.0004 * (100 - days_ago), taken_by=users["technician"])
    services.site_recompute(site)
    return mirror


def test_the_recoat_line_and_the_estimate_read_alike_on_the_subsystem_and_mirror_pages(coated_primary, users,
                                                                                       client):
    state = mirror_forecast(coated_primary)
    line, now = reflectance_text(state.threshold), reflectance_text(state.current)
    client.force_login(users["viewer"])
    subsystem_page = html.unescape(client.get(coated_primary.subsystem.get_absolute_url()).content.decode())
    mirror_page = html.unescape(client.get(coated_primary.get_absolute_url()).content.decode())
    assert f"Reflectance now about {now}, recoat line {line};" in subsystem_page  # the sentence
    assert f'<td data-label="Now">{now} </td><td data-label="Limit">{line} </td>' in subsystem_page  # the trigger table
    assert f">recoat line {line}</text>" in subsystem_page  # the chart, as the mirror page labels it
    assert f"Estimate now</div><strong>{now}</strong>" in mirror_page
    assert f"Recoat line</div><strong>{line}</strong>" in mirror_page
    assert f">recoat line {line}</text>" in mirror_page  # the chart
    # Nowhere is the line written to fewer decimals (0.8277 as 0.828 or 0.83).
    for page in (subsystem_page, mirror_page):
        for shorter in (f"{state.threshold:.3f}", f"{state.threshold:.2f}"):
            assert not re.search(re.escape(shorter) + r"(?!\d)", page), shorter


def _model(pm10_months: int, pm10_nights: int) -> services.UsageModel:
    return services.UsageModel(
        first_day=dt.date(2026, 6, 15), open_hours=np.zeros(1), month_pm10=np.full(12, 35.0),
        month_excess=np.full(12, 0.75), per_open_hour={},
        open_fraction=np.full(12, 0.6), from_history=np.ones(12, bool), months_from_history=12, spread=0.2,
        months=np.ones(1, int), dark_hours=np.zeros(1), pm10_months=pm10_months, pm10_nights=pm10_nights,
    )


def test_the_dust_basis_names_the_rest_only_when_some_months_take_the_overall_mean():
    every = _model(12, 400).dust_basis
    assert every == ("dust: each coming open hour weighs what this site's past open hours of its month weighed on "
                     "average (every month measured on at least 20 open nights)")
    assert "for the rest" in _model(7, 200).dust_basis and "7 of 12 months" in _model(7, 200).dust_basis
    assert _model(0, 30).dust_basis == ("dust: each coming open hour weighs what this site's past open hours weighed "
                                        "on average (no month measured on 20 open nights yet)")


def test_concentrations_are_written_in_micrograms_per_cubic_metre_on_pages(db, users, client):
    """A year of nights with PM10: every month has its own mean, and the page says so without "the rest"."""
    site = site_in_use("micrograms", kinds=("cooling_fans",), nights=366)
    services.site_recompute(site)
    fans = Subsystem.objects.get(telescope__site=site)
    client.force_login(users["viewer"])
    page = html.unescape(client.get(fans.get_absolute_url()).content.decode())
    assert "Mean PM10 while open, µg/m³" in page and "(PM10 in µg/m³, 20 = clean air;" in page
    assert "ug/m3" not in page
    assert "of its month weighed on average (every month measured" in page and "for the rest" not in page
    assert "Mean excess over clean air of an open hour, max(0, PM10 − 20) / 20" in page
    assert "µg/m³" in exposure.dust_weight_formula(1.0)
    assert "pm10_ugm3" in nights_csv.example_csv()  # the CSV column keeps its name: it is a format
