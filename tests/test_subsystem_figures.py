"""Every figure the subsystem page shows can be traced: which trigger, which readings, which formula.

The forecast of a counter is rebuilt in the tests below from the page's own table of expected use, month by
month, as a site engineer would with a calculator; the chart's ticks and label placement are checked against
hand-worked cases.
"""
from __future__ import annotations

import datetime as dt
import html
import math
import re

import numpy as np
import pytest
from conftest import site_in_use

from observatory_ops import charts
from observatory_ops.calc import exposure, forecast
from observatory_ops.planning import services
from observatory_ops.planning.models import NightSky, PlanStatus
from observatory_ops.planning.plots import accumulation_svg
from observatory_ops.planning.selectors import significant
from observatory_ops.registry.models import Subsystem

# --- round ticks: P. S. Heckbert, "Nice numbers for graph labels", Graphics Gems (1990), loose labelling ---


@pytest.mark.parametrize(("low", "high", "ticks"), [
    # span 394.2 -> rounded up to 500; 500 / 4 = 125 -> nearest nice number 100; 0 to ceil(3.942) x 100
    (0.0, 394.2, [0, 100, 200, 300, 400]),
    # span 10 -> 10; 10 / 4 = 2.5, itself a nice number (the 2.5 step this chart adds to Heckbert's 1, 2, 5)
    (0.0, 10.0, [0, 2.5, 5, 7.5, 10]),
    # span 85 -> 100; 100 / 4 = 25 -> 2.5 x 10; floor(12 / 25) = 0 to ceil(97 / 25) = 4
    (12.0, 97.0, [0, 25, 50, 75, 100]),
    # span 0.12 -> 0.2; 0.2 / 4 = 0.05; floor(0.8 / 0.05) = 16 to ceil(0.92 / 0.05) = 19
    (0.8, 0.92, [0.8, 0.85, 0.9, 0.95]),
    # span 1021 -> 2000; 2000 / 4 = 500, a nice number; 0 to ceil(2.042) x 500
    (0.0, 1021.0, [0, 500, 1000, 1500]),
])
def test_axis_ticks_are_round_numbers_covering_the_range(low, high, ticks):
    assert charts.nice_ticks(low, high) == pytest.approx(ticks)


def test_tick_labels_carry_the_decimals_their_step_needs():
    assert [charts.tick_decimals(step) for step in (100, 5, 2.5, 0.5, 0.25, 0.05)] == [0, 0, 1, 1, 2, 2]


def test_a_year_of_dates_is_ticked_at_quarters_and_a_few_days_at_days():
    # 28 Dec 2025 to 04 Jan 2027: monthly ticks would be 13, every two months 7 (Jan .. Jan), so quarters:
    # the firsts of January, April, July, October 2026 and January 2027.
    ticks, pattern = charts.date_ticks(dt.date(2025, 12, 28), dt.date(2027, 1, 4))
    assert ticks == [dt.date(2026, 1, 1), dt.date(2026, 4, 1), dt.date(2026, 7, 1), dt.date(2026, 10, 1),
                     dt.date(2027, 1, 1)]
    assert pattern == "%b %Y"
    ticks, pattern = charts.date_ticks(dt.date(2026, 11, 20), dt.date(2026, 11, 23))
    assert ticks == [dt.date(2026, 11, 20 + k) for k in range(4)] and pattern == "%d %b"


def _texts(svg: str) -> list[tuple[charts.Box, str]]:
    found = re.findall(r'<text x="([\d.-]+)" y="([\d.-]+)" text-anchor="(\w+)"[^>]*>([^<]*)</text>', str(svg))
    return [(charts.text_box(float(x), float(y), html.unescape(w), a), html.unescape(w)) for x, y, a, w in found]


def test_the_labels_of_today_the_limit_and_the_forecast_do_not_overlap():
    """The calendar picture the review saw on a subsystem page: "today" was written over "limit 365 days"."""
    today, last = dt.date(2026, 12, 2), dt.date(2025, 12, 28)
    svg = accumulation_svg([(last, 0.0), (today, 339.0)], 365.0, "days", today, 339.0, dt.date(2026, 12, 28),
                           dt.date(2026, 12, 28), dt.date(2026, 12, 28))
    texts = _texts(svg)
    words = [w for _, w in texts]
    assert {"today", "limit 365 days", "forecast 28 Dec 2026"} <= set(words)
    for i, (box, word) in enumerate(texts):
        for other, other_word in texts[i + 1:]:
            assert not charts.overlap(box, other), (word, other_word)
    y_ticks = [w for box, w in texts if box[2] <= 64]  # right of the y axis' labels: the plot's left edge
    assert y_ticks == ["0", "100", "200", "300"]


def test_a_vertical_line_near_a_horizontal_ones_label_moves_the_later_label_clear():
    """As on a mirror page: "now" close to the right end of the fresh-coating line's label."""
    chart = charts.Chart(0.0, 3500.0, 0.82, 0.91)
    chart.axes(y_format=".3f")
    chart.hline(0.903, "computed fresh 0.903", colour="#4a6b4a")
    chart.vline(3400.0, "now")
    texts = _texts(chart.svg())
    labels = [t for t in texts if t[1] in ("now", "computed fresh 0.903")]
    assert len(labels) == 2 and not charts.overlap(labels[0][0], labels[1][0])
    vertical = chart.x(3400.0)
    fresh = next(box for box, w in labels if w.startswith("computed"))
    assert not fresh[0] < vertical < fresh[2]  # the line does not run through the label either


# --- the trigger table ---------------------------------------------------------------------------------


def test_rates_are_shown_to_three_significant_figures():
    assert [significant(v) for v in (0.002457, 5.216, 714.499, 12345.6, 1.0)] == [
        "0.00246", "5.22", "714", "12,300", "1.00"]


def _seasonal_site(slug: str):
    """``site_in_use`` with a sky whose dark hours follow the season (8 h +- 3 h over the year), so each month
    expects a different use, and the months logged (the last 60 nights) keep their own open fraction."""
    site = site_in_use(slug)
    rows = list(NightSky.objects.filter(site=site))
    for row in rows:
        row.dark_hours = 8.0 + 3.0 * math.cos(2 * math.pi * (row.night.timetuple().tm_yday - 355) / 365.25)
    NightSky.objects.bulk_update(rows, ["dark_hours"])
    services.site_recompute(site)
    return site


def _month_rows(page: str) -> list[list[str]]:
    rows = re.findall(r'<tr class="month">(.*?)</tr>', page, flags=re.S)
    return [[html.unescape(re.sub(r"<[^>]+>", "", c)).strip() for c in re.findall(r"<td>(.*?)</td>", r, re.S)]
            for r in rows]


def test_the_expected_use_by_month_shown_reproduces_the_forecast_date(db, users, client):
    """The open-hours forecast rebuilt from the page's table alone: add each month's nights x its expected
    hours per day until the running sum reaches the limit less the value now. Within the month the figure per
    day is the month's mean (the page's rounding to three figures, and the night-to-night change of dark
    hours inside a month, move the day found by under two days over the two years this forecast spans)."""
    site = _seasonal_site("traced")
    fans = site.telescopes.get().subsystems.get(kind="cooling_fans")
    status = PlanStatus.objects.get(plan__subsystem=fans, plan__name__startswith="Check fan")
    hours = next(t for t in status.trigger_rows if t["metric"] == "open_hours")
    forecast_on = dt.date.fromisoformat(hours["forecast"])
    client.force_login(users["viewer"])
    page = client.get(fans.get_absolute_url()).content.decode()
    assert f"{forecast_on:%d %b %Y}" in page
    first_day = dt.datetime.strptime(re.search(r"total counts from\s+(\d\d \w{3} \d{4})", page)[1], "%d %b %Y").date()

    remaining, total, found = hours["limit"] - hours["value"], 0.0, None
    for month, nights, dark, fraction, _pm10, _excess, per_day, *_ in _month_rows(page):
        nights, per_day = int(nights), float(per_day)
        # the figures of a row agree: dark hours x open fraction = expected open hours per day
        assert float(dark) * float(fraction.split()[0]) == pytest.approx(per_day, rel=5e-3)
        start = max(first_day, dt.datetime.strptime(month, "%b %Y").date())
        if total + nights * per_day >= remaining:
            found = start + dt.timedelta(days=math.ceil((remaining - total) / per_day) - 1)
            break
        total += nights * per_day
    assert found is not None and abs((found - forecast_on).days) <= 2


def test_dust_weighted_figures_name_the_sensitivity_and_the_weighting(db, users, client):
    site = _seasonal_site("dusty")
    fans = site.telescopes.get().subsystems.get(kind="cooling_fans")
    client.force_login(users["viewer"])
    page = html.unescape(client.get(fans.get_absolute_url()).content.decode())
    assert exposure.dust_weight_formula(1.5) in page
    assert "1 + 1.5 x max(0, PM10 - 20) / 20" in exposure.dust_weight_formula(1.5)
    # each month's dust-weighted hours per day = open hours per day x the mean weight of its open hours (35 ug/m3
    # on every logged night: an excess of 15 / 20 = 0.75, a weight of 1 + 1.5 x 0.75 = 2.125)
    for row in _month_rows(page):
        assert float(row[8]) == pytest.approx(float(row[6]) * 2.125, rel=5e-3)
        assert row[4] == "35" and row[5] == "0.750"
    # the dust plan is past its limit: its forecast column says when the limit was reached, not a bare date
    status = PlanStatus.objects.get(plan__subsystem=fans, metric="dust_hours")
    assert f"reached {status.forecast_date:%d %b %Y}" in page
    assert "(mean of the next 30 days)" in page
    assert not re.search(r"<td>\d{4}-\d\d-\d\d", page)  # dates as the rest of the site prints them


def test_logged_history_per_calendar_month_counts_nights_and_years():
    nights = np.array(["2024-01-05", "2025-01-07", "2025-01-08", "2025-03-01"], dtype="datetime64[D]")
    count, years = forecast.logged_per_month(nights)
    assert (count[0], years[0], count[2], years[2], count.sum(), years.sum()) == (3, 2, 1, 1, 4, 3)


# --- readings and the dashboard -----------------------------------------------------------------------


def test_a_trend_says_how_many_readings_since_which_service(db, users, client):
    """The page lists and draws every reading; the sentence counts those since the last service and names it."""
    from observatory_ops.logbook.models import Reading
    from observatory_ops.logbook.services import service_record_log

    site = site_in_use("trend", kinds=("axis1_drive",))
    drive = site.telescopes.get().subsystems.get(kind="axis1_drive")
    plan = drive.plans.get(triggers__metric="reading")
    today = services.site_today(site)
    service_on = today - dt.timedelta(days=40)
    # two readings before the service, three after it rising to the 1 s limit within days: the trend governs
    for days_ago, value in ((60, 0.7), (50, 0.72), (30, 0.8), (20, 0.88), (10, 0.96)):
        taken_at = dt.datetime.combine(today - dt.timedelta(days=days_ago), dt.time(12), dt.UTC)
        Reading.objects.create(subsystem=drive, quantity="settle_time_s", unit="s", value=value, taken_at=taken_at,
                               taken_by=users["technician"])
    service_record_log(drive, plan, service_on, users["technician"], "inspected")
    services.site_recompute(site)
    trend = next(t for t in PlanStatus.objects.get(plan=plan).trigger_rows if t["metric"] == "reading")
    assert f"Theil-Sen trend of 3 readings since the last service ({service_on:%d %b %Y})" in trend["basis"]
    client.force_login(users["viewer"])
    page = html.unescape(client.get(drive.get_absolute_url()).content.decode())
    assert f"last service {service_on:%d %b %Y}" in page  # marked on the picture, beside the older readings


def test_the_dashboard_says_when_an_item_needing_attention_is_already_on_a_work_order(db, users, client):
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    from observatory_ops.workorders import services as workorders

    site = site_in_use("attention")
    services.site_recompute(site)
    overdue = PlanStatus.objects.filter(site=site, status="overdue").select_related("plan").first()
    client.force_login(users["viewer"])
    with CaptureQueriesContext(connection) as before:
        client.get(site.get_absolute_url())
    order = workorders.work_order_from_due([overdue.plan], users["engineer"])
    with CaptureQueriesContext(connection) as after:
        page = client.get(site.get_absolute_url()).content.decode()
    assert f'On <a href="{order.get_absolute_url()}">{order.number}</a> (draft)' in page
    assert f"reached {overdue.forecast_date:%d %b %Y}" in page
    assert len(after.captured_queries) == len(before.captured_queries)  # one query for the orders, found or not


def test_the_expected_use_by_month_counts_no_use_on_a_recoats_nights_as_the_forecast(db, users, client):
    """An onboarding review could not match a brake's forecast to the table, which counted the nights of a recoat in
    hand as used: the table now has the nights out of each month, the use per day in service, and running totals with
    nothing added on the nights out; the forecast is rebuilt from it as above, (nights - out) x per day a month."""
    from observatory_ops.calc.windows import RECOAT_PHASES
    from observatory_ops.mirrors import services as mirror_services
    from observatory_ops.mirrors.models import CoatingEvent, Mirror

    site = _seasonal_site("traced-out")
    telescope = site.telescopes.get()
    primary = telescope.subsystems.filter(kind="primary_mirror").first() or Subsystem.objects.create(
        telescope=telescope, kind="primary_mirror", name="Primary mirror")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=services.site_today(site) - dt.timedelta(days=300),
                                metal="al")
    recoat = mirror_services.recoat_plan_create(mirror, services.site_today(site) + dt.timedelta(days=20),
                                                list(RECOAT_PHASES), 10.0, users["engineer"])
    fans = telescope.subsystems.get(kind="cooling_fans")
    status = PlanStatus.objects.get(plan__subsystem=fans, plan__name__startswith="Check fan")
    hours = next(t for t in status.trigger_rows if t["metric"] == "open_hours")
    forecast_on = dt.date.fromisoformat(hours["forecast"])
    client.force_login(users["viewer"])
    page = client.get(fans.get_absolute_url()).content.decode()
    assert f"the planned recoat of {telescope.name}: {primary.name} ({recoat.starts_on:%d %b %Y} to " in page
    rows = _month_rows(page)
    assert sum(int(row[3]) for row in rows) == recoat.nights  # every night of the recoat, in its months
    first_day = dt.datetime.strptime(re.search(r"total counts from\s+(\d\d \w{3} \d{4})", page)[1], "%d %b %Y").date()
    remaining, total, found = hours["limit"] - hours["value"], 0.0, None
    for month, nights, dark, out, fraction, _pm10, _excess, per_day, *_ in rows:
        in_service, per_day = int(nights) - int(out), float(per_day)
        # (a month with nights out: its dark hours and use per day both over its nights in service)
        assert float(dark) * float(fraction.split()[0]) == pytest.approx(per_day, rel=5e-3)
        start = max(first_day, dt.datetime.strptime(month, "%b %Y").date())
        if total + in_service * per_day >= remaining:
            found = start + dt.timedelta(days=math.ceil((remaining - total) / per_day) - 1)
            break
        total += in_service * per_day
    # Within the month found, the nights out are counted as at its end: up to the recoat's length off, plus the
    # rounding of the test above.
    assert found is not None and abs((found - forecast_on).days) <= recoat.nights + 2
