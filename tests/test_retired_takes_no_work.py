"""A retired subsystem takes no new work. A review walking the life of a part retired an optical tube (its parts, the
primary mirror among them, retired with it) and found that the retired unit still took work: a new recoat planned on
the retired primary, its telescope still counted out of service for the primary's old recoat, service work and a
repair dated after the retire day accepted with messages the plans and the reliability page then contradicted, and the
tube brought back in the admin with its parts left retired unsaid.

The rules tested: a recoat is refused on a retired mirror (``mirrors.services.retired_recoat_text``); a retired
mirror's recoat is no downtime (``planning.services.recoats_in_hand``) and the
dashboard names its orders to withdraw; work and readings dated after the retire day are refused naming that day and
the subsystem of its kind in service (``registry.services.retired_work_problem``), those dated on or before it kept as
history entered late. The scene and its forecast by hand: tests/test_downtime_in_forecasts.py (the fans' plan reaches
its limit on the 13th night from today, today + 12, with no recoat in its way)."""
from __future__ import annotations

import datetime as dt

import pytest
from django.contrib.messages import get_messages
from django.core.exceptions import ValidationError
from django.urls import reverse
from test_downtime_in_forecasts import scene  # noqa: F401  (the scene is a fixture)
from test_register_and_plan_bounds import _unchanged

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.logbook import services as logbook
from observatory_ops.logbook.models import Reading, ServiceRecord
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import CoatingEvent, Mirror, RecoatPlan
from observatory_ops.planning import services
from observatory_ops.planning.models import PlanStatus
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_retire
from observatory_ops.workorders.models import WorkOrder

pytestmark = pytest.mark.django_db
NO_RECOAT_IN_THE_WAY = 12  # days from today to the fans' forecast (tests/test_downtime_in_forecasts.py, by hand)


def _retired(subsystem: Subsystem, on: dt.date) -> Subsystem:
    Subsystem.objects.filter(pk=subsystem.pk).update(retired_on=on)
    subsystem.refresh_from_db()
    services.site_recompute(subsystem.telescope.site)
    return subsystem


def _said(response) -> str:
    return " ".join(str(m) for m in get_messages(response.wsgi_request))


def _new_primary(telescope, name: str = "Primary mirror") -> Mirror:
    primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name=name)
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=dt.date(2025, 1, 1), metal="al")
    return mirror


# --- 1. The recoat planner and the mirror page ----------------------------------------------------------------------


def test_a_retired_mirror_is_refused_a_recoat_and_nothing_is_stored(scene, users):  # noqa: F811
    site, today, plan, mirror = scene
    retired_on = today - dt.timedelta(days=5)
    _retired(mirror.subsystem, retired_on)
    with pytest.raises(ValidationError, match=f"F50: Primary mirror was retired on {retired_on:%d %b %Y}: a retired "
                                              "mirror is not recoated, so no recoat is planned for it"):
        mirror_services.recoat_plan_create(mirror, today + dt.timedelta(days=3), list(RECOAT_PHASES), 10.0,
                                           users["engineer"])
    assert not RecoatPlan.objects.exists() and not WorkOrder.objects.exists()


def test_the_planner_of_a_retired_mirror_says_so_and_offers_no_window_nor_plan_button(scene, users, client):  # noqa: F811
    site, today, plan, mirror = scene
    retired_on = today - dt.timedelta(days=5)
    _retired(mirror.subsystem, retired_on)
    client.force_login(users["engineer"])
    url = reverse("mirror-recoat", args=[mirror.pk])
    page = client.get(url, {"start": today.isoformat(), "horizon_days": 60}).content.decode()
    assert (f"F50: Primary mirror was retired on {retired_on:%d %b %Y}: a retired mirror is not recoated, so no "
            "recoat is planned for it.") in page
    assert "No other subsystem of its kind (primary mirror) is in service on F50." in page
    assert "create-recoat-plan" not in page and "Find windows" not in page and "Cheapest windows" not in page
    # A plan sent from a page opened before the mirror was retired makes nothing either.
    response = client.post(reverse("mirror-recoat-plan", args=[mirror.pk]),
                           {"start": today.isoformat(), "horizon_days": 60, "window": today.isoformat()})
    assert response.status_code == 302 and f"No plan made: F50: Primary mirror was retired on {retired_on:%d %b %Y}" \
        in _said(response)
    assert not RecoatPlan.objects.exists() and not WorkOrder.objects.exists()
    # Its successor registered, the planner points to the successor's planner.
    successor = _new_primary(mirror.subsystem.telescope)
    page = client.get(url).content.decode()
    assert f'<a href="{reverse("mirror-recoat", args=[successor.pk])}">Primary mirror: its recoat window</a>' in page


def test_the_mirror_page_of_a_retired_mirror_says_it_is_retired_and_forecasts_no_crossing(scene, users, client):  # noqa: F811
    site, today, plan, mirror = scene
    retired_on = today - dt.timedelta(days=5)
    _retired(mirror.subsystem, retired_on)
    client.force_login(users["engineer"])
    page = client.get(mirror.get_absolute_url()).content.decode()
    assert f"<strong>Retired on {retired_on:%d %b %Y}</strong>: no longer in service" in page
    assert (f"The mirror was retired on {retired_on:%d %b %Y}: a retired mirror is not recoated, so its crossing is "
            "not forecast.") in page
    # Registered but retired, not "no mirror registered".
    assert "no mirror registered on this telescope" not in page
    assert (f"Primary mirror: registered, but retired on {retired_on:%d %b %Y}, so left out of the train; no mirror "
            "in service is registered on this telescope") in page
    assert "Plan the recoat window" not in page and "Log a measurement" not in page
    successor = _new_primary(mirror.subsystem.telescope)
    page = client.get(mirror.get_absolute_url()).content.decode()
    assert (f'In service on F50, of its kind (primary mirror): <a href="{successor.get_absolute_url()}">Primary '
            "mirror</a>") in page


# --- 2. Retiring a parent with open work on its parts ---------------------------------------------------------------


@pytest.fixture
def tube_in_recoat(scene, users):  # noqa: F811
    """The scene's primary a part of an optical tube, with a recoat planned from today + 3 (four draft orders)."""
    site, today, plan, mirror = scene
    tube = Subsystem.objects.create(telescope=mirror.subsystem.telescope, kind="truss", name="Optical tube")
    Subsystem.objects.filter(pk=mirror.subsystem_id).update(parent=tube)
    recoat = mirror_services.recoat_plan_create(mirror, today + dt.timedelta(days=3), list(RECOAT_PHASES), 10.0,
                                                users["engineer"])
    assert PlanStatus.objects.get(plan=plan).forecast_date > today + dt.timedelta(days=NO_RECOAT_IN_THE_WAY)
    return tube, recoat


def test_retiring_a_tube_names_the_open_orders_of_its_mirror_before_and_after(scene, tube_in_recoat, users, client):  # noqa: F811
    tube, recoat = tube_in_recoat
    numbers = [o.number for o in recoat.work_orders.order_by("pk")]
    client.force_login(users["engineer"])
    page = client.get(tube.get_absolute_url()).content.decode()
    for number in numbers:
        assert f"{number}</a> (draft, on Primary mirror)" in page
    response = client.post(reverse("subsystem-retire", args=[tube.pk]), {"reason": "tube replaced"})
    said = _said(response)
    listed = ", ".join(f"{number} (draft, on Primary mirror)" for number in numbers)
    assert f"Work orders still open for it and its parts: {listed}. Finish or withdraw them" in said


def test_a_retired_mirrors_recoat_is_no_downtime_and_the_dashboard_names_its_orders(scene, tube_in_recoat, users,  # noqa: F811
                                                                                       client):
    """The fans' forecast goes back to today + 12, the nights of a recoat that will not be done counted as used (the
    safe side: a due date too early, not one too late); the dashboard says why and which orders to withdraw."""
    site, today, plan, mirror = scene
    tube, recoat = tube_in_recoat
    subsystem_retire(tube, today, "tube replaced", users["engineer"])
    services.site_recompute(site)
    status = PlanStatus.objects.get(plan=plan)
    assert status.forecast_date == today + dt.timedelta(days=NO_RECOAT_IN_THE_WAY)
    assert "planned recoat" not in status.basis
    assert services.recoats_in_hand(site, today) == []
    client.force_login(users["viewer"])
    page = client.get(site.get_absolute_url()).content.decode()
    assert "No recoat planned." in page and "out of service" not in page.split('id="downtime"')[1].split("</div>")[0]
    orders = ", ".join(f'<a href="{o.get_absolute_url()}">{o.number}</a> (draft)'
                       for o in recoat.work_orders.order_by("pk"))
    assert (f"is not counted as downtime: the mirror was retired on {today:%d %b %Y}, and a retired mirror is not "
            f"recoated. Its work orders still to do: {orders}. Withdraw them") in page
    # The calendar file says the same: the window cancelled, with why (the review found it still tentative).
    from icalendar import Calendar

    from observatory_ops.mirrors.calendar_export import site_calendar

    window = next(e for e in Calendar.from_ical(site_calendar(site, "https://ops.example")).walk("VEVENT")
                  if str(e["uid"]).startswith(f"recoat-{recoat.pk}@"))
    assert str(window["status"]) == "CANCELLED"
    assert str(window["description"]).startswith(f"Not done: Primary mirror was retired on {today:%d %b %Y}.")


# --- 3. Service work and readings -----------------------------------------------------------------------------------


@pytest.fixture
def old_fans(scene):  # noqa: F811
    """The scene's fans retired ten days ago."""
    site, today, plan, mirror = scene
    return _retired(plan.subsystem, today - dt.timedelta(days=10))


def _service(client, subsystem, day: dt.date, plan=None, repaired: bool = False):
    data = {"performed_on": day.isoformat(), "summary": "Bearings greased", "hours_spent": "1",
            "plan": plan.pk if plan else ""}
    if repaired:
        data["repaired_failure"] = "on"
    return client.post(reverse("service-log", args=[subsystem.pk]), data)


def test_the_page_of_a_retired_unit_offers_no_logging_and_points_to_its_successor(scene, old_fans, users, client):  # noqa: F811
    client.force_login(users["technician"])
    page = client.get(old_fans.get_absolute_url()).content.decode()
    assert f"<strong>Retired on {old_fans.retired_on:%d %b %Y}</strong>" in page
    assert "No other subsystem of its kind (cooling fans and filters) is in service on F50." in page
    assert "Log service work" not in page and "Log a reading" not in page
    new = Subsystem.objects.create(telescope=old_fans.telescope, kind="cooling_fans", name="Fans")
    page = client.get(old_fans.get_absolute_url()).content.decode()
    assert (f'In service on F50, of its kind (cooling fans and filters): <a href="{new.get_absolute_url()}">'
            "Fans</a>") in page


def test_service_work_after_the_retire_day_is_refused_and_none_stored(scene, old_fans, users, client):  # noqa: F811
    site, today, plan, mirror = scene
    new = Subsystem.objects.create(telescope=old_fans.telescope, kind="cooling_fans", name="Fans")
    client.force_login(users["technician"])
    day = today - dt.timedelta(days=5)
    refusal = (f"F50: Fans was retired on {old_fans.retired_on:%d %b %Y}, so it was no longer in service on "
               f"{day:%d %b %Y}: service work dated after its retire day is refused, and nothing was stored. Log it on "
               f"the subsystem of its kind (cooling fans and filters) in service on F50: Fans "
               f"({new.get_absolute_url()}).")
    for repaired in (False, True):  # a repair too: the reliability page leaves a failure after the retire day out
        response = _service(client, old_fans, day, plan, repaired=repaired)
        assert response.status_code == 200
        assert refusal in response.context["form"].errors["performed_on"]
    assert not ServiceRecord.objects.exists()
    with pytest.raises(ValidationError, match="service work dated after its retire day is refused"):
        logbook.service_record_log(old_fans, plan, day, users["technician"], "Bearings greased")
    assert not ServiceRecord.objects.exists()


def test_service_work_on_or_before_the_retire_day_is_kept_and_restarts_no_plan(scene, old_fans, users, client):  # noqa: F811
    site, today, plan, mirror = scene
    client.force_login(users["technician"])
    page = client.get(reverse("service-log", args=[old_fans.pk])).content.decode()
    assert "Work and readings dated after its retire day are refused" in page
    response = _service(client, old_fans, old_fans.retired_on - dt.timedelta(days=2), plan)
    assert response.status_code == 302
    said = _said(response)
    assert (f"Service work logged in the history of Fans, retired on {old_fans.retired_on:%d %b %Y}: a retired "
            "subsystem's plans are not counted, so no plan's counting restarts.") in said
    assert "counts again" not in said
    # A repair on the retire day: its failure falls on the night before, within its service (reliability.selectors).
    response = _service(client, old_fans, old_fans.retired_on, repaired=True)
    assert response.status_code == 302
    assert (f"The reliability page counts it as a failure on the night of "
            f"{old_fans.retired_on - dt.timedelta(days=1):%d %b %Y}.") in _said(response)
    assert ServiceRecord.objects.filter(subsystem=old_fans).count() == 2


def test_a_reading_after_the_retire_day_is_refused_and_one_on_it_kept(scene, old_fans, users, client):  # noqa: F811
    site, today, plan, mirror = scene
    client.force_login(users["technician"])
    url = reverse("reading-log", args=[old_fans.pk])
    after = old_fans.retired_on + dt.timedelta(days=1)
    response = client.post(url, {"quantity": "fan_current_a", "value": "0.4", "taken_at": f"{after}T10:00"})
    assert response.status_code == 200
    assert any(f"was retired on {old_fans.retired_on:%d %b %Y}" in e and "a reading dated after its retire day is "
               "refused" in e for e in response.context["form"].errors["taken_at"])
    assert not Reading.objects.exists()
    taken_at = dt.datetime.combine(after, dt.time(10), tzinfo=dt.UTC)
    with pytest.raises(ValidationError, match="a reading dated after its retire day is refused"):
        logbook.reading_log(old_fans, "fan_current_a", 0.4, taken_at, users["technician"])
    response = client.post(url, {"quantity": "fan_current_a", "value": "0.4",
                                 "taken_at": f"{old_fans.retired_on}T10:00"})
    assert response.status_code == 302 and Reading.objects.filter(subsystem=old_fans).count() == 1


def test_a_retired_mirrors_cleaning_after_its_retire_day_is_refused_on_its_page(scene, users):  # noqa: F811
    site, today, plan, mirror = scene
    _retired(mirror.subsystem, today - dt.timedelta(days=5))
    with pytest.raises(ValidationError, match="a cleaning dated after its retire day is refused"):
        mirror_services.cleaning_log(mirror, users["technician"], today, "co2_snow")
    with pytest.raises(ValidationError, match="a measurement dated after its retire day is refused"):
        mirror_services.measurement_log(mirror, users["technician"], today, 0.8)
    assert not mirror.cleanings.exists() and not mirror.measurements.exists()


# --- 4. Bringing a parent back in the admin -------------------------------------------------------------------------


def test_clearing_a_parents_retired_on_names_its_parts_still_retired(scene, users, engineer_in_admin):  # noqa: F811
    site, today, plan, mirror = scene
    tube = Subsystem.objects.create(telescope=mirror.subsystem.telescope, kind="truss", name="Optical tube")
    Subsystem.objects.filter(pk=mirror.subsystem_id).update(parent=tube)
    subsystem_retire(tube, today, "sent for repair", users["engineer"])
    client = engineer_in_admin
    url = reverse("admin:registry_subsystem_change", args=[tube.pk])
    response = client.post(url, {**_unchanged(client, url), "retired_on": ""})
    assert Subsystem.objects.get(pk=tube.pk).retired_on is None
    said = _said(response)
    part_url = reverse("admin:registry_subsystem_change", args=[mirror.subsystem_id])
    assert (f"F50: Optical tube is back in service; its parts retired on the same day, {today:%d %b %Y}, are still "
            f'retired: <a href="{part_url}">Primary mirror</a>. Bring back each that came back into service with it '
            "by clearing its Retired on.") in said
    assert Subsystem.objects.get(pk=mirror.subsystem_id).retired_on == today


# --- 5. The day it came out of service --------------------------------------------------------------------------------


def test_a_subsystem_is_retired_on_the_day_it_came_out_not_after_work_logged_on_it(scene, users, client):  # noqa: F811
    """A review could retire a unit only today; moving the day back in the admin then left a failure logged since
    after its retire day, and the reliability page dropped it. The retire form takes the day it came out of service:
    not after today, not before it entered service, and not before work already logged on it or its parts (nothing
    is stored when refused, and the refusal says which work and from which day it may be retired)."""
    site, today, plan, mirror = scene
    tube = Subsystem.objects.create(telescope=mirror.subsystem.telescope, kind="truss", name="Optical tube")
    Subsystem.objects.filter(pk=mirror.subsystem_id).update(parent=tube)
    worked = today - dt.timedelta(days=3)
    logbook.service_record_log(mirror.subsystem, None, worked, users["technician"], summary="Cell bolts checked")
    client.force_login(users["engineer"])
    url = reverse("subsystem-retire", args=[tube.pk])
    Subsystem.objects.filter(pk=mirror.subsystem_id).update(in_service_since=today - dt.timedelta(days=20))
    for day, said in (
        (today + dt.timedelta(days=1), f"is after today at the site ({today:%d %b %Y})"),
        ("1850-03-02", "the retire date 1850-03-02 looks mistyped: give a date from 1900 on"),
        ("0001-01-01", "the retire date 0001-01-01 looks mistyped"),
        (today - dt.timedelta(days=30), f"is before F50: Primary mirror entered service "
                                        f"({today - dt.timedelta(days=20):%d %b %Y})"),
        (worked - dt.timedelta(days=2), f"service work on Primary mirror is logged on {worked:%d %b %Y}, after "
                                        f"{worked - dt.timedelta(days=2):%d %b %Y}: retire it on {worked:%d %b %Y} or "
                                        "later"),
        ("30/11/2026", "the day it came out of service: enter a date"),
    ):
        response = client.post(url, {"reason": "tube replaced", "retired_on": str(day)})
        assert said in _said(response), _said(response)
        assert Subsystem.objects.filter(pk__in=[tube.pk, mirror.subsystem_id], retired_on__isnull=False).count() == 0
    page = client.get(tube.get_absolute_url()).content.decode()
    assert f'name="retired_on" type="date" value="{today:%Y-%m-%d}"' in page
    client.post(url, {"reason": "tube replaced", "retired_on": worked.isoformat()})
    retired = Subsystem.objects.filter(pk__in=[tube.pk, mirror.subsystem_id]).values_list("retired_on", flat=True)
    assert set(retired) == {worked}


def test_an_order_on_a_subsystem_retired_since_is_neither_issued_nor_started(scene, tube_in_recoat, users, client):  # noqa: F811
    """Retiring names the open orders of the unit and its parts; one left open is held: issued or started, its work
    would be dated after the retire day (workorders.selectors.retired_refusal). The page says why in place of the
    button."""
    from observatory_ops.workorders import services as workorders

    site, today, plan, mirror = scene
    tube, recoat = tube_in_recoat
    removal = recoat.work_orders.get(recoat_phase="removal")
    subsystem_retire(tube, today, "tube replaced", users["engineer"])
    with pytest.raises(workorders.Refused, match=f"it works on Primary mirror \\(retired on {today:%d %b %Y}\\), taken "
                                                 "out of service since it was made: withdraw it"):
        workorders.work_order_move(removal, "issue", users["engineer"])
    removal.refresh_from_db()
    assert removal.state == "draft"
    client.force_login(users["engineer"])
    page = client.get(removal.get_absolute_url()).content.decode()
    assert "taken out of service since it was made" in page


def test_the_admin_holds_a_retire_day_to_the_same_rules_and_retires_the_parts_with_it(scene, users,  # noqa: F811
                                                                                     engineer_in_admin):
    """A diff review: the admin let a retire day move back past service logged since (the page refuses it), and a tube
    retired there left its parts in service."""
    site, today, plan, mirror = scene
    tube = Subsystem.objects.create(telescope=mirror.subsystem.telescope, kind="truss", name="Optical tube")
    Subsystem.objects.filter(pk=mirror.subsystem_id).update(parent=tube)
    worked = today - dt.timedelta(days=2)
    mirror_services.cleaning_log(mirror, users["technician"], worked, "co2_snow")
    client = engineer_in_admin
    url = reverse("admin:registry_subsystem_change", args=[tube.pk])
    response = client.post(url, {**_unchanged(client, url), "retired_on": (today - dt.timedelta(days=5)).isoformat()})
    assert response.status_code == 200 and Subsystem.objects.get(pk=tube.pk).retired_on is None
    assert (f"A cleaning of Primary mirror is logged on {worked:%d %b %Y}, after") in response.content.decode()
    response = client.post(url, {**_unchanged(client, url), "retired_on": worked.isoformat()})
    assert response.status_code == 302
    assert Subsystem.objects.get(pk=mirror.subsystem_id).retired_on == worked
    assert f"Retired with it on {worked:%d %b %Y}, as its parts: Primary mirror." in _said(response)


# --- 5. An order underway on a subsystem retired meanwhile ----------------------------------------------------------


@pytest.fixture
def fans_order_underway(scene, users):  # noqa: F811
    """An order on the scene's fans, issued six days ago and underway since (a paper order, entered afterwards)."""
    from conftest import mains_isolator

    from observatory_ops.workorders import services as workorders

    site, today, plan, mirror = scene
    mains_isolator(plan.subsystem.telescope)
    order = workorders.work_order_ad_hoc(site, [plan.subsystem], "Fan bearing noise", users["engineer"],
                                         steps="Replace the bearing", planned_date=today)
    workorders.work_order_move(order, "issue", users["engineer"])
    workorders.work_order_move(order, "start", users["technician"])
    issued = dt.datetime.combine(today - dt.timedelta(days=6), dt.time(9), tzinfo=site.zone)
    WorkOrder.objects.filter(pk=order.pk).update(issued_at=issued)
    return WorkOrder.objects.get(pk=order.pk)


def _finish(order, users, day: dt.date):
    from observatory_ops.workorders import services as workorders

    return workorders.work_order_finish(
        order, users["technician"], 1.0, "Bearing replaced; the isolator was locked and unlocked by me.", {},
        confirmed_unticked=[line.text for line in workorders.unticked_lines(order)], isolation_answer="isolated",
        work_done_on=day)


def test_an_order_underway_is_finished_on_or_before_its_subsystems_retire_day_not_after(scene, fans_order_underway,  # noqa: F811
                                                                                       users, client):
    """Retiring a unit while an order on it is underway leaves the order to finish: its work, done before the unit came
    out, is dated on or before the retire day (workorders.services.retired_underway_problem); dated after, its records
    would come after the retire day, which the unit's page refuses (a review: such records were written)."""
    from observatory_ops.workorders import services as workorders

    site, today, plan, mirror = scene
    order = fans_order_underway
    retired_on = today - dt.timedelta(days=2)
    _retired(plan.subsystem, retired_on)
    client.force_login(users["technician"])
    page = client.get(reverse("workorder-finish", args=[order.pk])).content.decode()
    assert (f"Fans was retired on {retired_on:%d %b %Y} while this order was underway: its work is dated on or "
            f"before {retired_on:%d %b %Y}.") in page
    with pytest.raises(workorders.Refused, match=f"work done on: {today:%d %b %Y} is after the retire day of Fans "
                                                 f"\\(retired on {retired_on:%d %b %Y}\\), taken out of service while "
                                                 f"{order.number} was underway. Enter the day the work was done, on "
                                                 f"or before {retired_on:%d %b %Y}"):
        _finish(order, users, today)
    order.refresh_from_db()
    assert order.state == "underway" and not ServiceRecord.objects.exists()
    _finish(order, users, retired_on)
    assert ServiceRecord.objects.get(subsystem=plan.subsystem).performed_on == retired_on


def test_an_order_on_a_subsystem_retired_before_it_was_issued_is_said_to_be_withdrawn(scene, fans_order_underway,  # noqa: F811
                                                                                     users):
    from observatory_ops.workorders import services as workorders

    site, today, plan, mirror = scene
    order = fans_order_underway
    retired_on = today - dt.timedelta(days=8)
    _retired(plan.subsystem, retired_on)
    issued = today - dt.timedelta(days=6)
    for day in (today, retired_on):
        with pytest.raises(workorders.Refused, match="work done on: "):
            _finish(order, users, day)
    with pytest.raises(workorders.Refused, match=f"Fans \\(retired on {retired_on:%d %b %Y}\\) was taken out of "
                                                 f"service before {order.number} was issued \\({issued:%d %b %Y}\\), "
                                                 "so none of its work was done on this order: the site engineer "
                                                 "withdraws it"):
        _finish(order, users, issued)
    assert not ServiceRecord.objects.exists()


def test_the_withdraw_sentence_names_only_the_units_retired_before_the_order_was_issued():
    """The last notes: one unit retired before the order was issued and another while it was underway were both said
    to be why the order is withdrawn."""
    from types import SimpleNamespace
    from zoneinfo import ZoneInfo

    from observatory_ops.workorders.services import retired_underway_problem

    zone = ZoneInfo("UTC")
    issued = dt.date(2026, 11, 10)
    order = SimpleNamespace(number="WO-1", site=SimpleNamespace(zone=zone),
                            issued_at=dt.datetime.combine(issued, dt.time(9), tzinfo=zone))
    class Unit:  # hashable, as a subsystem is
        def __init__(self, name: str, retired_on: dt.date):
            self.name, self.retired_on = name, retired_on

    before, during = Unit("Fans", dt.date(2026, 11, 1)), Unit("Brake", dt.date(2026, 11, 20))
    said = retired_underway_problem(order, [SimpleNamespace(subsystem=before), SimpleNamespace(subsystem=during)],
                                    dt.date(2026, 11, 25))
    assert said.startswith("Fans (retired on 01 Nov 2026) was taken out of service before WO-1 was issued")
    assert "Brake" not in said


def test_a_new_units_page_names_the_retired_units_of_its_kind(scene, old_fans, users, client):  # noqa: F811
    """The last notes: a new unit's page did not name the unit it replaced (``registry.services.predecessors_of``),
    whose records and failures stay on its own page."""
    new = Subsystem.objects.create(telescope=old_fans.telescope, kind="cooling_fans", name="Fans")
    other = Subsystem.objects.create(telescope=old_fans.telescope, kind="cooling_fans", name="Tube fan")
    client.force_login(users["viewer"])
    for unit in (new, other):  # the one of the same name alone; the other, of another name, gets the kind's
        page = client.get(unit.get_absolute_url()).content.decode()
        assert (f'Retired, of its kind (cooling fans and filters) on F50: <a href="{old_fans.get_absolute_url()}">Fans'
                f"</a> (retired on {old_fans.retired_on:%d %b %Y}).") in page
    page = client.get(old_fans.get_absolute_url()).content.decode()
    assert 'id="predecessors"' not in page  # a retired unit names its successors instead
