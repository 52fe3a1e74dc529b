"""Specifications for the due list as programs read it (``planning.selectors.due_record``): the one serialiser of the
API's due list and of ``due --json``, every key documented in README.md, and figures a program can trace and compare.
"""
from __future__ import annotations

import datetime as dt
import json
import re
from io import StringIO
from pathlib import Path

import pytest
from conftest import site_in_use
from django.conf import settings
from django.core.management import call_command
from django.urls import reverse
from django.utils import timezone

from observatory_ops.api import services as api_services
from observatory_ops.calc.triggers import STATUSES
from observatory_ops.planning import metrics
from observatory_ops.planning.models import PlanStatus
from observatory_ops.planning.selectors import DUE_RECORD_DECIMALS, DUE_RECORD_RATE_FIGURES, due_record, due_rows
from observatory_ops.planning.services import site_recompute
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db
README = (Path(__file__).resolve().parent.parent / "README.md").read_text()
KEYS, TRIGGERS = "| key | meaning |", "| `trigger` | what it counts | `unit` |"


def readme_table(header: str) -> dict[str, str]:
    """The rows of README.md's table whose header line begins ``header``: each backquoted name in the first cell (a
    cell may name two keys) to the row's other cells."""
    table = README.split(f"\n{header}", 1)[1].split("\n\n", 1)[0]
    rows = {}
    for line in table.splitlines()[2:]:
        first, *rest = line.strip("|").split(" | ")
        for name in re.findall(r"`([^`]+)`", first):
            rows[name] = " | ".join(rest)
    return rows


@pytest.fixture
def due_site(db):
    """A site in use with its states computed (catalogue plans of four kinds, 60 nights logged)."""
    site = site_in_use("due-keys")
    site_recompute(site)
    return site


def test_every_key_of_the_due_list_is_documented_in_the_readme_and_no_other(due_site):
    records = [due_record(status) for status in due_rows().filter(site=due_site)]
    assert records and {tuple(record) for record in records} == {tuple(readme_table(KEYS))}


def test_the_readme_lists_every_trigger_code_with_its_unit_and_every_status():
    triggers = readme_table(TRIGGERS)
    assert set(triggers) == set(metrics.METRICS)
    for code, (_label, unit) in metrics.METRICS.items():
        if unit:  # a reading's unit is its quantity's; a recoat line's is given by the serialiser
            assert f"`{unit}`" in triggers[code], code
    assert "`fraction`" in triggers[metrics.RECOAT_LINE]
    status = readme_table(KEYS)["status"]
    assert [s for s in STATUSES if f"`{s}`" in status] == list(STATUSES)
    assert "Look ahead days" in status  # the site's look-ahead (calc.triggers.due_status), named as the admin names it


def test_the_api_and_the_due_command_give_the_same_records(client, due_site):
    secret = api_services.api_token_create(due_site, "dome computer")[1]
    api = client.get(reverse("api-due", args=[due_site.slug]), HTTP_AUTHORIZATION=f"Bearer {secret}").json()
    out = StringIO()
    call_command("due", "--site", due_site.slug, "--json", stdout=out)
    assert api == json.loads(out.getvalue()) and len(api) == PlanStatus.objects.filter(site=due_site).count()


def test_each_record_names_its_telescope_and_links_its_subsystem_page_as_the_digest_does(client, due_site, users):
    """Programs need not split "T1: Primary mirror"; the page is SITE_URL and the subsystem's path, as in the digest
    (planning/templates/planning/due_digest.txt)."""
    client.force_login(users["viewer"])
    for status in due_rows().filter(site=due_site):
        record, subsystem = due_record(status), status.plan.subsystem
        assert record["telescope"] == subsystem.telescope.name == "T1"
        assert record["subsystem"] == f"T1: {subsystem.name}"
        assert record["page"] == f"{settings.SITE_URL}/subsystems/{subsystem.pk}/"
        assert client.get(record["page"].removeprefix(settings.SITE_URL)).status_code == 200


def test_an_overdue_item_gives_the_past_day_it_was_reached(due_site):
    """README: on an overdue item forecast_date is the day the limit was reached, in the past. The site's plans count
    from 100 days ago (tests/conftest.py site_in_use), so a 30-day calendar limit was reached 70 days ago."""
    today = timezone.now().date()  # the site is at UTC
    plan = next(s.plan for s in due_rows().filter(site=due_site))
    plan.triggers.all().delete()
    plan.triggers.create(metric=metrics.CALENDAR_DAYS, limit=30)
    site_recompute(due_site)
    record = due_record(PlanStatus.objects.get(plan=plan))
    reached = (today - dt.timedelta(days=100) + dt.timedelta(days=30)).isoformat()
    assert (record["status"], record["trigger"], record["value"], record["limit"], record["unit"]) == (
        "overdue", "calendar_days", 100, 30, "days"
    )
    assert record["forecast_date"] == record["earliest"] == record["latest"] == reached < today.isoformat()


def test_a_recoat_line_gives_its_value_and_limit_alike_rounded_as_a_fraction(telescope):
    """A reviewer read "value": 0.837 beside "limit": 0.8280808461857818 and "unit": "". Both are reflectances: to
    4 decimals, as every page writes one (logbook.quantities.REFLECTANCE_DECIMALS), in the unit a reflectance
    reading has ("fraction", logbook.quantities.QUANTITIES)."""
    mirror = subsystem_create(telescope, "primary_mirror", "Primary mirror", counting_from=dt.date(2026, 1, 1))
    status = PlanStatus(
        plan=mirror.plans.first(), site=telescope.site, status="later", urgency=2, metric=metrics.RECOAT_LINE,
        value=0.83698, limit=0.8280808461857818, unit="", rate_per_day=None, forecast_date=dt.date(2027, 1, 20),
        earliest=dt.date(2027, 1, 13), latest=dt.date(2027, 1, 27), reason="", computed_at=timezone.now(),
    )
    record = due_record(status)
    assert (record["value"], record["limit"], record["unit"], record["rate"]) == (0.837, 0.8281, "fraction", None)


def _reading_state(telescope, value: float, limit: float, unit: str, rate: float | None) -> PlanStatus:
    brake = subsystem_create(telescope, "brake", "Brake", counting_from=dt.date(2026, 1, 1))
    return PlanStatus(
        plan=brake.plans.first(), site=telescope.site, status="later", urgency=2, metric=metrics.READING,
        value=value, limit=limit, unit=unit, rate_per_day=rate, forecast_date=None, earliest=None, latest=None,
        reason="", computed_at=timezone.now(),
    )


def test_other_values_and_limits_keep_four_decimals_alike(telescope):
    record = due_record(_reading_state(telescope, 4.123456, 4.5, "bar", -0.0123456))
    assert (record["value"], record["limit"], record["unit"]) == (4.1235, 4.5, "bar")


@pytest.mark.parametrize(("rate", "given"), [
    (0.0020437, 0.002044),  # a reading's slow trend: 4 decimals gave 0.002, a fifth of it lost
    (-0.0123456, -0.01235),
    (-0.0000251234, -0.00002512),  # a slow reflectance decline: 4 decimals gave 0.0 (-0.0)
    (1.0, 1.0),  # calendar days
    (7.123456, 7.123),  # open hours a day
    (1234.5678, 1235.0),  # slews a day
])
def test_the_rate_keeps_four_significant_figures_however_small(telescope, rate, given):
    """A reviewer read "rate": 0.002 for a trend of +0.00204 s a day: 4 decimals cut a slow rate short, or to 0. Four
    significant figures (``DUE_RECORD_RATE_FIGURES``) keep its figures at any size; it stays a JSON number."""
    record = due_record(_reading_state(telescope, 0.55, 0.8, "s", rate))
    assert record["rate"] == given and json.loads(json.dumps(record))["rate"] == given


def test_the_readme_says_how_each_figure_is_rounded():
    keys = readme_table(KEYS)
    assert f"Rounded to {DUE_RECORD_DECIMALS} decimals" in keys["value"]
    assert f"rounded to {DUE_RECORD_DECIMALS} decimals" in keys["limit"]
    assert f"Rounded to {DUE_RECORD_RATE_FIGURES} significant figures" in keys["rate"]


def test_a_plan_that_cannot_be_computed_comes_last_with_its_reason_not_left_out(client, due_site):
    """An API review: a brake plan watching a reading never logged was missing from the API's list, as if nothing were
    due on it; the dashboard named it. It now comes last, status ``not_computed``, its figures null, with the
    dashboard's reason, and with the same keys as every other record (README.md)."""
    from observatory_ops.planning.models import ServicePlan
    from observatory_ops.planning.selectors import NOT_COMPUTED

    brake = subsystem_create(due_site.telescopes.first(), "brake", "Axis 1 brake", counting_from=dt.date(2026, 1, 1))
    plan = ServicePlan.objects.create(subsystem=brake, name="Brake air pressure minimum",
                                      counting_from=dt.date(2026, 1, 1))
    plan.triggers.create(metric=metrics.READING, quantity="brake_pressure_bar", limit=4.0, direction="below")
    site_recompute(due_site)
    secret = api_services.api_token_create(due_site, "dome computer")[1]
    api = client.get(reverse("api-due", args=[due_site.slug]), HTTP_AUTHORIZATION=f"Bearer {secret}").json()
    last = api[-1]
    assert (last["plan_id"], last["status"], last["kind"], last["value"], last["forecast_date"]) == (
        plan.pk, NOT_COMPUTED, "brake", None, None)
    assert "none is logged since the plan's start (01 Jan 2026)" in last["reason"]
    assert tuple(last) == tuple(readme_table(KEYS))
    assert all(record["status"] != NOT_COMPUTED for record in api[:-1])


def test_the_due_list_page_says_how_many_days_an_overdue_item_is_past_its_limit(client, due_site, users):
    """A manager's review found how long an item is overdue only in the CSV ("days past the limit"): the page says it
    beside the day reached, counted at the site's today as the CSV counts it. A 30-day limit from 100 days ago: 70."""
    plan = next(s.plan for s in due_rows().filter(site=due_site))
    plan.triggers.all().delete()
    plan.triggers.create(metric=metrics.CALENDAR_DAYS, limit=30)
    site_recompute(due_site)
    status = PlanStatus.objects.get(plan=plan)
    client.force_login(users["viewer"])
    page = client.get("/due/", {"site": due_site.pk}).content.decode()
    assert f'reached {status.forecast_date:%d %b %Y} <span class="days-past">(70 days ago)</span>' in page
