"""Figures the subsystem page writes as the rest of the tool writes them.

- A trend's rate: the rate column and the basis sentence both print the fitted slope by
  ``logbook.quantities.significant``, from the same unrounded number (a slope of 0.00051 s a day once read
  "+0.000500 s (trend)" beside "+0.000510 s/day"), with its unit per day.
- A recoat line with no fit yet: "Now" is the computed fresh value, assumed because nothing is measured since the
  coating, and the row says so in the mirror page's words (``mirrors.services.reflectance_now``), not "fitted decline".
"""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from conftest import constant_sky

from observatory_ops.logbook.models import Reading
from observatory_ops.mirrors.models import CoatingEvent, Mirror
from observatory_ops.mirrors.services import ASSUMED_FRESH, mirror_forecast, reflectance_now, throughput
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.planning.selectors import plans_with_plots, trigger_table
from observatory_ops.planning.services import HORIZON_DAYS, site_recompute, site_today
from observatory_ops.registry.models import Subsystem

pytestmark = pytest.mark.django_db


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


@pytest.fixture
def today(telescope):
    site = telescope.site
    today = site_today(site)
    constant_sky(site, today - dt.timedelta(days=100), today + dt.timedelta(days=HORIZON_DAYS + 1))
    return today


def test_a_trends_rate_column_and_its_basis_print_the_same_figures(telescope, users, client, today):
    drive = Subsystem.objects.create(telescope=telescope, kind="axis1_drive", name="Axis 1 drive")
    plan = ServicePlan.objects.create(subsystem=drive, name="Drive check", counting_from=today - dt.timedelta(days=60))
    Trigger.objects.create(plan=plan, metric="calendar_days", limit=90)  # governs: due long before the trend
    Trigger.objects.create(plan=plan, metric="reading", limit=1.0, quantity="settle_time_s")
    # Five readings ten days apart on an exact line of +0.00051 s a day: every pairwise slope (Theil-Sen) is 0.00051.
    for i in range(5):
        # At noon UTC, so the days between readings are whole whatever the site's clock changes.
        taken = dt.datetime.combine(today - dt.timedelta(days=50 - 10 * i), dt.time(12), tzinfo=dt.UTC)
        Reading.objects.create(subsystem=drive, quantity="settle_time_s", unit="s", value=0.5 + 0.00051 * 10 * i,
                               taken_at=taken, taken_by=users["technician"])
    site_recompute(telescope.site)
    plan.refresh_from_db()
    state = PlanStatus.objects.get(plan=plan)
    assert state.metric == "calendar_days"
    trend = next(row for row in trigger_table(plan) if row["metric"] == "reading")
    assert trend["rate_per_day"] == pytest.approx(0.00051, rel=1e-9)  # stored as fitted, not rounded to 0.0005
    assert trend["rate"] == "+0.000510 s/day (trend)"
    assert "+0.000510 s/day" in trend["basis"]
    client.force_login(users["viewer"])
    page = _text(client.get(drive.get_absolute_url()))
    assert "+0.000510 s/day (trend)" in page and "+0.000510 s/day" in page and "+0.000500" not in page


def test_a_recoat_line_with_nothing_measured_says_the_fresh_value_is_assumed_as_the_mirror_page_does(
    telescope, users, client, today
):
    primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name="Primary")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    coated = today - dt.timedelta(days=40)
    CoatingEvent.objects.create(mirror=mirror, coated_on=coated, metal="al")
    plan = ServicePlan.objects.create(subsystem=primary, name="Recoat primary", counting_from=coated)
    Trigger.objects.create(plan=plan, metric="recoat_line", limit=0)
    site_recompute(telescope.site)
    state = mirror_forecast(mirror, today)
    now = reflectance_now(state)
    assert now.source == ASSUMED_FRESH and now.now == state.fresh_band
    words = (f"computed fresh value assumed: not measured since its coating of {coated:%d %b %Y} (no fit yet: need "
             "at least 3 readings to fit a decline with uncertainties; got 0)")
    assert now.basis == words
    row = trigger_table(plans_with_plots(primary)[0])[0]
    assert row["metric"] == "recoat_line" and row["value"] == pytest.approx(state.fresh_band)
    assert row["basis"].startswith(f"band reflectance now: {words}; recoat line ")
    assert "fitted decline" not in row["basis"]
    # The mirror page's optical train says it in the same words.
    assert next(m for m in throughput(telescope, today).mirrors if m.mirror == mirror).basis == words
    client.force_login(users["viewer"])
    assert words in _text(client.get(primary.get_absolute_url()))
    assert words in _text(client.get(mirror.get_absolute_url()))
