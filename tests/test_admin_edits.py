"""Changes made in the admin (the engineer's register and plans) take effect at once, as the pages' do:
a subsystem added there gets its kind's hazards and plans, and any change that moves due states
recomputes the site in the same transaction."""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.planning.models import PlanStatus, ServicePlan
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_create


@pytest.fixture
def engineer(users, client):
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    return users["engineer"]


def _sky(site):
    """A constant cached sky, so recomputes never wait for astropy."""
    import datetime as dt

    from observatory_ops.planning.models import NightSky
    from observatory_ops.planning.services import HORIZON_DAYS, site_today

    today = site_today(site)
    NightSky.objects.bulk_create(
        NightSky(site=site, night=today + dt.timedelta(days=i), dark_hours=10.0, moon_illumination=0.5,
                 moonless_dark_hours=5.0)
        for i in range(-10, HORIZON_DAYS + 2)
    )


def test_a_subsystem_added_in_the_admin_gets_its_kinds_hazards_and_plans(engineer, client, telescope):
    _sky(telescope.site)
    response = client.post("/admin/registry/subsystem/add/", {
        "telescope": telescope.pk, "kind": "brake", "name": "Dome shutter brake",
        "serial_number": "", "notes": "",
    }, follow=True)
    assert response.status_code == 200
    brake = Subsystem.objects.get(name="Dome shutter brake")
    assert brake.hazards  # the catalogue's tags for a brake, as subsystem_create gives them
    assert brake.plans.exists()
    assert PlanStatus.objects.filter(plan__subsystem=brake).count() == brake.plans.count()
    assert "default service plan(s) from its kind" in response.content.decode()


def test_a_replacement_added_with_its_in_service_date_counts_from_it_not_due_for_a_baseline(engineer, client,
                                                                                          telescope):
    """A review of a part's life added a new brake in the admin with its in-service date, the day before: its plans
    said "last service unknown ... due now" and came up in the digest. A new unit counts from the day it was fitted."""
    from observatory_ops.planning.services import site_today

    _sky(telescope.site)
    fitted = site_today(telescope.site) - dt.timedelta(days=1)
    response = client.post("/admin/registry/subsystem/add/", {
        "telescope": telescope.pk, "kind": "brake", "name": "Axis 2 brake", "serial_number": "BRK-0117",
        "in_service_since": fitted.isoformat(), "notes": "",
    }, follow=True)
    brake = Subsystem.objects.get(name="Axis 2 brake")
    assert {(p.counting_from, p.counting_from_given) for p in brake.plans.all()} == {(fitted, True)}
    assert not PlanStatus.objects.filter(plan__subsystem=brake, last_service_unknown=True).exists()
    assert f"They count from its in-service date, {fitted:%d %b %Y}, as serviced when it was fitted" in (
        response.content.decode())


def test_hazards_are_ticked_by_name_in_the_admin_not_typed_as_json(engineer, client, telescope):
    _sky(telescope.site)
    page = client.get("/admin/registry/subsystem/add/").content.decode()
    assert 'type="checkbox" name="hazards" value="electrical"' in page and "Hazardous electrical energy" in page
    client.post("/admin/registry/subsystem/add/", {
        "telescope": telescope.pk, "kind": "other", "name": "Spectrograph", "hazards": ["electrical", "cryogen"],
        "serial_number": "", "notes": "",
    })
    assert Subsystem.objects.get(name="Spectrograph").hazards == ["electrical", "cryogen"]


def test_a_trigger_limit_changed_in_the_admin_shows_at_once(engineer, client, telescope, today):
    _sky(telescope.site)
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=today)
    plan = ServicePlan.objects.filter(subsystem=fans, triggers__metric="calendar_days").first()
    from observatory_ops.planning.services import site_recompute

    site_recompute(telescope.site)
    trigger = plan.triggers.get(metric="calendar_days")
    page = client.get(f"/admin/planning/serviceplan/{plan.pk}/change/")
    form = page.context["adminform"].form
    data = {name: ("" if value is None else value) for name, value in form.initial.items()}
    data.update({"subsystem": fans.pk, "counting_from": plan.counting_from.isoformat()})
    for formset in page.context["inline_admin_formsets"]:
        management = formset.formset.management_form
        prefix = formset.formset.prefix
        data.update({f"{prefix}-{k}": v for k, v in management.initial.items()})
        data[f"{prefix}-TOTAL_FORMS"] = management.initial["INITIAL_FORMS"]  # no new row
        for i, inline in enumerate(formset.formset.initial_forms):  # the stored triggers; the blank row stays blank
            for name, value in inline.initial.items():
                data[f"{prefix}-{i}-{name}"] = "" if value is None else value
            data[f"{prefix}-{i}-id"], data[f"{prefix}-{i}-plan"] = inline.instance.pk, plan.pk
            if inline.instance.pk == trigger.pk:
                data[f"{prefix}-{i}-limit"] = trigger.limit + 17
    data = {k: v for k, v in data.items() if not isinstance(v, list | dict) or k == "readings"}
    response = client.post(f"/admin/planning/serviceplan/{plan.pk}/change/", data)
    inline_errors = [f.errors for fs in response.context["inline_admin_formsets"] for f in fs.formset.forms
                     if f.errors] if response.status_code == 200 else []
    assert response.status_code == 302, inline_errors
    status = PlanStatus.objects.get(plan=plan)
    assert trigger.limit + 17 in {status.limit, *(t["limit"] for t in status.triggers)}


def test_a_trigger_row_without_a_limit_is_a_form_error_not_a_server_error():
    from observatory_ops.planning.models import Trigger

    Trigger(metric="calendar_days", limit=None).clean()  # the field's own "required" message says it


def test_the_dashboard_says_how_many_more_need_attention_than_it_lists(users, client, telescope, today):
    from observatory_ops.planning.models import PlanStatus
    from observatory_ops.registry.views import ATTENTION_ROWS

    _sky(telescope.site)
    for n in range(ATTENTION_ROWS + 2):
        subsystem_create(telescope, "cooling_fans", f"Fans {n}", counting_from=today.replace(year=today.year - 5))
    from observatory_ops.planning.services import site_recompute

    site_recompute(telescope.site)
    overdue = PlanStatus.objects.filter(site=telescope.site).exclude(status="later").count()
    assert overdue > ATTENTION_ROWS
    client.force_login(users["viewer"])
    page = client.get(telescope.site.get_absolute_url()).content.decode()
    assert f"{overdue} overdue or due in all: the {ATTENTION_ROWS} first are above" in page


def test_retiring_a_subsystem_names_the_work_orders_still_open_for_it(telescope, users, client, today):
    from observatory_ops.workorders.models import WorkOrder, WorkOrderItem

    _sky(telescope.site)
    brake = subsystem_create(telescope, "brake", "Brake", counting_from=today)
    order = WorkOrder.objects.create(site=telescope.site, telescope=telescope, title="Brake pads", steps="Replace",
                                     hazards=[], created_by=users["engineer"])
    WorkOrderItem.objects.create(work_order=order, subsystem=brake)
    client.force_login(users["engineer"])
    page = client.post(f"/subsystems/{brake.pk}/retire/", {"reason": "replaced"}, follow=True).content.decode()
    assert f"Work orders still open for it: {order.number} (draft)" in page


@pytest.mark.parametrize("query", ["site=999", "site=abc", "status=nonsense"])
def test_a_due_list_filter_that_cannot_be_applied_is_said_so(users, client, site, query):
    client.force_login(users["viewer"])
    page = client.get(f"/due/?{query}").content.decode()
    assert "not applied" in page and query.split("=")[1] in page
    download = client.get(f"/due/?{query}&export=csv")
    assert download.status_code == 400 and b"not applied" in download.content


def test_a_plan_stays_with_the_subsystem_its_records_name(users, telescope, today):
    """An onboarding review moved a servo drive's plan, with its service record, in the admin to another site's
    focuser: "changed successfully", and the drive's maintenance left its site's due list. A plan with anything
    recorded under it keeps its subsystem; one just made on the wrong subsystem moves (tests/test_register_moves.py:
    across sites too, both recomputed)."""
    from django.core.exceptions import ValidationError

    from observatory_ops.logbook.models import ServiceRecord
    from observatory_ops.registry.models import Site, Telescope

    _sky(telescope.site)
    servo = subsystem_create(telescope, "servo_drives", "Servo drives", counting_from=today)
    focuser = subsystem_create(telescope, "focus_mechanism", "Focuser", counting_from=today)
    elsewhere = Site.objects.create(name="Far Tor", slug="far-tor", latitude_deg=10, longitude_deg=10, time_zone="UTC")
    far = subsystem_create(Telescope.objects.create(site=elsewhere, name="F20", aperture_m=0.2, mount="fork"),
                           "focus_mechanism", "Focuser", counting_from=today)
    plan = servo.plans.first()
    plan.subsystem = focuser
    plan.full_clean()  # nothing recorded: a plan made on the wrong subsystem moves
    ServiceRecord.objects.create(subsystem=servo, plan=plan, performed_on=today, performed_by=users["technician"],
                                 summary="Serviced", created_by=users["technician"])
    for other in (focuser, far):
        plan.subsystem = other
        with pytest.raises(ValidationError, match=f"This plan has records on {telescope.site}: {telescope.name}: "
                                                  r"Servo drives \(1 service record\)"):
            plan.full_clean()
    assert ServicePlan.objects.get(pk=plan.pk).subsystem == servo
