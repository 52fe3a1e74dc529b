"""The mirror page joined to the rest of the record: a coating restarts the recoat service plan, a reflectance
reading logged on the subsystem (or on a work order) reaches the mirror's measurements and names its source,
and a recovery per cleaning the data cannot tell is said in words, never printed as NaN."""
from __future__ import annotations

import datetime as dt
import html
import json
import re
import zoneinfo

import numpy as np
import pytest
from conftest import new_coating_logged, site_in_use
from django.contrib.messages import get_messages
from django.core.exceptions import ValidationError
from django.core.management import call_command
from django.utils import timezone
from django.utils.html import strip_tags
from test_mirror_admin import _admin_post
from test_workorders import _confirmed, _finish_confirmations

from observatory_ops.logbook import services as logbook
from observatory_ops.logbook.models import Reading, ServiceRecord
from observatory_ops.mirrors import services
from observatory_ops.mirrors.models import CleaningEvent, CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.planning import metrics
from observatory_ops.planning.models import PlanStatus, ServicePlan
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Subsystem

NOT_DETERMINED = "not determined (no measurement after a cleaning yet)"


@pytest.fixture
def mirror(db):
    """A primary registered with its catalogue plans (recoat plan: recoat line, or 730 calendar days), counting
    from 1296 days ago as on the reviewer's site, on a site logging 6 open hours a night at PM10 35 ug/m3."""
    site = site_in_use("mirror-record", kinds=("primary_mirror",))
    primary = Subsystem.objects.get(telescope__site=site, kind="primary_mirror")
    today = site_today(site)
    ServicePlan.objects.filter(subsystem=primary).update(counting_from=today - dt.timedelta(days=1296))
    return Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                 material="borosilicate", cell_mass_kg=30)


def _today(mirror) -> dt.date:
    return site_today(mirror.subsystem.telescope.site)


def _recoat_plan(mirror) -> ServicePlan:
    return ServicePlan.objects.get(subsystem=mirror.subsystem, triggers__metric=metrics.RECOAT_LINE)


def _page_text(client, mirror) -> str:
    response = client.get(mirror.get_absolute_url())
    assert response.status_code == 200
    return re.sub(r"\s+", " ", strip_tags(response.content.decode()))


# --- 1. a coating restarts the recoat plan ------------------------------------------------------------------


def test_a_coating_restarts_the_recoat_plan_found_by_its_trigger_whatever_its_name(mirror, users):
    plan = _recoat_plan(mirror)
    plan.name = "Aluminise the primary"  # renamed on site: the name no longer says "recoat"
    plan.save()
    site_recompute(mirror.subsystem.telescope.site)
    before = PlanStatus.objects.get(plan=plan)
    # The catalogue's calendar trigger is 730 days (common practice, no published source); 1296 > 730.
    assert (before.status, before.metric, before.value, before.limit) == ("overdue", "calendar_days", 1296, 730)
    coated_on = _today(mirror) - dt.timedelta(days=10)
    services.coating_log(mirror, users["technician"], coated_on, "al", [])
    record = ServiceRecord.objects.get(plan=plan)
    assert record.performed_on == coated_on and record.summary == "New coating: Al"
    after = PlanStatus.objects.get(plan=plan)
    # Hand count: 10 calendar days since the coating, against the 730-day limit.
    assert after.last_service_on == coated_on and after.status != "overdue"
    assert (after.metric, after.value) == ("calendar_days", 10)


def test_a_plan_that_only_mentions_recoat_in_its_name_is_not_restarted(mirror, users):
    witness = ServicePlan.objects.create(subsystem=mirror.subsystem, name="Check recoat witness samples",
                                         counting_from=_today(mirror))
    assert services.recoat_plans(mirror.subsystem) == [_recoat_plan(mirror)]
    services.coating_log(mirror, users["technician"], _today(mirror), "al", [])
    assert not ServiceRecord.objects.filter(plan=witness).exists()


def test_the_same_coating_date_logged_twice_gives_one_service_record(mirror, users):
    coated_on = _today(mirror) - dt.timedelta(days=3)
    first = services.coating_log(mirror, users["technician"], coated_on, "al", [])
    services.coating_log(mirror, users["technician"], coated_on, "al", [{"material": "SiO2", "thickness_nm": 100}])
    assert services.coating_service_records_log(first, users["technician"]) == []
    assert ServiceRecord.objects.filter(plan=_recoat_plan(mirror), performed_on=coated_on).count() == 1
    assert mirror.coatings.count() == 2  # the coatings themselves are both kept


def test_a_voided_record_on_the_coating_date_does_not_count_as_in_force(mirror, users):
    plan, coated_on = _recoat_plan(mirror), _today(mirror) - dt.timedelta(days=3)
    original = logbook.service_record_log(mirror.subsystem, plan, coated_on, users["technician"], "typed twice")
    logbook.service_record_correct(original, users["engineer"], "withdrawn", void=True, reason="typo")
    services.coating_log(mirror, users["technician"], coated_on, "al", [])
    assert ServiceRecord.objects.filter(plan=plan, performed_on=coated_on, void=False,
                                        corrected_by__isnull=True).count() == 1


def test_without_a_recoat_line_trigger_the_catalogue_plan_name_is_the_fallback(mirror, users):
    plan = _recoat_plan(mirror)
    plan.triggers.filter(metric=metrics.RECOAT_LINE).delete()
    assert plan.name == "Recoat primary"  # the catalogue's name (registry/catalogue.py)
    assert services.recoat_plans(mirror.subsystem) == [plan]
    plan.name = "Aluminise the primary"
    plan.save()
    assert services.recoat_plans(mirror.subsystem) == []  # neither trigger nor catalogue name: none
    services.coating_log(mirror, users["technician"], _today(mirror), "al", [])
    assert not ServiceRecord.objects.filter(plan=plan).exists()
    assert mirror.coatings.count() == 1


def test_the_recoat_orders_realignment_carries_the_plan_found_by_its_trigger(mirror, users):
    from observatory_ops.calc.windows import RECOAT_PHASES

    plan = _recoat_plan(mirror)
    plan.name = "Aluminise the primary"
    plan.save()
    CoatingEvent.objects.create(mirror=mirror, coated_on=_today(mirror) - dt.timedelta(days=400), metal="al")
    recoat = services.recoat_plan_create(mirror, _today(mirror) + dt.timedelta(days=30), list(RECOAT_PHASES), 3.5,
                                         users["engineer"])
    realignment = recoat.work_orders.order_by("planned_date").last()
    assert [item.plan for item in realignment.items.all()] == [plan]


def test_a_coating_dated_beyond_the_service_record_window_is_refused_and_nothing_stored(mirror, users):
    long_ago = _today(mirror) - dt.timedelta(days=16 * 366)  # the logbook accepts 15 years back
    with pytest.raises(ValidationError, match="more than 15 years ago"):
        services.coating_log(mirror, users["technician"], long_ago, "al", [])
    assert not CoatingEvent.objects.exists() and not ServiceRecord.objects.exists()


def test_a_measurement_dated_beyond_the_window_is_refused_on_the_page_and_in_the_admin(mirror, users, client,
                                                                                       admin_client):
    """A reviewer stored a measurement dated 1990 though cleanings, coatings and readings refuse more than 15 years
    back: a measurement follows the same rule, on the mirror page and in the admin."""
    from observatory_ops.mirrors.models import ReflectanceMeasurement

    long_ago = _today(mirror) - dt.timedelta(days=16 * 366)
    with pytest.raises(ValidationError, match="measurement date .* is more than 15 years ago"):
        services.measurement_log(mirror, users["technician"], long_ago, 0.85)
    before = ReflectanceMeasurement.objects.count()
    response = admin_client.post("/admin/mirrors/reflectancemeasurement/add/", {
        "mirror": mirror.pk, "measured_on": long_ago.isoformat(), "value": "0.85", "wavelength_nm": "",
        "position": "", "taken_by": users["technician"].pk, "note": "",
    })
    assert response.status_code == 200 and "Measurement date" in response.content.decode()
    assert ReflectanceMeasurement.objects.count() == before


def test_a_coating_added_in_the_admin_restarts_the_recoat_plan(mirror, admin_client):
    coated_on = _today(mirror) - dt.timedelta(days=20)
    response = _admin_post(
        admin_client, mirror, coatings=[{"coated_on": coated_on.isoformat(), "metal": "al", "layers": "", "note": ""}]
    )
    assert response.status_code == 302
    record = ServiceRecord.objects.get(plan=_recoat_plan(mirror))
    assert record.performed_on == coated_on
    assert PlanStatus.objects.get(plan=record.plan).last_service_on == coated_on


def test_a_future_coating_in_the_admin_is_refused_and_nothing_changes(mirror, admin_client):
    tomorrow = _today(mirror) + dt.timedelta(days=1)
    response = _admin_post(
        admin_client, mirror, coatings=[{"coated_on": tomorrow.isoformat(), "metal": "al", "layers": "", "note": ""}]
    )
    assert response.status_code == 200
    assert "cannot be in the future" in response.content.decode()
    assert not CoatingEvent.objects.exists() and not ServiceRecord.objects.exists()


# --- 2. a reflectance reading reaches the mirror's measurements ---------------------------------------------


def test_a_reflectance_reading_on_the_subsystem_page_reaches_the_mirror_measurements(mirror, users, client):
    site = mirror.subsystem.telescope.site
    site.time_zone = "Pacific/Honolulu"  # UTC-10 all year, no daylight saving (IANA time zone database)
    site.save()
    day = _today(mirror) - dt.timedelta(days=2)
    client.force_login(users["technician"])
    response = client.post(f"/subsystems/{mirror.subsystem_id}/readings/new/", {
        "quantity": "reflectance", "value": "0.861", "taken_at": f"{day:%Y-%m-%d}T23:30", "note": "centre",
    })
    assert response.status_code == 302
    reading = Reading.objects.get(subsystem=mirror.subsystem, quantity="reflectance")
    # 23:30 local is 09:30 UTC the next day; the measurement keeps the site's local date.
    assert reading.taken_at.astimezone(dt.UTC).date() == day + dt.timedelta(days=1)
    measurement = ReflectanceMeasurement.objects.get(mirror=mirror)
    assert (measurement.measured_on, measurement.value, measurement.wavelength_nm) == (day, 0.861, None)
    assert measurement.reading == reading and measurement.taken_by == users["technician"]


def test_readings_on_the_subsystem_feed_the_decline_fit(mirror, users):
    today = _today(mirror)
    CoatingEvent.objects.create(mirror=mirror, coated_on=today - dt.timedelta(days=50), metal="al")
    zone = zoneinfo.ZoneInfo(mirror.subsystem.telescope.site.time_zone)
    for days_ago, value in ((40, 0.90), (30, 0.89), (20, 0.88), (10, 0.87)):
        taken_at = dt.datetime.combine(today - dt.timedelta(days=days_ago), dt.time(14, 0), zone)
        logbook.reading_log(mirror.subsystem, "reflectance", value, taken_at, users["technician"])
    state = services.mirror_forecast(mirror)
    assert [p[2] for p in state.points] == [0.90, 0.89, 0.88, 0.87]
    assert state.fit is not None and state.fit.n_points == 4


def test_other_readings_and_subsystems_without_a_mirror_store_only_the_reading(mirror, users):
    taken_at = timezone.now() - dt.timedelta(hours=1)
    logbook.reading_log(mirror.subsystem, "temperature_c", 12.0, taken_at, users["technician"])
    other = Subsystem.objects.create(telescope=mirror.subsystem.telescope, kind="secondary_mirror", name="M2")
    logbook.reading_log(other, "reflectance", 0.85, taken_at, users["technician"])
    assert Reading.objects.count() == 2 and not ReflectanceMeasurement.objects.exists()


def test_the_reading_and_its_measurement_are_stored_together_or_not_at_all(mirror, users, monkeypatch):
    def fails(site, **options):
        raise RuntimeError("recompute failed")

    monkeypatch.setattr(logbook, "site_recompute", fails)
    with pytest.raises(RuntimeError):
        logbook.reading_log(mirror.subsystem, "reflectance", 0.86, timezone.now(), users["technician"])
    assert not Reading.objects.exists() and not ReflectanceMeasurement.objects.exists()


def test_a_work_order_reading_filed_on_the_mirror_names_its_order(mirror, users, client):
    """What the one-line change in workorders.services.work_order_finish (see the report) does per reading."""
    reading = Reading.objects.create(subsystem=mirror.subsystem, quantity="reflectance", unit="fraction",
                                     value=0.88, taken_at=timezone.now(), taken_by=users["technician"],
                                     note="recorded on WO-0042")
    first = services.measurement_from_reading(reading)
    assert services.measurement_from_reading(reading) == first  # idempotent per reading
    assert first.source == "logbook reading (recorded on WO-0042)"
    client.force_login(users["viewer"])
    assert "logbook reading (recorded on WO-0042)" in _page_text(client, mirror)


def test_the_realignment_orders_reflectance_reading_reaches_the_mirror(mirror, users):
    from observatory_ops.calc.windows import RECOAT_PHASES
    from observatory_ops.workorders import services as workorders

    CoatingEvent.objects.create(mirror=mirror, coated_on=_today(mirror) - dt.timedelta(days=400), metal="al")
    recoat = services.recoat_plan_create(mirror, _today(mirror), list(RECOAT_PHASES), 3.5, users["engineer"])
    for order in recoat.work_orders.order_by("planned_date"):  # each phase starts once the one before is finished
        if order.lift_inputs:  # a lift starts with the slings' working load limit entered (ASME B30.9)
            workorders.lift_set(order, {**order.lift_inputs, "wll_kg": 500})
        workorders.work_order_move(order, "issue", users["engineer"])
        workorders.work_order_move(order, "start", users["technician"])
        readings = {r.pk: 0.89 for r in order.required_readings.all()}  # the realignment's reflectance
        new_coating_logged(order, users["technician"])
        workorders.work_order_finish(order, users["technician"], 4.0, "Isolation ticked on the paper.", readings,
                                     **_confirmed(order))
    assert order.recoat_phase == "realignment"
    assert ReflectanceMeasurement.objects.filter(mirror=mirror, value=0.89).exists()


def test_finishing_a_cleaning_order_puts_the_cleaning_on_the_mirrors_record(mirror, users, client):
    """The reviewer's case: a CO2-snow clean finished on its work order left no cleaning on the mirror, so the
    fit read the recovery as scatter."""
    from observatory_ops.workorders import services as workorders

    clean = ServicePlan.objects.filter(subsystem=mirror.subsystem, name__icontains="clean").first()
    order = workorders.work_order_from_due([clean], users["engineer"], _today(mirror))
    workorders.work_order_move(order, "issue", users["engineer"])
    workorders.work_order_move(order, "start", users["technician"])
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    assert f'name="cleaned_{mirror.pk}"' in page and "not cleaned in this work" in page
    data = {"actual_hours": "2", "findings": "Isolation ticked on the paper.", f"cleaned_{mirror.pk}": "co2_snow",
            "work_done_on": _today(mirror).isoformat(),
            **{f"reading_{r.pk}": "0.88" for r in order.required_readings.all()}, **_finish_confirmations(order)}
    response = client.post(f"/workorders/{order.pk}/finish/", data)
    assert response.status_code == 302, response.content.decode()[:2000]
    cleaning = CleaningEvent.objects.get(mirror=mirror)
    assert (cleaning.cleaned_on, cleaning.method, cleaning.note) == (_today(mirror), "co2_snow", f"on {order.number}")


# --- 3. both visible ------------------------------------------------------------------------------------------


def test_the_mirror_page_lists_where_each_measurement_came_from(mirror, users, client):
    today = _today(mirror)
    services.measurement_log(mirror, users["technician"], today - dt.timedelta(days=1), 0.87)
    logbook.reading_log(mirror.subsystem, "reflectance", 0.86, timezone.now(), users["technician"], "after wash")
    client.force_login(users["viewer"])
    text = _page_text(client, mirror)
    assert "Source" in text
    assert "logbook reading (after wash)" in text and "entered as a measurement" in text


def test_the_coating_form_says_the_recoat_plan_restarts(mirror, users, client):
    coated_on = _today(mirror) - dt.timedelta(days=2)
    client.force_login(users["technician"])
    form = client.get(f"/mirrors/{mirror.pk}/coatings/new/").content.decode()
    assert "recoat and cleaning service plans restart their counting from this date" in form
    response = client.post(f"/mirrors/{mirror.pk}/coatings/new/",
                           {"coated_on": coated_on.isoformat(), "metal": "al", "layers": "", "note": ""})
    assert response.status_code == 302
    assert [str(m) for m in get_messages(response.wsgi_request)] == [
        f"New coating logged; the decline starts again from it, and the plans Recoat primary, Inspect and "
        f"CO2-snow clean primary restart their counting from {coated_on:%d %b %Y}."
    ]


def test_an_old_coating_entered_late_is_not_said_to_start_the_decline(mirror, users, client):
    """A bad-input review logged a coating dated before the one in force and was told "the decline starts again from
    it": the later coating stays in force."""
    today = _today(mirror)
    client.force_login(users["technician"])
    client.post(f"/mirrors/{mirror.pk}/coatings/new/",
                {"coated_on": (today - dt.timedelta(days=2)).isoformat(), "metal": "al", "layers": "", "note": ""})
    old = today - dt.timedelta(days=400)
    response = client.post(f"/mirrors/{mirror.pk}/coatings/new/",
                           {"coated_on": old.isoformat(), "metal": "al", "layers": "", "note": ""})
    assert [str(m) for m in get_messages(response.wsgi_request)][-1] == (
        f"Coating of {old:%d %b %Y} logged, in the mirror's history: the coating in force stays the later one of "
        f"{today - dt.timedelta(days=2):%d %b %Y}, and the decline still runs from it.")


def test_a_new_coating_restarts_the_mirrors_cleaning_plan_too(mirror, users):
    """The reviewer's case: a freshly coated mirror's cleaning plan still said "497 of 400 h, overdue"."""
    clean = ServicePlan.objects.get(subsystem=mirror.subsystem, triggers__metric=metrics.DUST_HOURS)
    services.coating_log(mirror, users["technician"], _today(mirror) - dt.timedelta(days=1), "al", [])
    assert PlanStatus.objects.get(plan=clean).status == "later"
    assert ServiceRecord.objects.get(plan=clean).performed_on == _today(mirror) - dt.timedelta(days=1)


def test_a_cleaning_is_asked_about_while_a_work_order_holds_the_cleaning_plan(mirror, users, client):
    """A bad-input review logged a cleaning on the mirror page while an order underway held the cleaning plan: it
    restarted the plan, and the order's finish would log the cleaning again. Asked about first, as the service form
    asks, nothing stored; ticked, logged."""
    from observatory_ops.mirrors.models import CleaningEvent
    from observatory_ops.workorders.services import work_order_from_due

    clean = ServicePlan.objects.get(subsystem=mirror.subsystem, triggers__metric=metrics.DUST_HOURS)
    order = work_order_from_due([clean], users["engineer"], _today(mirror))
    client.force_login(users["technician"])
    data = {"cleaned_on": (_today(mirror) - dt.timedelta(days=1)).isoformat(), "method": "co2_snow", "note": ""}
    response = client.post(f"/mirrors/{mirror.pk}/cleanings/new/", data)
    assert response.status_code == 200 and not CleaningEvent.objects.filter(mirror=mirror).exists()
    import html

    assert (f"Work order {order.number} (draft) is still to do for this mirror's cleaning"
            in html.unescape(response.content.decode()))
    data.update(value_confirmed="on", questioned=response.context["form"]["questioned"].value())
    assert client.post(f"/mirrors/{mirror.pk}/cleanings/new/", data).status_code == 302
    assert CleaningEvent.objects.filter(mirror=mirror).count() == 1


def test_a_cleaning_logged_on_the_mirror_page_restarts_its_cleaning_plan(mirror, users, client):
    """The reviewer's case: a mirror cleaned weeks ago still showed its cleaning plan overdue, counted from an
    older service record, because a cleaning logged on the mirror page wrote no service record."""
    clean = ServicePlan.objects.get(subsystem=mirror.subsystem, triggers__metric=metrics.DUST_HOURS)
    cleaned_on = _today(mirror) - dt.timedelta(days=3)
    client.force_login(users["technician"])
    response = client.post(f"/mirrors/{mirror.pk}/cleanings/new/",
                           {"cleaned_on": cleaned_on.isoformat(), "method": "co2_snow", "note": ""})
    assert response.status_code == 302
    assert [str(m) for m in get_messages(response.wsgi_request)] == [
        f"Cleaning logged; the decline fit counts its recovery, and the plan {clean.name} restarts its counting "
        f"from {cleaned_on:%d %b %Y}."
    ]
    record = ServiceRecord.objects.get(plan=clean)
    assert (record.performed_on, record.summary) == (cleaned_on, "Cleaning: CO2 snow")
    assert PlanStatus.objects.get(plan=clean).status == "later"
    # The recoat plan counts the coating's decline, not the dust on the surface: a cleaning leaves it alone.
    assert not ServiceRecord.objects.filter(plan=_recoat_plan(mirror)).exists()


def test_a_cleaning_entered_from_an_old_logbook_says_the_plan_keeps_its_later_service(mirror, users, client):
    """A reviewer logged a cleaning dated years back and was told the plan "restarts its counting" from then, though a
    later service stood: a plan counts from its latest service, and the message says so."""
    clean = ServicePlan.objects.get(subsystem=mirror.subsystem, triggers__metric=metrics.DUST_HOURS)
    recent, old = _today(mirror) - dt.timedelta(days=3), _today(mirror) - dt.timedelta(days=200)
    client.force_login(users["technician"])
    client.post(f"/mirrors/{mirror.pk}/cleanings/new/", {"cleaned_on": recent.isoformat(), "method": "co2_snow",
                                                         "note": ""})
    response = client.post(f"/mirrors/{mirror.pk}/cleanings/new/", {"cleaned_on": old.isoformat(),
                                                                    "method": "wash", "note": "from the logbook"})
    assert [str(m) for m in get_messages(response.wsgi_request)][-1] == (
        f"Cleaning logged; the decline fit counts its recovery, and the plan {clean.name} keeps counting from its "
        f"later service of {recent:%d %b %Y}."
    )
    assert PlanStatus.objects.get(plan=clean).last_service_on == recent


def test_a_cleaning_finished_on_its_work_order_gives_the_plan_one_record_not_two(mirror, users):
    from observatory_ops.workorders import services as workorders

    clean = ServicePlan.objects.get(subsystem=mirror.subsystem, triggers__metric=metrics.DUST_HOURS)
    order = workorders.work_order_from_due([clean], users["engineer"], _today(mirror))
    workorders.work_order_move(order, "issue", users["engineer"])
    workorders.work_order_move(order, "start", users["technician"])
    workorders.work_order_finish(
        order, users["technician"], 2.0, "Isolation ticked on the paper.",
        {r.pk: 0.88 for r in order.required_readings.all()}, **_confirmed(order), cleanings={mirror.pk: "co2_snow"},
    )
    assert ServiceRecord.objects.filter(plan=clean).count() == 1
    assert CleaningEvent.objects.filter(mirror=mirror).count() == 1


# --- 4. a recovery the data cannot tell -------------------------------------------------------------------


@pytest.fixture
def cleaned_after_the_readings(mirror, users):
    """Four measurements on an exact line, then a cleaning with no measurement after it. (Logging that cleaning
    used to fail: calc.reflectance will not predict past a cleaning of unknown recovery.)"""
    today = _today(mirror)
    coated = today - dt.timedelta(days=50)
    CoatingEvent.objects.create(mirror=mirror, coated_on=coated, metal="al")
    # Dust weight at PM10 35, sensitivity 1: 1 + (35 - 20) / 20 = 1.75, x 6 open hours = 10.5 per night.
    for days in (10, 20, 30, 40):
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=coated + dt.timedelta(days=days),
                                              value=0.90 - 1e-5 * 10.5 * days, taken_by=users["technician"])
    services.cleaning_log(mirror, users["technician"], today - dt.timedelta(days=5), "co2_snow")
    return mirror


def test_an_unknown_recovery_is_none_with_a_reason_and_the_line_still_fits(cleaned_after_the_readings):
    state = services.mirror_forecast(cleaned_after_the_readings)
    assert (state.recovery_fraction, state.recovery_sigma, state.recovery_note) == (None, None, NOT_DETERMINED)
    # The cleaning is counted as recovering nothing until a measurement follows it (the earlier, safer date).
    assert "is not counted yet" in state.cleaning_note
    assert state.current == pytest.approx(0.90 - 1e-5 * state.exposure_now_h, rel=1e-9)
    # numpy.polyfit (an independent least-squares fit) on the same points gives the same line.
    exposures, values = zip(*[(p[1], p[2]) for p in state.points], strict=True)
    slope, intercept = np.polyfit(exposures, values, 1)
    assert (state.fit.r0, state.fit.rate_per_hour) == pytest.approx((intercept, -slope), rel=1e-9)
    assert state.fit.rate_per_hour == pytest.approx(1e-5, rel=1e-9)


def test_four_measurements_and_no_cleaning_say_the_recovery_is_not_determined(mirror, users, client):
    """The reviewer's page: "recovery per cleaning f = nan ± nan" after four measurements."""
    CoatingEvent.objects.create(mirror=mirror, coated_on=_today(mirror) - dt.timedelta(days=50), metal="al")
    for days_ago, value in ((40, 0.90), (30, 0.89), (20, 0.88), (10, 0.87)):
        services.measurement_log(mirror, users["technician"], _today(mirror) - dt.timedelta(days=days_ago), value)
    state = services.mirror_forecast(mirror)
    assert state.fit is not None and state.recovery_fraction is None and state.cleaning_note == ""
    assert state.recovery_note == "not determined (no cleaning since the coating yet)"
    client.force_login(users["viewer"])
    text = _page_text(client, mirror)
    assert "recovery per cleaning f = not determined (no cleaning since the coating yet);" in text
    assert not re.search(r"\bnan\b", text, re.IGNORECASE)


def test_the_mirror_page_says_the_recovery_is_not_determined_and_prints_no_nan(
    cleaned_after_the_readings, users, client
):
    client.force_login(users["viewer"])
    text = _page_text(client, cleaned_after_the_readings)
    assert f"recovery per cleaning f = {NOT_DETERMINED};" in text and "is not counted yet" in text
    assert not re.search(r"\bnan\b", text, re.IGNORECASE)


def test_the_forecast_command_says_the_recovery_is_not_determined(cleaned_after_the_readings, capsys):
    subsystem = str(cleaned_after_the_readings.subsystem_id)
    call_command("mirror_forecast", subsystem)
    text = capsys.readouterr().out
    assert NOT_DETERMINED in text and not re.search(r"\bnan\b|recovery_fraction': None", text, re.IGNORECASE)
    call_command("mirror_forecast", subsystem, "--json")
    fit = json.loads(capsys.readouterr().out)["fit"]  # JSON keeps null, with the reason beside it
    assert (fit["recovery_fraction"], fit["recovery_note"]) == (None, NOT_DETERMINED)


def test_a_recovery_that_is_fitted_is_shown_as_a_figure(mirror, users, client):
    today = _today(mirror)
    coated = today - dt.timedelta(days=55)
    CoatingEvent.objects.create(mirror=mirror, coated_on=coated, metal="al")
    CleaningEvent.objects.create(mirror=mirror, cleaned_on=coated + dt.timedelta(days=25), method="co2_snow")
    # The model of calc/reflectance.py with R0 0.90, b 1e-5 per hour, f 0.5 (exposure 10.5 h a night).
    for days in (5, 15, 25, 35, 45):
        e, last_clean = 10.5 * days, (10.5 * 25 if days >= 25 else 0.0)
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=coated + dt.timedelta(days=days),
                                              value=0.90 - 1e-5 * (e - 0.5 * last_clean), taken_by=users["technician"])
    state = services.mirror_forecast(mirror)
    assert state.recovery_fraction == pytest.approx(0.5, rel=1e-6) and state.recovery_note == ""
    client.force_login(users["viewer"])
    assert "recovery per cleaning f = 0.50 ± 0.00;" in _page_text(client, mirror)


def test_a_measurement_taken_before_that_days_cleaning_is_fitted_before_it(mirror, users, client):
    """A traceability review: a reflectance measured the morning before a cleaning was counted after it, which moved
    the fit. Marked "Measured before that day's cleaning", it counts before the cleaning: the five points of the
    model above and a sixth on the cleaning day, taken before it (its value has no recovery in it), then fit the model
    exactly again (f = 0.5); counted after the cleaning, the same sixth point would not. The points are written by hand
    from the model; the fit itself is checked against scipy's curve_fit in tests/test_calc_reflectance.py."""
    today = _today(mirror)
    coated = today - dt.timedelta(days=55)
    CoatingEvent.objects.create(mirror=mirror, coated_on=coated, metal="al")
    cleaned = coated + dt.timedelta(days=25)
    CleaningEvent.objects.create(mirror=mirror, cleaned_on=cleaned, method="co2_snow")
    for days in (5, 15, 25, 35, 45):
        e, last_clean = 10.5 * days, (10.5 * 25 if days >= 25 else 0.0)
        ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=coated + dt.timedelta(days=days),
                                              value=0.90 - 1e-5 * (e - 0.5 * last_clean), taken_by=users["technician"])
    client.force_login(users["technician"])
    response = client.post(f"/mirrors/{mirror.pk}/measurements/new/", {
        "measured_on": cleaned.isoformat(), "value": f"{0.90 - 1e-5 * 10.5 * 25!r}", "before_cleaning": "on"})
    assert response.status_code == 302
    said = " ".join(str(m) for m in get_messages(response.wsgi_request))
    assert (f"On {cleaned:%d %b %Y} the fit counts 1 band measurement(s) as taken after the cleaning and 1 before "
            "(the measurement's") in said
    state = services.mirror_forecast(mirror)
    assert state.fit.n_points == 6
    assert (state.fit.r0, state.fit.rate_per_hour, state.recovery_fraction) == pytest.approx((0.90, 1e-5, 0.5),
                                                                                             rel=1e-6)
    assert "entered as a measurement; before that day's cleaning" in _page_text(client, mirror)
    ReflectanceMeasurement.objects.filter(before_cleaning=True).update(before_cleaning=False)
    assert services.mirror_forecast(mirror).recovery_fraction != pytest.approx(0.5, rel=1e-3)


def test_before_that_days_cleaning_is_not_said_of_a_day_with_no_cleaning(mirror, users, client):
    """A diff review: a measurement marked "before that day's cleaning" on a day with no cleaning was listed so."""
    today = _today(mirror)
    CoatingEvent.objects.create(mirror=mirror, coated_on=today - dt.timedelta(days=30), metal="al")
    ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=today - dt.timedelta(days=10), value=0.88,
                                          taken_by=users["technician"], before_cleaning=True)
    client.force_login(users["viewer"])
    assert "before that day's cleaning" not in _page_text(client, mirror)


def test_a_cleaning_plan_logged_on_the_subsystem_page_puts_the_cleaning_on_the_mirror(mirror, users, client):
    """A year's review logged the mirror's cleaning plan on the subsystem page all year: the mirror's record kept its
    last cleaning of the year before, and the reflectance fit and the recoat forecast went on as if it had never been
    cleaned. The form asks how it was cleaned, and the cleaning goes on the mirror's record with the service."""
    cleaning_plan = services.plans_a_cleaning_restarts(mirror.subsystem)[0]
    day = _today(mirror) - dt.timedelta(days=2)
    url = f"/subsystems/{mirror.subsystem_id}/service/new/"
    client.force_login(users["technician"])
    sent = {"plan": cleaning_plan.pk, "performed_on": day.isoformat(), "summary": "CO2 snow, whole surface"}
    refused = client.post(url, sent)
    assert refused.status_code == 200 and "cleans the mirror: say how it was cleaned" in refused.content.decode()
    assert not CleaningEvent.objects.filter(mirror=mirror).exists()
    response = client.post(url, {**sent, "cleaning_method": "co2_snow"})
    assert response.status_code == 302
    cleaning = CleaningEvent.objects.get(mirror=mirror)
    assert (cleaning.cleaned_on, cleaning.method) == (day, "co2_snow")
    assert ServiceRecord.objects.filter(plan=cleaning_plan, performed_on=day).count() == 1


def test_a_recoat_plan_is_not_served_on_the_subsystem_page(mirror, users, client):
    """Logged there, the fit would go on from the old coating: the form points to the mirror page's new coating."""
    client.force_login(users["technician"])
    response = client.post(f"/subsystems/{mirror.subsystem_id}/service/new/", {
        "plan": _recoat_plan(mirror).pk, "performed_on": _today(mirror).isoformat(), "summary": "Recoated"})
    assert response.status_code == 200
    assert "is served by a new coating: log it on the mirror page" in html.unescape(response.content.decode())
    assert not ServiceRecord.objects.filter(plan=_recoat_plan(mirror)).exists()


def test_a_cleaning_already_on_the_mirrors_record_that_day_is_not_logged_again_from_the_service_form(
    mirror, users, client
):
    """A diff review logged a cleaning on the mirror page, then the cleaning plan's service of the same day with its
    method: the fit saw two cleanings. The service is logged; the cleaning is not, and the page says so."""
    cleaning_plan = services.plans_a_cleaning_restarts(mirror.subsystem)[0]
    day = _today(mirror) - dt.timedelta(days=1)
    services.cleaning_log(mirror, users["technician"], day, "co2_snow")
    client.force_login(users["technician"])
    url = f"/subsystems/{mirror.subsystem_id}/service/new/"
    sent = {"plan": cleaning_plan.pk, "performed_on": day.isoformat(), "summary": "CO2 snow",
            "cleaning_method": "co2_snow"}
    asked = client.post(url, sent).content.decode()  # the plan's service of that day is there: a second one?
    assert "is this a second one?" in html.unescape(asked)
    token = re.search(r'name="questioned" value="([^"]*)"', asked).group(1)
    response = client.post(url, {**sent, "value_confirmed": "on", "questioned": token}, follow=True)
    assert CleaningEvent.objects.filter(mirror=mirror, cleaned_on=day).count() == 1
    said = " ".join(str(m) for m in get_messages(response.wsgi_request))
    assert "was already on the mirror's record: it was not logged twice" in said
