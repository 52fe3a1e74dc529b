"""Finishing a work order, as the technician does it on a tablet or from paper days later: the time the work
took (asked, never filled in with the estimate), the day it was done (the service records, readings and
cleanings are dated it, and the plans count again from it), whether each mirror was cleaned (asked on every
order that works on a mirror, never on a recoat's phase orders), and what the message says happened and what
comes next.
"""
from __future__ import annotations

import datetime as dt
import html
import re
from zoneinfo import ZoneInfo

import pytest
from conftest import mains_isolator, new_coating_logged, site_in_use
from django.contrib.messages import get_messages
from django.utils import timezone
from test_recoat_phases import slings_rated
from test_workorders import (  # noqa: F401  (fixtures, used by name)
    _all_readings,
    _confirmed,
    _finish_confirmations,
    drive,
    order,
)

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.logbook.models import Reading, ServiceRecord
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import CleaningEvent, CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.planning.models import PlanStatus, ServicePlan
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Subsystem
from observatory_ops.workorders import services
from observatory_ops.workorders.cautions import DANGER_TO_LIFE, SEVERITY_LABELS, signal_word
from observatory_ops.workorders.models import Part, State, WorkOrder
from tests.conftest import parts_as_planned


def _started(work_order, users, issued_days_ago: int = 0) -> WorkOrder:
    """Issued (``issued_days_ago`` days back, as for an order printed then) and started now: working from the
    paper, a technician presses Start on the system only when entering the work afterwards."""
    services.work_order_move(work_order, "issue", users["engineer"])
    services.work_order_move(work_order, "start", users["technician"])
    if issued_days_ago:
        WorkOrder.objects.filter(pk=work_order.pk).update(
            issued_at=timezone.now() - dt.timedelta(days=issued_days_ago)
        )
    work_order.refresh_from_db()
    return work_order


def _post(work_order, **fields) -> dict:
    """The finish form as a technician fills it in, every unticked line confirmed; ``fields`` change it."""
    data = {
        "actual_hours": "2", "findings": "ok", "work_done_on": site_today(work_order.site).isoformat(),
        **_finish_confirmations(work_order),
        **{f"reading_{r.pk}": "0.6" for r in work_order.required_readings.all()},
    }
    return {**data, **fields}


def _text(response) -> str:
    return html.unescape(re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", response.content.decode())))


def _message(response) -> str:
    return " ".join(str(m) for m in get_messages(response.wsgi_request))


def _nothing_stored(work_order) -> None:
    assert WorkOrder.objects.get(pk=work_order.pk).state == State.UNDERWAY
    assert not ServiceRecord.objects.exists() and not Reading.objects.exists()
    assert not CleaningEvent.objects.exists()


# --- 1. actual hours ------------------------------------------------------------------------------------------


def test_actual_hours_start_empty_with_the_estimate_beside_them(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    field = re.search(r'<input[^>]*name="actual_hours"[^>]*>', page).group(0)
    assert "value=" not in field  # one tap on Finish cannot record the estimate as the time the work took
    assert f"The estimate was {order.estimated_hours:g} h." in page


def test_finishing_without_actual_hours_is_refused_naming_the_field_and_stores_nothing(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    data = _post(order)
    del data["actual_hours"]
    response = client.post(f"/workorders/{order.pk}/finish/", data)
    assert response.status_code == 200
    assert "Actual hours: enter the hours the work took." in _text(response)
    _nothing_stored(order)


# --- 2. the day the work was done ---------------------------------------------------------------------------


def test_work_done_on_starts_at_the_sites_today(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    field = re.search(r'<input[^>]*name="work_done_on"[^>]*>', page).group(0)
    assert f'value="{site_today(order.site).isoformat()}"' in field and 'type="date"' in field


def test_a_paper_order_entered_two_days_later_dates_its_records_readings_and_the_plans_counting(
    order, users, client,  # noqa: F811
):
    _started(order, users, issued_days_ago=3)
    day = site_today(order.site) - dt.timedelta(days=2)
    assert order.started_at.astimezone(order.site.zone).date() > day  # started on the system only today
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, work_done_on=day.isoformat()))
    assert response.status_code == 302, _text(response)[-1500:]
    record = ServiceRecord.objects.get(work_order=order)
    assert record.performed_on == day
    # Readings of an earlier day are taken at its noon, site time (Europe/Madrid here).
    noon = dt.datetime(day.year, day.month, day.day, 12, tzinfo=ZoneInfo("Europe/Madrid"))
    assert {r.reading.taken_at for r in order.required_readings.select_related("reading")} == {noon}
    status = PlanStatus.objects.get(plan=record.plan)
    assert status.last_service_on == day
    # The drive plan's calendar trigger (180 days, catalogue) counts again from that day: 2 days by hand.
    calendar = next(row for row in status.trigger_rows if row["metric"] == "calendar_days")
    assert calendar["value"] == 2
    assert f"dated {day:%d %b %Y}" in _message(response)


def test_work_done_today_is_recorded_with_the_readings_taken_now(order, users):  # noqa: F811
    _started(order, users)
    before = timezone.now()
    services.work_order_finish(order, users["technician"], 1.0, "Isolation ticked on the paper.",
                               _all_readings(order, 0.6), **_confirmed(order))
    assert ServiceRecord.objects.get(work_order=order).performed_on == site_today(order.site)
    assert all(r.reading.taken_at >= before for r in order.required_readings.select_related("reading"))


@pytest.mark.parametrize("days_from_today, issued_days_ago, message", [
    (1, 0, "Work done on: {day} is after today at the site ({today})"),
    (-2, 1, "Work done on: {day} is before {number} was issued ({issued}), and no work on it comes before that"),
])
def test_a_future_day_or_one_before_the_order_was_issued_is_refused_naming_the_field_and_stores_nothing(
    order, users, client, site, days_from_today, issued_days_ago, message,  # noqa: F811
):
    part = Part.objects.create(site=site, name="Brake pad set", quantity_on_hand=3)
    services.part_add(order, part, 1)
    _started(order, users, issued_days_ago=issued_days_ago)
    today = site_today(site)
    day = today + dt.timedelta(days=days_from_today)
    issued = order.issued_at.astimezone(site.zone).date()
    expected = message.format(day=f"{day:%d %b %Y}", today=f"{today:%d %b %Y}", issued=f"{issued:%d %b %Y}",
                              number=order.number)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, work_done_on=day.isoformat()))
    assert response.status_code == 200 and expected in _text(response)
    _nothing_stored(order)
    part.refresh_from_db()
    assert part.quantity_on_hand == 3
    # The service refuses it as well, for any caller that is not the form.
    with pytest.raises(services.Refused, match=re.escape(f"work done on: {expected[len('Work done on: '):]}")):
        services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6),
                                   parts_as_planned(order), **_confirmed(order), work_done_on=day)
    _nothing_stored(order)


def test_a_day_of_work_before_a_subsystem_entered_service_is_questioned_once_then_recorded(
    order, users, client,  # noqa: F811
):
    """As the service form asks (logbook.forms.ServiceRecordForm): the plans would count the nights of what the unit
    replaced. Its "in service since" was moved past the order's issue (a unit swapped while the paper was out)."""
    _started(order, users, issued_days_ago=5)
    today = site_today(order.site)
    day = today - dt.timedelta(days=4)
    unit = order.items.first().subsystem
    Subsystem.objects.filter(pk=unit.pk).update(in_service_since=today - dt.timedelta(days=1))
    client.force_login(users["technician"])
    data = _post(order, work_done_on=day.isoformat())
    first = client.post(f"/workorders/{order.pk}/finish/", data)
    shown = _text(first)
    assert first.status_code == 200
    assert (f"{day:%d %b %Y} is before the day {unit.name} entered service here "
            f"({today - dt.timedelta(days=1):%d %b %Y}): the plan would count this telescope's nights") in shown
    assert "Not recorded yet" in shown
    _nothing_stored(order)
    data["flagged"] = re.findall(r'name="flagged" value="([^"]+)"', html.unescape(first.content.decode()))
    data["readings_confirmed"] = "on"
    again = client.post(f"/workorders/{order.pk}/finish/", data)
    assert again.status_code == 302, _text(again)[-1500:]
    assert ServiceRecord.objects.get(work_order=order).performed_on == day


def test_a_repair_orders_day_before_its_unit_entered_service_names_the_reliability_page(order, users, client,  # noqa: F811
                                                                                          ):
    """A diff review finished a corrective order with no plan, dated before its unit entered service: the question
    spoke of plans it had not got, and the failure's leaving the reliability page went unsaid."""
    WorkOrder.objects.filter(pk=order.pk).update(order_type=WorkOrder.Type.CORRECTIVE)
    order.items.update(plan=None)
    order.refresh_from_db()
    _started(order, users, issued_days_ago=5)
    today = site_today(order.site)
    day = today - dt.timedelta(days=4)
    unit = order.items.first().subsystem
    Subsystem.objects.filter(pk=unit.pk).update(in_service_since=today - dt.timedelta(days=1))
    client.force_login(users["technician"])
    shown = _text(client.post(f"/workorders/{order.pk}/finish/", _post(order, work_done_on=day.isoformat())))
    assert (f"{day:%d %b %Y} is before the day {unit.name} entered service here "
            f"({today - dt.timedelta(days=1):%d %b %Y}): the reliability page would take the failure") in shown
    assert "the plan would count" not in shown
    assert "or a day of work before a subsystem entered service" in shown
    _nothing_stored(order)


# --- 3. whether a mirror was cleaned ------------------------------------------------------------------------


@pytest.fixture
def mirror(db):
    site = site_in_use("finish-clean", kinds=("primary_mirror",))
    primary = Subsystem.objects.get(telescope__site=site, kind="primary_mirror")
    made = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                 material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=made, coated_on=site_today(site) - dt.timedelta(days=400), metal="al")
    mains_isolator(primary.telescope)
    return made


@pytest.fixture
def cleaning_order(mirror, users):
    clean = ServicePlan.objects.get(subsystem=mirror.subsystem, name="Inspect and CO2-snow clean primary")
    return services.work_order_from_due([clean], users["engineer"], site_today(mirror.subsystem.telescope.site))


def test_the_cleaning_choice_of_a_mirror_order_has_no_default(cleaning_order, mirror, users, client):
    _started(cleaning_order, users)
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{cleaning_order.pk}/finish/").content.decode()
    select = re.search(rf'<select name="cleaned_{mirror.pk}"[^>]*>.*?</select>', page, re.S).group(0)
    assert "required" in select
    assert re.search(r'<option value="" selected>choose...</option>', select)
    assert '<option value="none">not cleaned in this work</option>' in select


def test_a_forgotten_cleaning_choice_is_refused_naming_the_mirror_and_stores_nothing(
    cleaning_order, mirror, users, client
):
    _started(cleaning_order, users)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{cleaning_order.pk}/finish/", _post(cleaning_order))
    assert response.status_code == 200
    assert ("Cleaning of Primary mirror: choose how it was cleaned in this work, or 'not cleaned in this work'."
            in _text(response))
    _nothing_stored(cleaning_order)


def test_a_reflectance_typed_as_a_percentage_is_named_with_the_other_problems_on_the_first_try(
    cleaning_order, mirror, users, client
):
    """The reviewer typed 87 for 0.87 and learnt it only once the other fields were right: the reading's problem
    comes with theirs, and says what the percentage is as a fraction."""
    _started(cleaning_order, users)
    client.force_login(users["technician"])
    reflectance = cleaning_order.required_readings.get(quantity="reflectance")
    data = _post(cleaning_order, **{f"reading_{reflectance.pk}": "87"})
    del data["actual_hours"]
    shown = _text(client.post(f"/workorders/{cleaning_order.pk}/finish/", data))
    assert "Actual hours: enter the hours the work took." in shown
    assert "a reflectance is a fraction between 0 and 1: 87 % is 0.87." in shown
    _nothing_stored(cleaning_order)


def test_a_reflectance_well_above_the_fresh_coating_is_questioned_once_then_recorded(cleaning_order, mirror, users,
                                                                                     client):
    """It joins the mirror's decline fit: shown once beside its field with the coating's fresh value, as a reading
    beyond its limit is (mirrors.forms.above_fresh_problem, margin 0.02, our own), then recorded as entered, not
    flagged."""
    from observatory_ops.mirrors.forms import ABOVE_FRESH_MARGIN

    _started(cleaning_order, users)
    client.force_login(users["technician"])
    fresh, _ = mirror_services.fresh_band_on(mirror, site_today(mirror.subsystem.telescope.site))
    reflectance = cleaning_order.required_readings.get(quantity="reflectance")
    high = f"{fresh + ABOVE_FRESH_MARGIN + 0.01:.4f}"
    data = _post(cleaning_order, **{f"reading_{reflectance.pk}": high, f"cleaned_{mirror.pk}": "none"})
    first = client.post(f"/workorders/{cleaning_order.pk}/finish/", data)
    shown = _text(first)
    assert first.status_code == 200
    assert f"{float(high):g} is above the fresh value of the coating" in shown and "Not recorded yet" in shown
    assert "A figure is questioned beside its field" in shown
    _nothing_stored(cleaning_order)
    data["flagged"] = re.findall(r'name="flagged" value="([^"]+)"', html.unescape(first.content.decode()))
    data["readings_confirmed"] = "on"
    again = client.post(f"/workorders/{cleaning_order.pk}/finish/", data)
    assert again.status_code == 302, _text(again)[-1500:]
    assert ReflectanceMeasurement.objects.filter(mirror=mirror, value=float(high)).exists()
    assert "flagged on the record" not in _message(again)


def test_not_cleaned_said_explicitly_finishes_without_a_cleaning(cleaning_order, mirror, users, client):
    _started(cleaning_order, users)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{cleaning_order.pk}/finish/",
                           _post(cleaning_order, **{f"cleaned_{mirror.pk}": "none"}))
    assert response.status_code == 302
    assert WorkOrder.objects.get(pk=cleaning_order.pk).state == State.FINISHED
    assert not CleaningEvent.objects.exists()


def test_a_cleaning_two_days_ago_is_dated_that_day_with_its_reflectance(cleaning_order, mirror, users, client):
    _started(cleaning_order, users, issued_days_ago=3)
    day = site_today(mirror.subsystem.telescope.site) - dt.timedelta(days=2)
    client.force_login(users["technician"])
    data = _post(cleaning_order, work_done_on=day.isoformat(), **{f"cleaned_{mirror.pk}": "co2_snow"})
    data.update({f"reading_{r.pk}": "0.88" for r in cleaning_order.required_readings.all()})
    response = client.post(f"/workorders/{cleaning_order.pk}/finish/", data)
    assert response.status_code == 302, _text(response)[-1500:]
    cleaning = CleaningEvent.objects.get(mirror=mirror)
    assert (cleaning.cleaned_on, cleaning.method) == (day, "co2_snow")
    # The reflectance reading reaches the mirror's record on the same day (noon UTC, the site's zone).
    assert ReflectanceMeasurement.objects.get(mirror=mirror, value=0.88).measured_on == day


@pytest.fixture
def recoat(mirror, users):
    """The four phase orders of a recoat of the mirror, a week from now: removal, coating, reinstall,
    realignment; the slings' working load limit entered on each that lifts (a lift starts only with one)."""
    start = site_today(mirror.subsystem.telescope.site) + dt.timedelta(days=7)
    plan = mirror_services.recoat_plan_create(mirror, start, list(RECOAT_PHASES), 3.5, users["engineer"])
    removal, coating, reinstall, realignment = slings_rated(list(plan.work_orders.order_by("pk")))
    assert [o.recoat_phase for o in (removal, coating, reinstall, realignment)] == [
        "removal", "coating", "reinstall", "realignment"
    ]
    return removal, coating, reinstall, realignment


def _earlier_phases_finished(recoat, phase: int, users) -> None:
    """Finish the phase orders before ``recoat[phase]``: each starts only once the one before it is finished
    (tests/test_recoat_phase_order.py)."""
    for earlier in recoat[:phase]:
        earlier = _started(earlier, users)
        new_coating_logged(earlier, users["technician"])
        services.work_order_finish(earlier, users["technician"], 8.0, "done", _all_readings(earlier, 0.9),
                                   **_confirmed(earlier))


@pytest.mark.parametrize("phase", range(4))
def test_the_recoat_phase_orders_do_not_ask_about_a_cleaning(recoat, mirror, users, client, phase):
    _earlier_phases_finished(recoat, phase, users)
    phase_order = _started(recoat[phase], users)
    new_coating_logged(phase_order, users["technician"])
    client.force_login(users["technician"])
    response = client.get(f"/workorders/{phase_order.pk}/finish/")
    assert response.status_code == 200
    page = response.content.decode()
    assert f'name="cleaned_{mirror.pk}"' not in page and "Cleaning of" not in page


# --- 4. what the message says ---------------------------------------------------------------------------------


def test_the_message_says_how_many_records_and_plans_and_from_which_day(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order))
    today = site_today(order.site)
    assert _message(response).startswith(
        f"{order.number} finished: 1 service record written, dated {today:%d %b %Y}; 1 service plan restarted, "
        "counting from that day."
    )


def test_finishing_the_removal_names_the_next_phase_and_says_the_telescope_stays_locked_out(
    recoat, mirror, users, client
):
    removal, coating, reinstall, _ = recoat
    _started(removal, users)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{removal.pk}/finish/", _post(removal))
    assert response.status_code == 302, _text(response)[-1500:]
    message = _message(response)
    today = site_today(mirror.subsystem.telescope.site)
    # The removal covers the mirror but no service plan: nothing restarted, and the message does not say so.
    assert f"1 service record written, dated {today:%d %b %Y}; no service plan restarted (the order covers none)." in (
        message
    )
    assert "plans restarted" not in message
    assert (f'Next: <a href="/workorders/{coating.pk}/">{coating.number} {coating.title}</a> '
            f"(planned {coating.planned_date:%d %b %Y}; still a draft: issue it).") in message
    said = html.unescape(message)
    assert f"it goes back with {reinstall.number}" in said and "drives on the site's long-term locks" in said
    # The order's page keeps it after the message has gone.
    page = _text(client.get(removal.get_absolute_url()))
    assert f"Next phase of this recoat: {coating.number} {coating.title}" in page
    assert "T1 is out of service: its primary mirror is out" in page and "drives on the site's long-term locks" in page
    assert f"work done on {today:%d %b %Y}" in page


def test_finishing_the_realignment_leaves_the_recoat_plan_to_the_coating_and_names_no_next_phase(
    recoat, mirror, users, client
):
    *_, realignment = recoat
    _earlier_phases_finished(recoat, 3, users)
    _started(realignment, users)
    client.force_login(users["technician"])
    data = _post(realignment)
    data.update({f"reading_{r.pk}": "0.82" for r in realignment.required_readings.all()})
    response = client.post(f"/workorders/{realignment.pk}/finish/", data)
    assert response.status_code == 302, _text(response)[-1500:]
    message = _message(response)
    # The mirror's recoat plan counts from the new coating (logged before the strip and coat finished), not again
    # from the realignment (a recoat review: two records of one recoat).
    assert ("no service plan restarted: the recoat's new coating restarted its plans, which count from the day it was "
            "coated.") in html.unescape(message)
    assert "Next:" not in message and "long-term locks" not in message


# --- 6. signal words on the page as on paper ------------------------------------------------------------------


def test_the_page_opens_each_caution_with_the_signal_word_the_paper_prints(order, users, client):  # noqa: F811
    client.force_login(users["viewer"])
    page = _text(client.get(order.get_absolute_url()))
    word = signal_word(SEVERITY_LABELS[DANGER_TO_LIFE])
    assert word == "DANGER TO LIFE"
    assert f"{word} · Hazardous electrical energy" in page
    assert f"{word} · Moving telescope and dome" in page


def test_the_lift_page_of_an_order_on_a_registered_mirror_starts_from_the_mirrors_record(
    cleaning_order, mirror, users, client
):
    """A cleaning in place lifts nothing, so its order has no lifting inputs of its own; when the engineer opens its
    lifting figures all the same, the form starts from the mirror's record (size, material, cell mass), not from the
    form's blank defaults, and says so."""
    mirror.cell_mass_kg = 30
    mirror.save()
    assert cleaning_order.lift_inputs in (None, {})
    client.force_login(users["engineer"])
    page = client.get(f"/workorders/{cleaning_order.pk}/lift/")
    assert page.context["form"].initial == mirror.lift_inputs
    assert f"Filled in from the record of {mirror.subsystem}: check the figures, then save them." in \
        html.unescape(page.content.decode())
