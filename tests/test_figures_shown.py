"""Specifications for figures shown alike wherever a person reads them (an auditor's recomputation found them right
but written differently from page to page).

- A rate per day: one helper (``planning.selectors.rate_text``), significant figures, never "0.0" for a rate that
  is not 0, and "the next 30 days" everywhere, as the code computes it (the mean of the next 30 days of the expected
  series): the reason sentence, the subsystem page's trigger table, the mirror page, the due list's CSV.
- A reading: as ``planning.models.figure_text`` writes it (4 significant figures), on the subsystem page too.
- A mirror's exposure: to the same decimal in the fit's words and in the optical train.
- PM10 not measured: "–" on the nights list, on a telescope's night of 0 open hours too.
- Template comments: Django's {# #} is one line only; one spread over two lines shows as page text.
- The history: field labels, not the field names of the code.
- The demo's links point where it serves.
"""
from __future__ import annotations

import datetime as dt
import html
import re
from io import StringIO
from pathlib import Path

import pytest
from conftest import site_in_use
from django.conf import settings as django_settings
from django.urls import reverse
from django.utils.html import strip_tags

# Fixtures of the specifications these build on: a mirror with a fitted decline (tests/test_mirrors.py), an axis
# drive's work order (tests/test_workorders.py).
from test_mirrors import TODAY, _constant_sky, mirror, on_today  # noqa: F401
from test_workorders import drive, order  # noqa: F401

from observatory_ops.calc.triggers import TriggerState
from observatory_ops.logbook.models import NightUsage, Reading
from observatory_ops.planning import metrics, services
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger, figure_text
from observatory_ops.planning.selectors import DUE_CSV_HEADER, RATE_FIGURES, due_csv_row, rate_text, trigger_table
from observatory_ops.planning.services import reason_text

# --- a rate per day ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(("rate", "text"), [
    (0.004117, "0.00412"),  # a slow rate keeps its figures: "0.0" would contradict a forecast within the horizon
    (5.216, "5.22"),
    (8.0, "8.00"),
    (0.00002043, "0.0000204"),
    (1234.5, "1,230"),
    (0.0, "0"),
])
def test_a_rate_is_written_to_three_significant_figures_and_never_as_zero(rate, text):
    assert RATE_FIGURES == 3
    assert rate_text(rate) == text
    if rate:
        assert text.strip("0.,") != ""


def test_a_rate_for_a_spreadsheet_has_no_thousands_separator_and_a_trend_its_sign():
    assert rate_text(1234.5, grouped=False) == "1230"
    assert rate_text(0.00204, signed=True) == "+0.00204" and rate_text(-0.00204, signed=True) == "-0.00204"


def test_a_slow_rate_does_not_read_zero_beside_its_forecast():
    state = TriggerState(metric=metrics.OPEN_HOURS, value=100, limit=2000, rate_per_day=0.004117,
                         forecast=dt.date(2029, 1, 1), unit=metrics.METRICS[metrics.OPEN_HOURS][1])
    sentence = reason_text(state)
    assert "about 0.00412 h per day expected over the next 30 days; forecast 01 Jan 2029" in sentence
    assert "0.0 h" not in sentence and "next month" not in sentence


def test_the_subsystem_page_the_reason_and_the_csv_write_a_counters_rate_alike(db, users, client):
    site = site_in_use("rates-alike", kinds=("cooling_fans",))
    fans = site.telescopes.get().subsystems.get()
    today = services.site_today(site)
    plan = ServicePlan.objects.create(subsystem=fans, name="Wash the filters", counting_from=today - dt.timedelta(50))
    Trigger.objects.create(plan=plan, metric=metrics.OPEN_HOURS, limit=5000)
    services.site_recompute(site)
    status = PlanStatus.objects.get(plan=plan)
    shown, unit = rate_text(status.rate_per_day), metrics.rate_unit(status.metric, status.unit)
    client.force_login(users["viewer"])
    page = html.unescape(client.get(fans.get_absolute_url()).content.decode())
    assert "next month" not in page
    # The trigger table, the sentence under the plan (the reason) and the CSV download: the same figure.
    (row,) = trigger_table(plan)
    assert row["rate"] == f"{shown} {unit} (mean of the next 30 days)" and row["rate"] in page
    assert f"about {shown} {unit} per day expected over the next 30 days" in status.reason
    assert status.reason in page
    csv_row = dict(zip(DUE_CSV_HEADER, due_csv_row(status), strict=True))
    assert csv_row["rate per day"] == rate_text(status.rate_per_day, grouped=False)


def _mirror_page(client, mirror) -> str:  # noqa: F811 (the fixture imported above)
    response = client.get(mirror.get_absolute_url())
    assert response.status_code == 200
    return re.sub(r"\s+", " ", html.unescape(strip_tags(response.content.decode())))


def test_the_mirror_page_writes_its_rate_as_the_plans_do_and_its_exposure_alike(
    mirror, users, client, on_today  # noqa: F811
):
    from observatory_ops.mirrors.services import mirror_forecast

    _constant_sky(mirror)
    # A night of 4.3 open hours at PM10 40 (weight 2): 8.6 dust-weighted hours, so today's exposure has a tenth.
    night = NightUsage.objects.filter(site=mirror.subsystem.telescope.site).order_by("night").last()
    night.open_hours = 4.3
    night.save()
    state = mirror_forecast(mirror, TODAY)
    client.force_login(users["viewer"])
    text = _mirror_page(client, mirror)
    assert (f"at about {rate_text(state.dust_hours_per_day)} dust-weighted h per day expected over the next 30 days"
            in text)
    assert "next month" not in text
    in_fit = re.search(r"Exposure now ([\d,.]+) h", text)[1]
    in_train = re.search(r"estimate from the fit at today's exposure \(([\d,.]+) dust-weighted open hours", text)[1]
    assert in_fit == in_train == f"{state.exposure_now_h:,.1f}"
    assert in_fit.endswith(".6")  # 8 x 299 + 8.6 = 2,400.6 (hand arithmetic), not rounded away on either side


# --- a reading ----------------------------------------------------------------------------------------------------


def test_a_reading_on_the_subsystem_page_is_written_as_the_trigger_table_writes_it(db, users, client):
    site = site_in_use("reading-alike", kinds=("axis1_drive",))
    axis = site.telescopes.get().subsystems.get()
    noon = dt.datetime(2026, 1, 5, 12, tzinfo=dt.UTC)
    Reading.objects.create(subsystem=axis, quantity="settle_time_s", unit="s", value=1.058, taken_at=noon,
                           taken_by=users["technician"])
    client.force_login(users["viewer"])
    page = client.get(axis.get_absolute_url()).content.decode()
    assert figure_text(metrics.READING, "s", 1.058) == "1.058"
    assert "<td>1.058 s</td>" in page and "1.0580" not in page


# --- PM10 not measured ----------------------------------------------------------------------------------------


def test_pm10_not_measured_on_a_telescopes_idle_night_shows_as_not_measured(site, telescope, users, client):
    night = dt.date(2026, 1, 5)
    NightUsage.objects.create(site=site, night=night, open_hours=5, slews=10)
    NightUsage.objects.create(site=site, telescope=telescope, night=night, open_hours=0)
    client.force_login(users["viewer"])
    page = client.get(reverse("nights-list", args=[site.slug])).content.decode()
    rows = {line.split("</td><td>")[1]: line.split("</td><td>")[2:9] for line in page.splitlines()
            if line.startswith("<tr><td>Mon 05 Jan 2026")}
    # open hours, slews, axis 1 and 2 travel, brake cycles, PM10, humidity: a count left out of an idle night counts
    # 0 (planning.services.UsageLog._filled); its PM10 is NULL in the database and weighs nothing: "–".
    assert rows["T1"] == ["0.00", "0", "0.0", "0.0", "0", "–", "–"]  # travel as stored, to 0.1 at least
    assert rows["whole site"][5] == "–"
    assert NightUsage.objects.get(telescope=telescope).pm10_ugm3 is None


# --- template comments --------------------------------------------------------------------------------------------


def _templates() -> list[Path]:
    root = Path(django_settings.BASE_DIR) / "observatory_ops"
    found = sorted(root.glob("*/templates/**/*")) + sorted((root / "templates").glob("**/*"))
    return [path for path in found if path.is_file()]


def test_no_template_spreads_a_hash_comment_over_two_lines():
    """Django reads {# ... #} on one line only: one spread over two lines is written out as page text. A longer
    comment is {% comment %} ... {% endcomment %}."""
    templates = _templates()
    assert len(templates) > 50  # the walk finds the templates
    spread = []
    for path in templates:
        for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
            for opened in re.finditer(r"\{#", line):
                if "#}" not in line[opened.end():]:
                    spread.append(f"{path.relative_to(django_settings.BASE_DIR)}:{number}")
    assert spread == []


def test_the_due_list_shows_no_comment_text(db, users, client):
    client.force_login(users["viewer"])
    page = client.get(reverse("due-list")).content.decode()
    assert "{#" not in page and "#}" not in page and "Work orders are made by a technician or above" not in page


# --- the history ------------------------------------------------------------------------------------------------


def test_a_work_orders_history_names_fields_by_their_labels(order, users, client):  # noqa: F811
    from observatory_ops.workorders.services import work_order_move

    order.assignee = users["technician"]
    order.save()
    work_order_move(order, "issue", users["engineer"])
    work_order_move(order, "start", users["technician"])
    client.force_login(users["viewer"])
    history = client.get(order.get_absolute_url()).content.decode().split("<h2>History</h2>")[1]
    for label in ("issued at", "started at", "assignee"):
        assert f"<strong>{label}</strong>:" in history
    for name in ("issued_at", "started_at"):
        assert name not in history
    # The CSV, for programs, keeps the field names.
    rows = client.get(reverse("history", args=["workorders.workorder", order.pk]) + "?export=csv").content.decode()
    assert ",issued_at," in rows and ",started_at," in rows


# --- the demo's links ---------------------------------------------------------------------------------------------


@pytest.fixture
def demo_served(monkeypatch, settings, site):
    """The demo command with its loading and its server replaced: what SITE_URL reads when it would serve."""
    from fixtures_demo import generator
    from observatory_ops.registry.management.commands import demo

    settings.SITE_URL = "http://127.0.0.1:8000"  # a layer of its own, undone after the test
    monkeypatch.setattr(generator, "load_refusal", lambda: None)
    monkeypatch.setattr(generator, "demo_users", lambda: [])
    monkeypatch.setattr(generator, "build", lambda: (site, False))
    seen = {}

    def call_command(name, *args, **options):
        if name == "runserver":
            seen["address"], seen["site_url"] = args[0], django_settings.SITE_URL

    monkeypatch.setattr(demo, "call_command", call_command)

    def run(*args: str) -> dict:
        from django.core.management import call_command as django_call_command

        django_call_command("demo", *args, stdout=StringIO())
        return seen

    return run


def test_the_demo_links_to_the_port_it_serves_on(demo_served, monkeypatch):
    monkeypatch.delenv("SITE_URL", raising=False)
    seen = demo_served("--port", "8123")
    assert seen == {"address": "127.0.0.1:8123", "site_url": "http://127.0.0.1:8123"}


def test_the_demo_keeps_a_site_url_set_in_the_environment(demo_served, monkeypatch):
    monkeypatch.setenv("SITE_URL", "https://ops.example.org")
    seen = demo_served("--port", "8123")
    assert seen == {"address": "127.0.0.1:8123", "site_url": "http://127.0.0.1:8000"}
