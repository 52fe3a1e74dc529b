"""A plan whose last service nobody has told the tool: new equipment is not taken as freshly serviced.

The plans a subsystem brings when it is added in the admin count from the day it was registered, a date nobody chose.
Until a service is logged for such a plan, or an engineer gives its counting date by hand, its last service is
unknown and it is due now: equipment of unknown maintenance history gets a baseline service before its intervals
mean anything (common practice, no published source). A plan made with a date given (``subsystem_create``, the demo,
the benchmark, a plan added in the admin) counts from that date as before.

Past readings and past nights come before a plan's start when its last service is not logged yet; the reading form
and the nights import say so, and point to logging the last service first.
"""
from __future__ import annotations

import csv
import datetime as dt
import html
import io
import re

import pytest
from conftest import constant_sky
from django.core.files.uploadedfile import SimpleUploadedFile
from django.utils import timezone

from observatory_ops.logbook.services import nights_import, service_record_log
from observatory_ops.planning import digest
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.planning.services import HORIZON_DAYS, site_recompute, site_today
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db

BASELINE = "no service record: enter the last service if it is known, or do a baseline service"
RCD_PLAN = "Inspect AC distribution and test residual-current devices"  # catalogue: every 180 calendar days
DRIVE_PLAN = "Inspect axis 1 drive and check tracking"  # catalogue: watches the settle time


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


@pytest.fixture
def engineer(users, client):
    users["engineer"].is_staff = True  # the admin needs staff status
    users["engineer"].save()
    client.force_login(users["engineer"])
    return users["engineer"]


@pytest.fixture
def now(telescope):
    """The site's today, with a constant cached sky around it (10 dark hours a night), so no recompute waits for
    astropy."""
    site = telescope.site
    today = site_today(site)
    constant_sky(site, today - dt.timedelta(days=400), today + dt.timedelta(days=HORIZON_DAYS + 1))
    return today


def _added_in_the_admin(client, telescope, kind: str, name: str, **fields) -> Subsystem:
    response = client.post("/admin/registry/subsystem/add/", {
        "telescope": telescope.pk, "kind": kind, "name": name, "serial_number": "", "notes": "", **fields,
    }, follow=True)
    assert response.status_code == 200
    return Subsystem.objects.get(name=name)


def _state(subsystem: Subsystem, plan_name: str) -> PlanStatus:
    return PlanStatus.objects.select_related("plan").get(plan__subsystem=subsystem, plan__name=plan_name)


# --- a new subsystem's plans ---------------------------------------------------------------------------------------


def test_a_subsystem_added_in_the_admin_is_due_now_with_its_last_service_unknown(engineer, client, telescope, now):
    mains = _added_in_the_admin(client, telescope, "ac_power", "Mains distribution")
    plan = mains.plans.get(name=RCD_PLAN)
    assert not plan.counting_from_given and plan.counting_from == now
    state = _state(mains, RCD_PLAN)
    assert (state.status, state.forecast_date, state.last_service_unknown) == ("due", now, True)
    assert state.last_service_on is None
    assert state.progress == "last service unknown"  # not "0 / 180 days"
    assert state.reason.startswith(f"Last service unknown ({BASELINE}): due now.")
    assert BASELINE in state.basis and f"counted meanwhile from the plan's start on {now:%d %b %Y}" in state.basis
    # The site's dashboard counts it as due, not as safe for 180 days.
    dashboard = client.get(telescope.site.get_absolute_url())
    assert dashboard.context["counts"] == {"overdue": 0, "due": mains.plans.count(), "later": 0}
    # The subsystem page's trigger table: days since an unknown service are unknown.
    page = _text(client.get(mains.get_absolute_url()))
    assert "Calendar days unknown days 180 days" in page and "0 days 180 days" not in page


def test_the_due_list_its_filters_its_download_and_the_digest_treat_it_as_due(engineer, client, telescope, now):
    mains = _added_in_the_admin(client, telescope, "ac_power", "Mains distribution")
    site = telescope.site
    due = client.get(f"/due/?site={site.pk}&status=due")
    assert "last service unknown" in _text(due) and RCD_PLAN in _text(due)
    assert RCD_PLAN not in _text(client.get(f"/due/?site={site.pk}&status=later"))
    rows = list(csv.reader(io.StringIO(client.get(f"/due/?site={site.pk}&export=csv").content.decode("utf-8-sig"))))
    header, row = rows[0], next(r for r in rows[1:] if r[4] == RCD_PLAN)
    assert row[header.index("status")] == "due" and row[header.index("now")] == "last service unknown"
    message = digest.due_digest(site, now, ["engineer@example.org"])
    assert f"0 overdue, {mains.plans.count()} due" in message.subject
    assert f"{RCD_PLAN}\n  Last service unknown ({BASELINE}): due now." in message.body


def test_a_counting_date_given_when_registering_counts_from_it(telescope, now):
    mains = subsystem_create(telescope, "ac_power", "Mains distribution", counting_from=now - dt.timedelta(days=10))
    site_recompute(telescope.site)
    state = _state(mains, RCD_PLAN)
    assert not state.last_service_unknown and state.status == "later"
    assert state.value == 10 and state.progress == "10 / 180 days"
    assert state.forecast_date == now + dt.timedelta(days=170)


def test_plans_made_with_a_date_count_from_it_as_the_demo_and_the_benchmark_make_them(telescope):
    """fixtures_demo and benchmarks/bench_network.py make plans with ``counting_from`` and no more: they keep their
    mix of states."""
    fans = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name="Fans")
    assert ServicePlan.objects.create(subsystem=fans, name="p", counting_from=dt.date(2026, 1, 1)).counting_from_given


def test_a_logged_service_ends_the_unknown_and_the_plan_counts_from_it(engineer, client, users, telescope, now):
    mains = _added_in_the_admin(client, telescope, "ac_power", "Mains distribution")
    plan = mains.plans.get(name=RCD_PLAN)
    service_record_log(mains, plan, now - dt.timedelta(days=30), users["technician"], "RCDs tested before records")
    state = _state(mains, RCD_PLAN)
    assert not state.last_service_unknown and state.status == "later"
    assert state.value == 30 and state.forecast_date == now + dt.timedelta(days=150)
    assert BASELINE not in state.basis


def test_a_counting_date_set_by_hand_in_the_admin_counts_from_it(engineer, client, telescope, now):
    mains = _added_in_the_admin(client, telescope, "ac_power", "Mains distribution")
    plan = mains.plans.get(name=RCD_PLAN)
    page = client.get(f"/admin/planning/serviceplan/{plan.pk}/change/")
    form = page.context["adminform"].form
    data = {name: ("" if value is None else value) for name, value in form.initial.items()}
    data = {k: v for k, v in data.items() if not isinstance(v, list | dict) or k == "readings"}
    data.update({"subsystem": mains.pk, "counting_from": (now - dt.timedelta(days=100)).isoformat()})
    data.pop("counting_from_given")  # an unticked box is not sent: the engineer only typed the date
    for formset in page.context["inline_admin_formsets"]:
        management, prefix = formset.formset.management_form, formset.formset.prefix
        data.update({f"{prefix}-{k}": v for k, v in management.initial.items()})
        data[f"{prefix}-TOTAL_FORMS"] = management.initial["INITIAL_FORMS"]
        for i, inline in enumerate(formset.formset.initial_forms):
            data.update({f"{prefix}-{i}-{k}": ("" if v is None else v) for k, v in inline.initial.items()})
            data[f"{prefix}-{i}-id"], data[f"{prefix}-{i}-plan"] = inline.instance.pk, plan.pk
    assert client.post(f"/admin/planning/serviceplan/{plan.pk}/change/", data).status_code == 302
    plan.refresh_from_db()
    assert plan.counting_from_given and plan.counting_from == now - dt.timedelta(days=100)
    state = _state(mains, RCD_PLAN)
    assert not state.last_service_unknown and state.value == 100 and state.status == "later"


def test_a_limit_reached_even_counting_from_the_plans_start_is_overdue_and_says_the_figure_is_a_floor(telescope, now):
    mains = Subsystem.objects.create(telescope=telescope, kind="ac_power", name="Mains distribution")
    plan = ServicePlan.objects.create(subsystem=mains, name="RCD test", counting_from=now - dt.timedelta(days=200),
                                      counting_from_given=False)
    Trigger.objects.create(plan=plan, metric="calendar_days", limit=180)
    site_recompute(telescope.site)
    state = PlanStatus.objects.get(plan=plan)
    assert state.status == "overdue" and state.last_service_unknown
    assert state.progress == "200 / 180 days"  # 200 days at least: the figure counts from the plan's start
    assert state.reason.startswith("Calendar days: 200 of 180 days; limit reached")
    assert "Last service unknown, so counted from the plan's start" in state.reason and BASELINE in state.reason


def test_a_plan_added_by_hand_starts_with_its_last_service_unknown_unless_the_box_is_ticked(
    engineer, client, telescope, now
):
    """A reviewer added a plan for a refractor's objective, typed today as its counting date (the form needs one)
    and left the box alone: the plan must not read as serviced today. The box starts unticked on a new plan, and
    only a tick makes the date a real last service."""
    objective = _added_in_the_admin(client, telescope, "other", "Objective lens", no_hazards_found="on")
    page = client.get("/admin/planning/serviceplan/add/")
    assert 'name="counting_from_given"' in page.content.decode()
    assert not page.context["adminform"].form["counting_from_given"].initial
    common = {
        "subsystem": objective.pk, "name": "Clean the objective", "task": "", "steps_powered": "", "steps": "",
        "steps_restore": "", "tools": "", "parts": "", "readings": "[]", "estimated_hours": "1",
        "dust_sensitivity": "0", "basis": "", "active": "on", "counting_from": now.isoformat(),
        "triggers-TOTAL_FORMS": "1", "triggers-INITIAL_FORMS": "0", "triggers-MIN_NUM_FORMS": "0",
        "triggers-MAX_NUM_FORMS": "1000", "triggers-0-metric": "calendar_days", "triggers-0-limit": "365",
        "triggers-0-quantity": "", "triggers-0-direction": "above",
    }
    assert client.post("/admin/planning/serviceplan/add/", common).status_code == 302
    unknown = ServicePlan.objects.get(name="Clean the objective")
    assert not unknown.counting_from_given
    assert _state(objective, "Clean the objective").last_service_unknown
    known = {**common, "name": "Check the dew heater", "counting_from_given": "on"}
    assert client.post("/admin/planning/serviceplan/add/", known).status_code == 302
    assert ServicePlan.objects.get(name="Check the dew heater").counting_from_given


# --- past nights and past readings ---------------------------------------------------------------------------------


def test_importing_past_nights_says_they_move_no_counter_of_plans_whose_last_service_is_unknown(
    engineer, client, telescope, now
):
    fans = _added_in_the_admin(client, telescope, "cooling_fans", "Cell fans")  # counts open and dust hours
    counters = fans.plans.count()
    nights = [now - dt.timedelta(days=d) for d in range(12, 2, -1)]
    data = ("night,open_hours\n" + "".join(f"{night},6\n" for night in nights)).encode()
    report = nights_import(telescope.site, data)
    assert report.summary == (
        f"10 new, 0 updated, 0 unchanged. 10 of these nights are before the start ({now:%d %b %Y}) of {counters} "
        "service plans whose last service is unknown, so they move none of their counters. Log each plan's last "
        "service (Log service for this plan, on its subsystem page): it then counts from that day, and the nights "
        "after it count."
    )
    # On the upload page, the result says it too.
    more = ("night,open_hours\n" + f"{now - dt.timedelta(days=20)},5\n").encode()
    page = client.post(f"/sites/{telescope.site.slug}/nights/import/",
                       {"file": SimpleUploadedFile("n.csv", more), "confirm": ""}, follow=True)
    assert "1 of these nights is before the start" in _text(page)


def test_a_telescopes_own_nights_speak_only_of_its_own_plans(engineer, client, telescope, now):
    """The fans' plans are on the test telescope; a second telescope's own nights never reach them (its log is its
    own, planning.services.UsageLog), the whole site's nights do."""
    from observatory_ops.registry.models import Telescope

    fans = _added_in_the_admin(client, telescope, "cooling_fans", "Cell fans")
    Telescope.objects.create(site=telescope.site, name="Other", aperture_m=0.3, mount="fork")
    earlier = [now - dt.timedelta(days=d) for d in (5, 4)]
    others = nights_import(telescope.site, ("night,telescope,open_hours\n" + "".join(
        f"{night},Other,6\n" for night in earlier)).encode())
    assert others.summary.startswith("2 new (Other: 2), 0 updated, 0 unchanged") and "before the start" not in \
        others.summary
    own = nights_import(telescope.site, f"night,telescope,open_hours\n{earlier[0]},{telescope.name},6\n"
                        f"{earlier[1]},Other,7\n{earlier[1]},,6\n".encode())
    assert f"2 of these nights are before the start ({now:%d %b %Y}) of {fans.plans.count()} service plans" in \
        own.summary  # the test telescope's own night and the whole site's; not the other telescope's


def test_past_nights_say_nothing_of_plans_whose_start_was_given(telescope, now):
    subsystem_create(telescope, "cooling_fans", "Cell fans", counting_from=now)
    report = nights_import(telescope.site, f"night,open_hours\n{now - dt.timedelta(days=3)},6\n".encode())
    assert report.summary == "1 new, 0 updated, 0 unchanged."


def _log_reading(client, subsystem, day: dt.date, value: float):
    return client.post(f"/subsystems/{subsystem.pk}/readings/new/", {
        "quantity": "settle_time_s", "value": value, "taken_at": f"{day.isoformat()}T22:30", "note": "",
    }, follow=True)


def test_a_reading_dated_before_its_plans_start_says_it_judges_nothing_and_points_to_the_last_service(
    users, client, telescope, now
):
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=now)
    client.force_login(users["technician"])
    form = _text(client.get(f"/subsystems/{drive.pk}/readings/new/"))
    assert "entering past readings, log the last service first" in form
    march = now - dt.timedelta(days=120)
    page = _text(_log_reading(client, drive, march, 0.61))
    assert "Reading logged." in page
    assert (f"This reading of {march:%d %b %Y} is before the start of {DRIVE_PLAN} ({now:%d %b %Y}), with no "
            "service of it logged, so it judges nothing yet. Entering past readings? Log the last service first"
            ) in page
    # Logging the last service before the readings makes them count.
    plan = drive.plans.get(name=DRIVE_PLAN)
    service_record_log(drive, plan, march - dt.timedelta(days=10), users["technician"], "drive serviced")
    april = march + dt.timedelta(days=30)
    page = _text(_log_reading(client, drive, april, 0.63))
    assert "This reading of" not in page
    state = PlanStatus.objects.get(plan=plan)
    assert any("2 readings since the last service" in row["basis"] for row in state.trigger_rows)


def test_a_reading_dated_before_the_last_service_is_kept_in_the_history_only(users, client, telescope, now):
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=now - dt.timedelta(days=300))
    plan = drive.plans.get(name=DRIVE_PLAN)
    serviced = now - dt.timedelta(days=20)
    service_record_log(drive, plan, serviced, users["technician"], "drive serviced")
    client.force_login(users["technician"])
    earlier = now - dt.timedelta(days=40)
    page = _text(_log_reading(client, drive, earlier, 0.6))
    assert (f"This reading of {earlier:%d %b %Y} is before the last service of {DRIVE_PLAN} ({serviced:%d %b %Y}): "
            "a plan judges the readings since its last service, so this one is kept in the history only.") in page
    assert "This reading of" not in _text(_log_reading(client, drive, now - dt.timedelta(days=2), 0.6))


def test_the_note_uses_the_sites_local_date_of_the_reading(users, telescope, now):
    """A reading's day is its local date at the site (Europe/Madrid here), as the recompute counts it."""
    from observatory_ops.planning.selectors import reading_before_counting_note

    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=now)
    taken = timezone.make_aware(dt.datetime.combine(now, dt.time(0, 30)), telescope.site.zone)
    assert reading_before_counting_note(drive, "settle_time_s", taken.astimezone(telescope.site.zone).date()) is None
    assert reading_before_counting_note(drive, "settle_time_s", now - dt.timedelta(days=1)) is not None
    assert reading_before_counting_note(drive, "motor_current_a", now - dt.timedelta(days=1)) is None
