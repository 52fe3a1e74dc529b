"""How late planned work came is kept on its service record.

A due state says how overdue a plan is only until the work is logged: then the plan counts again and the lateness
is gone. A reviewer preparing the year-end review could not tell which plans had been overdue, or by how much. The
record of work on an overdue plan keeps the day the plan's limit was passed (``ServiceRecord.limit_passed_on``),
read from the stored due state before the record restarts it; the subsystem page and the records CSV say how many
days late the work came. Worked by hand: a plan counting from 1 Jan 2025 with a 365-day calendar limit passes it on
1 Jan 2026; work on 31 Jan 2026 comes 30 days after.
"""
from __future__ import annotations

import datetime as dt
import re

import pytest

from observatory_ops.logbook import services
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Subsystem

pytestmark = pytest.mark.django_db


@pytest.fixture
def late_plan(telescope):
    """A plan with one 365-day calendar limit, counting from 1 Jan 2025: its limit was passed on 1 Jan 2026."""
    fans = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name="Cell fans")
    plan = ServicePlan.objects.create(subsystem=fans, name="Replace fan filters", counting_from=dt.date(2025, 1, 1),
                                      counting_from_given=True)
    Trigger.objects.create(plan=plan, metric="calendar_days", limit=365)
    site_recompute(telescope.site)
    status = PlanStatus.objects.get(plan=plan)
    assert (status.status, status.forecast_date) == ("overdue", dt.date(2026, 1, 1))
    return plan


def test_work_on_an_overdue_plan_keeps_how_late_it_came(late_plan, users, client):
    record = services.service_record_log(late_plan.subsystem, late_plan, dt.date(2026, 1, 31), users["technician"],
                                         "Filters replaced", hours_spent=0.5)
    assert (record.limit_passed_on, record.days_after_limit) == (dt.date(2026, 1, 1), 30)
    assert PlanStatus.objects.get(plan=late_plan).status != "overdue"  # the plan counts again from the work

    client.force_login(users["viewer"])
    page = client.get(late_plan.subsystem.get_absolute_url()).content.decode()
    assert "30 days after its limit was passed (01 Jan 2026)" in page
    assert "<summary>Late: after its limit was passed</summary>Due when logged: Worked out on " in page
    csv_text = client.get(f"/sites/{late_plan.subsystem.telescope.site.slug}/service-records.csv"
                          "?from=2026-01-01&to=2026-12-31").content.decode()
    assert ",Replace fan filters,late: after its limit was passed,2026-01-01,30," in csv_text
    # What it was due against, as the plan's due sentence stood when the work was logged (an export review's insurer).
    # Counted to the day it was logged, months after the work, and said so (a diff review read "on time" beside a
    # count far past the limit).
    today = site_today(late_plan.subsystem.telescope.site)
    assert record.timeliness == "late" and record.due_when_logged.startswith(
        f"Worked out on {today:%d %b %Y}, {(today - dt.date(2026, 1, 31)).days} days after the work, its figures "
        "counted to that day: Calendar")
    assert record.due_when_logged in csv_text.replace('""', '"')


def test_work_done_before_the_limit_or_without_a_plan_is_not_late(late_plan, users):
    """A service back-filled from before the limit was passed was on time; ad hoc work has no limit."""
    early = services.service_record_log(late_plan.subsystem, late_plan, dt.date(2025, 12, 20), users["technician"],
                                        "Filters replaced (from the paper log)")
    assert early.limit_passed_on is None and early.days_after_limit is None
    assert early.timeliness_text == "on time: before its limit was passed" and early.due_when_logged
    ad_hoc = services.service_record_log(late_plan.subsystem, None, site_today(late_plan.subsystem.telescope.site),
                                         users["technician"], "Rattle looked at")
    assert ad_hoc.limit_passed_on is None
    assert (ad_hoc.timeliness_text, ad_hoc.due_when_logged) == ("ad hoc", "")


def test_a_correction_keeps_the_limit_and_counts_from_its_own_date(late_plan, users):
    record = services.service_record_log(late_plan.subsystem, late_plan, dt.date(2026, 1, 31), users["technician"],
                                         "Filters replaced")
    corrected = services.service_record_correct(record, users["engineer"], "Filters replaced",
                                                performed_on=dt.date(2026, 1, 21), reason="typo")
    assert (corrected.limit_passed_on, corrected.days_after_limit) == (dt.date(2026, 1, 1), 20)
    assert corrected.timeliness == "late" and "limit reached on 01 Jan 2026" in corrected.due_when_logged
    kept = services.service_record_correct(corrected, users["engineer"], "Filters and gaskets replaced", reason="more")
    assert (kept.timeliness, kept.due_when_logged) == (corrected.timeliness, corrected.due_when_logged)


def test_work_on_a_plan_whose_last_service_was_unknown_is_due_from_the_start_not_late(telescope, users):
    """A plan added in the admin with no day it counts from is due at once (planning.services): its first service is
    neither late nor on time."""
    fans = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name="Dome fans")
    plan = ServicePlan.objects.create(subsystem=fans, name="Clean fan blades", counting_from_given=False,
                                      counting_from=site_today(telescope.site) - dt.timedelta(days=200))
    Trigger.objects.create(plan=plan, metric="calendar_days", limit=90)
    site_recompute(telescope.site)
    assert PlanStatus.objects.get(plan=plan).last_service_unknown
    record = services.service_record_log(fans, plan, site_today(telescope.site), users["technician"], "Cleaned")
    assert record.timeliness_text == "due from the start: its last service before was not known"
    assert record.limit_passed_on is None


def test_finishing_a_work_order_on_an_overdue_plan_keeps_how_late_it_came(late_plan, users):
    from test_workorders import _all_readings, _confirmed

    from observatory_ops.logbook.models import ServiceRecord
    from observatory_ops.workorders import services as workorders

    today = site_today(late_plan.subsystem.telescope.site)
    order = workorders.work_order_from_due([late_plan], users["engineer"], today)
    workorders.work_order_move(order, "issue", users["engineer"])
    workorders.work_order_move(order, "start", users["technician"])
    workorders.work_order_finish(order, users["technician"], 1.0, "filters replaced", _all_readings(order, 0.7),
                                 work_done_on=today, **_confirmed(order))
    record = ServiceRecord.objects.get(work_order=order)
    passed = dt.date(2026, 1, 1)
    assert (record.limit_passed_on, record.days_after_limit) == (passed, (today - passed).days)


def test_the_due_lists_csv_says_how_long_an_overdue_plan_has_been_past_its_limit(late_plan, users, client):
    """Before the work is logged, the due list's download says it: the day the limit was passed is the overdue
    plan's forecast date, and the days since count to the site's today."""
    import csv
    import io

    client.force_login(users["viewer"])
    rows = list(csv.DictReader(io.StringIO(client.get("/due/?export=csv").content.decode())))
    row = next(r for r in rows if r["service"] == "Replace fan filters")
    today = site_today(late_plan.subsystem.telescope.site)
    assert (row["forecast"], row["days past the limit"]) == ("2026-01-01", str((today - dt.date(2026, 1, 1)).days))
    assert row["last service"] == ""  # none logged: the plan counts from the start given


def test_work_entered_late_from_a_paper_log_is_judged_against_the_limit_it_answered(late_plan, users, client):
    """A diff review logged a service of 01 Mar 2025 after the plan's newer one: it was called "on time" against the
    newer period's limit, with that period's due sentence (logbook.services._due_without sets the later service
    aside). By hand: counting from 1 Jan 2025, 365 days: work on 1 Mar 2025 came before the limit of 1 Jan 2026."""
    services.service_record_log(late_plan.subsystem, late_plan, dt.date(2026, 1, 31), users["technician"], "Done")
    client.force_login(users["technician"])
    page = client.post(f"/subsystems/{late_plan.subsystem.pk}/service/new/", {
        "plan": late_plan.pk, "performed_on": "2025-03-01", "hours_spent": "0.5", "summary": "From the paper log",
        "findings": ""}, follow=True)
    said = " ".join(str(m) for m in page.context["messages"])
    assert "the plan 'Replace fan filters' counts on from its later service of 31 Jan 2026." in said
    early = late_plan.service_records.get(performed_on=dt.date(2025, 3, 1))
    assert (early.timeliness, early.limit_passed_on) == ("on time", None)
    # Its figures are those of the service before it (the plan's start) counted to today, and said so.
    assert early.due_when_logged.startswith("Worked out on ")
    assert "limit reached on 01 Jan 2026" in early.due_when_logged
    # The stored state is as it was: counting from the newer service.
    assert PlanStatus.objects.get(plan=late_plan).last_service_on == dt.date(2026, 1, 31)
    assert late_plan.service_records.filter(void=True).count() == 0


def test_a_withdrawal_and_a_plan_without_a_trigger_say_so(late_plan, users):
    record = services.service_record_log(late_plan.subsystem, late_plan, dt.date(2026, 1, 31), users["technician"],
                                         "Filters replaced")
    withdrawal = services.service_record_correct(record, users["engineer"], "Filters replaced", void=True,
                                                 reason="logged on the wrong subsystem")
    assert withdrawal.timeliness_text == "withdrawn (counts nothing)"
    bare = ServicePlan.objects.create(subsystem=late_plan.subsystem, name="Look at the cable wrap",
                                      counting_from=dt.date(2025, 1, 1), counting_from_given=True)
    looked = services.service_record_log(late_plan.subsystem, bare, dt.date(2026, 2, 1), users["technician"], "Ok")
    assert looked.timeliness_text == "no due state: the plan had no trigger, no reading yet, or was not counted"


def test_records_kept_late_before_their_timeliness_was_kept_are_said_late(late_plan, users):
    """Migration logbook 0015 fills in "late" where the limit's day was kept."""
    import importlib

    from django.apps import apps

    from observatory_ops.logbook.models import ServiceRecord

    record = services.service_record_log(late_plan.subsystem, late_plan, dt.date(2026, 1, 31), users["technician"],
                                         "Filters replaced")
    ServiceRecord.objects.filter(pk=record.pk).update(timeliness="", due_when_logged="")
    migration = importlib.import_module("observatory_ops.logbook.migrations.0015_timeliness_without_a_state")
    migration.late_records_said_late(apps, None)
    assert ServiceRecord.objects.get(pk=record.pk).timeliness == "late"


def test_a_service_before_the_plans_given_last_service_is_asked_about_and_due_from_the_start(telescope, users, client):
    """A second diff review logged a service of June on a plan given 1 November as its last service: judged "on time"
    against November's limit, and the plan counted from June, overdue at once, without a word."""
    fans = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name="Dome fans")
    today = site_today(telescope.site)
    given = today - dt.timedelta(days=20)
    plan = ServicePlan.objects.create(subsystem=fans, name="Clean fan blades", counting_from=given,
                                      counting_from_given=True)
    Trigger.objects.create(plan=plan, metric="calendar_days", limit=30)
    site_recompute(telescope.site)
    early = today - dt.timedelta(days=150)
    url = f"/subsystems/{fans.pk}/service/new/"
    client.force_login(users["technician"])
    sent = {"plan": plan.pk, "performed_on": early.isoformat(), "hours_spent": "1", "summary": "From the paper log",
            "findings": ""}
    page = client.post(url, sent)
    assert page.status_code == 200 and not plan.service_records.exists()
    assert (f"{early:%d %b %Y} is before {given:%d %b %Y}, given as the plan&#x27;s last service: logged, the plan "
            f"would count from {early:%d %b %Y} instead") in page.content.decode()
    asked = re.search(r'name="questioned" value="([^"]*)"', page.content.decode()).group(1)
    assert client.post(url, {**sent, "value_confirmed": "on", "questioned": asked}).status_code == 302
    record = plan.service_records.get()
    assert (record.timeliness, record.due_when_logged, record.limit_passed_on) == ("from start", "", None)
