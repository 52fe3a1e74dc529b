"""Fixes from a review of the record: a corrected service date says how late the work came on that date, a mirror form
sent twice stores one event, and the admin's add page for reflectance measurements holds a measurement to what the
mirror page's form holds it to.

How late is worked by hand, as in tests/test_service_lateness.py: a plan counting from 1 Jan 2025 with a 365-day
calendar limit passes it on 1 Jan 2026; work on 31 Jan 2026 comes 30 days after, work on 20 Dec 2025 on time.
"""
from __future__ import annotations

import datetime as dt
import re

import pytest
from django.contrib.messages import get_messages
from django.utils import timezone
from django.utils.html import strip_tags
from test_mirror_record import mirror  # noqa: F401  (the fixture, used by name)
from test_service_lateness import late_plan  # noqa: F401  (the fixture, used by name)

from observatory_ops.logbook import services
from observatory_ops.logbook.models import ServiceRecord
from observatory_ops.mirrors import services as mirrors
from observatory_ops.mirrors.forms import ABOVE_FRESH_MARGIN
from observatory_ops.mirrors.models import CleaningEvent, CoatingEvent, ReflectanceMeasurement
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Subsystem

pytestmark = pytest.mark.django_db

LIMIT_PASSED = dt.date(2026, 1, 1)  # 1 Jan 2025 + 365 days (the late_plan fixture)


def _text(response) -> str:
    return re.sub(r"\s+", " ", strip_tags(response.content.decode())).replace("&quot;", '"')


def _messages(response) -> list[str]:
    return [str(m) for m in get_messages(response.wsgi_request)]


# --- 1. a corrected service date is late, or not, by its own date ---------------------------------------------------


def test_a_service_moved_to_before_the_limit_was_passed_is_no_longer_late(late_plan, users, client):  # noqa: F811
    record = services.service_record_log(late_plan.subsystem, late_plan, dt.date(2026, 1, 31), users["technician"],
                                         "Filters replaced")
    assert record.days_after_limit == 30
    corrected = services.service_record_correct(record, users["engineer"], "Filters replaced",
                                                performed_on=dt.date(2025, 12, 20), reason="typo")
    assert (corrected.limit_passed_on, corrected.days_after_limit) == (None, None)
    assert PlanStatus.objects.get(plan=late_plan).last_service_on == dt.date(2025, 12, 20)  # counts from the correction

    client.force_login(users["viewer"])
    csv_text = client.get(f"/sites/{late_plan.subsystem.telescope.site.slug}/service-records.csv"
                          "?from=2025-01-01&to=2026-12-31").content.decode()
    # No limit, no days after it.
    assert ("2025-12-20,T1,Cell fans,Cooling fans and filters,Replace fan filters,on time: before its limit was "
            "passed,,," in csv_text)
    page = client.get(late_plan.subsystem.get_absolute_url()).content.decode()
    assert "-12 days" not in page and "days after its limit was passed" in page  # only the superseded record says so


def test_a_service_moved_past_the_limit_comes_late(late_plan, users):  # noqa: F811
    record = services.service_record_log(late_plan.subsystem, late_plan, dt.date(2025, 12, 20), users["technician"],
                                         "Filters replaced")
    assert record.limit_passed_on is None
    corrected = services.service_record_correct(record, users["engineer"], "Filters replaced",
                                                performed_on=dt.date(2026, 1, 31), reason="typo")
    assert (corrected.limit_passed_on, corrected.days_after_limit) == (LIMIT_PASSED, 30)


def test_the_reviewers_service_moved_from_december_to_june_is_not_172_days_late(telescope, users):
    """The reviewer's case: a limit passed on 20 Nov 2026, work logged on 4 Dec 2026 (14 days late), corrected to
    1 Jun 2026, which the page showed as "-172 days after its limit was passed"."""
    fans = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name="Cell fans")
    plan = ServicePlan.objects.create(subsystem=fans, name="Replace fan filters", counting_from=dt.date(2025, 11, 20),
                                      counting_from_given=True)
    Trigger.objects.create(plan=plan, metric="calendar_days", limit=365)  # 20 Nov 2025 + 365 days = 20 Nov 2026
    site_recompute(telescope.site)
    record = services.service_record_log(fans, plan, dt.date(2026, 12, 4), users["technician"], "Filters replaced")
    assert (record.limit_passed_on, record.days_after_limit) == (dt.date(2026, 11, 20), 14)
    corrected = services.service_record_correct(record, users["engineer"], "Filters replaced",
                                                performed_on=dt.date(2026, 6, 1), reason="typo")
    assert corrected.limit_passed_on is None


def test_correcting_a_late_service_a_later_one_followed_keeps_how_late_it_came(late_plan, users):  # noqa: F811
    """The limit the corrected work answered counts from the service before it, not from one logged after it."""
    late = services.service_record_log(late_plan.subsystem, late_plan, dt.date(2026, 1, 31), users["technician"],
                                       "Filters replaced")
    services.service_record_log(late_plan.subsystem, late_plan, dt.date(2026, 3, 1), users["technician"],
                                "Filters checked")
    summary_only = services.service_record_correct(
        late, users["engineer"], "Filters replaced, both fans", reason="typo")
    assert (summary_only.limit_passed_on, summary_only.days_after_limit) == (LIMIT_PASSED, 30)
    redated = services.service_record_correct(summary_only, users["engineer"], "Filters replaced, both fans",
                                              performed_on=dt.date(2026, 1, 21), reason="typo")
    assert (redated.limit_passed_on, redated.days_after_limit) == (LIMIT_PASSED, 20)
    assert PlanStatus.objects.get(plan=late_plan).last_service_on == dt.date(2026, 3, 1)  # the later one still counts


def test_working_it_out_again_leaves_no_trace_on_the_record_or_its_history(late_plan, users):  # noqa: F811
    """The original is left out only while the limit is read (a savepoint rolled back): it stays as it was."""
    record = services.service_record_log(late_plan.subsystem, late_plan, dt.date(2026, 1, 31), users["technician"],
                                         "Filters replaced")
    history_before = list(record.history.values_list("history_id", "void"))
    services.service_record_correct(
        record, users["engineer"], "Filters replaced", performed_on=dt.date(2026, 1, 21), reason="typo")
    record.refresh_from_db()
    assert record.void is False
    assert list(record.history.values_list("history_id", "void")) == history_before
    assert ServiceRecord.objects.filter(plan=late_plan).count() == 2


def test_a_withdrawal_records_no_work_and_so_no_lateness(late_plan, users):  # noqa: F811
    record = services.service_record_log(late_plan.subsystem, late_plan, dt.date(2026, 1, 31), users["technician"],
                                         "Filters replaced")
    withdrawal = services.service_record_correct(
        record, users["engineer"], "Logged on the wrong plan", void=True, reason="typo")
    assert withdrawal.limit_passed_on is None
    assert PlanStatus.objects.get(plan=late_plan).status == "overdue"  # as before the withdrawn work


# --- 2. a mirror form sent twice stores one event -------------------------------------------------------------------


def test_a_measurement_sent_twice_is_stored_once_and_the_second_send_says_so(mirror, users, client):  # noqa: F811
    client.force_login(users["technician"])
    sent = {"measured_on": site_today(mirror.subsystem.telescope.site).isoformat(), "value": "0.84",
            "position": "centre", "instrument": "handheld reflectometer"}
    url = f"/mirrors/{mirror.pk}/measurements/new/"
    assert client.post(url, sent).status_code == 302
    again = client.post(url, sent)
    assert again.status_code == 302
    assert _messages(again)[-1] == ("This reflectance measurement was already logged, with the same values (the form "
                                    "was sent twice); nothing was added.")
    assert ReflectanceMeasurement.objects.filter(mirror=mirror).count() == 1
    # Another place on the mirror is another measurement.
    assert client.post(url, {**sent, "position": "r=0.7 N"}).status_code == 302
    assert ReflectanceMeasurement.objects.filter(mirror=mirror).count() == 2
    # The same value measured again later (a diff review: a repeat at the centre was dropped as a second send) is
    # one of its own: a send counts as repeated within logbook.selectors.RESENT_WITHIN only.
    ReflectanceMeasurement.history.update(history_date=timezone.now() - dt.timedelta(hours=1))
    assert client.post(url, sent).status_code == 302
    assert ReflectanceMeasurement.objects.filter(mirror=mirror).count() == 3


def test_a_cleaning_sent_twice_is_stored_once_with_one_set_of_service_records(mirror, users, client):  # noqa: F811
    client.force_login(users["technician"])
    sent = {"cleaned_on": (site_today(mirror.subsystem.telescope.site) - dt.timedelta(days=3)).isoformat(),
            "method": "co2_snow", "note": ""}
    url = f"/mirrors/{mirror.pk}/cleanings/new/"
    assert client.post(url, sent).status_code == 302
    records = ServiceRecord.objects.count()
    again = client.post(url, sent)
    assert _messages(again)[-1] == ("This cleaning was already logged, with the same values (the form was sent "
                                    "twice); nothing was added.")
    assert (CleaningEvent.objects.filter(mirror=mirror).count(), ServiceRecord.objects.count()) == (1, records)
    # Another method the same day is another cleaning.
    assert client.post(url, {**sent, "method": "wash"}).status_code == 302
    assert CleaningEvent.objects.filter(mirror=mirror).count() == 2


def test_a_coating_sent_twice_is_stored_once(mirror, users, client):  # noqa: F811
    client.force_login(users["technician"])
    sent = {"coated_on": (site_today(mirror.subsystem.telescope.site) - dt.timedelta(days=3)).isoformat(),
            "metal": "al", "layers": "SiO2:100", "note": ""}
    url = f"/mirrors/{mirror.pk}/coatings/new/"
    assert client.post(url, sent).status_code == 302
    records = ServiceRecord.objects.count()
    assert "This new coating was already logged" in _messages(client.post(url, sent))[-1]
    assert (CoatingEvent.objects.filter(mirror=mirror).count(), ServiceRecord.objects.count()) == (1, records)


# --- 3. the admin's add page holds a measurement to the mirror page's checks ----------------------------------------


@pytest.fixture
def coated(mirror):  # noqa: F811
    """The mirror, bare aluminium coated 200 days ago (its fresh band mean about 0.9)."""
    CoatingEvent.objects.create(mirror=mirror, coated_on=site_today(mirror.subsystem.telescope.site)
                                - dt.timedelta(days=200), metal="al")
    return mirror


def _admin_add(admin_client, mirror, users, **sent):  # noqa: F811
    return admin_client.post("/admin/mirrors/reflectancemeasurement/add/", {
        "mirror": mirror.pk, "measured_on": site_today(mirror.subsystem.telescope.site).isoformat(), "value": "0.85",
        "wavelength_nm": "", "position": "", "instrument": "", "taken_by": users["technician"].pk, **sent,
    })


@pytest.mark.parametrize("typed", ["-5", "1e12"])
def test_the_admin_refuses_a_wavelength_outside_the_optical_data(coated, users, admin_client, typed):
    response = _admin_add(admin_client, coated, users, wavelength_nm=typed)
    assert response.status_code == 200
    # 265.2 to 1937 nm: MEASURABLE_NM, as the mirror page's form says it (tests/test_measurement_wavelength.py).
    assert f"Wavelength: {float(typed):g} nm is outside 265.2 to 1937 nm" in _text(response)
    assert not ReflectanceMeasurement.objects.exists()


def test_the_admin_asks_about_a_band_mean_above_fresh_and_stores_it_once_ticked(coated, users, admin_client):
    fresh, _ = mirrors.fresh_band_on(coated, site_today(coated.subsystem.telescope.site))
    assert 0.99 > fresh + ABOVE_FRESH_MARGIN
    response = _admin_add(admin_client, coated, users, value="0.99")
    assert response.status_code == 200
    assert 'is above the fresh value of the coating of' in _text(response)
    assert 'tick "The value is right as measured" and save it again' in _text(response)
    assert not ReflectanceMeasurement.objects.exists()
    asked = re.search(r'name="questioned" value="([^"]*)"', response.content.decode()).group(1)
    assert _admin_add(admin_client, coated, users, value="0.98", value_confirmed="on",
                      questioned=asked).status_code == 200  # the tick was for 0.99
    assert _admin_add(admin_client, coated, users, value="0.99", value_confirmed="on",
                      questioned=asked).status_code == 302
    assert list(ReflectanceMeasurement.objects.values_list("value", flat=True)) == [0.99]


def test_the_admin_stores_a_measurement_within_the_checks_at_once(coated, users, admin_client):
    assert _admin_add(admin_client, coated, users, value="0.85").status_code == 302
    assert _admin_add(admin_client, coated, users, value="0.80", wavelength_nm="650").status_code == 302
    assert ReflectanceMeasurement.objects.count() == 2
