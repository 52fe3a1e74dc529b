"""Hours of a service record may be unknown: a last service back-filled from memory adds no made-up maintenance
hours, and the reliability page says how many records in its window gave none."""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest

from observatory_ops.logbook import services
from observatory_ops.logbook.models import ServiceRecord
from observatory_ops.planning.services import site_today
from observatory_ops.registry.services import subsystem_create
from observatory_ops.reliability.selectors import site_reliability

pytestmark = pytest.mark.django_db


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


@pytest.fixture
def fans(telescope):
    return subsystem_create(telescope, "cooling_fans", "Mirror cell fans",
                            counting_from=site_today(telescope.site) - dt.timedelta(days=200))


def test_the_service_form_leaves_the_hours_empty_and_says_empty_is_not_known(fans, users, client):
    client.force_login(users["technician"])
    page = client.get(f"/subsystems/{fans.pk}/service/new/")
    field = page.context["form"]["hours_spent"]
    assert field.value() is None
    assert "Leave empty if not known (a past service entered from memory): no hours are made up for it." in _text(page)


def test_a_back_filled_service_with_no_hours_is_stored_as_unknown_and_shown_so(fans, users, client):
    day = site_today(fans.telescope.site) - dt.timedelta(days=90)
    plan = fans.plans.first()
    client.force_login(users["technician"])
    response = client.post(f"/subsystems/{fans.pk}/service/new/", {
        "plan": plan.pk, "performed_on": day.isoformat(), "hours_spent": "", "summary": "Filters changed (from the "
        "paper logbook)", "findings": "",
    })
    assert response.status_code == 302
    record = ServiceRecord.objects.get(subsystem=fans)
    assert (record.performed_on, record.hours_spent) == (day, None)
    assert "Filters changed (from the paper logbook) not known" in _text(client.get(fans.get_absolute_url()))


def test_a_correction_left_empty_keeps_the_originals_hours_known_or_not(fans, users, client):
    today = site_today(fans.telescope.site)
    unknown = services.service_record_log(fans, None, today, users["technician"], "fans")
    known = services.service_record_log(fans, None, today, users["technician"], "filters", hours_spent=2.0)
    client.force_login(users["technician"])
    assert "fans (hours not known)" in _text(client.get(f"/service/{unknown.pk}/correct/"))
    assert "filters (2 h)" in _text(client.get(f"/service/{known.pk}/correct/"))
    for original in (unknown, known):
        response = client.post(f"/service/{original.pk}/correct/", {
            "performed_on": original.performed_on.isoformat(), "hours_spent": "", "summary": "corrected",
            "findings": "", "reason": "summary mistyped",
        })
        assert response.status_code == 302
    assert ServiceRecord.objects.get(corrects=unknown).hours_spent is None
    assert ServiceRecord.objects.get(corrects=known).hours_spent == 2.0


def test_the_reliability_page_counts_no_hours_for_unknown_ones_and_says_how_many(fans, users, client):
    today = site_today(fans.telescope.site)
    services.service_record_log(fans, None, today - dt.timedelta(days=30), users["technician"], "cleaned",
                                hours_spent=1.5)
    services.service_record_log(fans, None, today - dt.timedelta(days=60), users["technician"], "back-filled")
    services.service_record_log(fans, None, today - dt.timedelta(days=61), users["technician"], "back-filled")
    report = site_reliability(fans.telescope.site, today)
    assert (report.records_in_window, report.records_without_hours) == (3, 2)
    assert report.hours_total == 1.5  # by hand: only the known 1.5 h
    client.force_login(users["viewer"])
    text = _text(client.get(f"/sites/{fans.telescope.site.slug}/reliability/"))
    assert ("3 service records in these 12 months; 2 of them give no hours (not known) and are not counted below."
            in text)


def test_a_service_form_sent_twice_stores_one_record(fans, users, client):
    """A reviewer pressed Save twice (as a slow connection invites): two identical records, whose hours counted twice
    on the reliability page. The same person's form with the same values within ten minutes is taken as sent twice
    (our own window): the second stores nothing and says so. The same work logged by someone else, or with other
    values, is a record of its own."""
    plan = fans.plans.first()
    day = site_today(fans.telescope.site)
    form = {"plan": plan.pk, "performed_on": day.isoformat(), "hours_spent": "1.5", "summary": "Filters changed",
            "findings": ""}
    client.force_login(users["technician"])
    first = client.post(f"/subsystems/{fans.pk}/service/new/", form, follow=True)
    assert f"Service work logged; the plan '{plan.name}' counts again from {day:%d %b %Y}." in _text(first)
    again = client.post(f"/subsystems/{fans.pk}/service/new/", form, follow=True)
    assert "This service work was already logged at " in _text(again)
    assert "(the form was sent twice); nothing was added." in _text(again)
    assert ServiceRecord.objects.filter(subsystem=fans).count() == 1

    # Another service of the plan that day is asked about first (logbook.forms.ServiceRecordForm), then logged.
    for who, sent in (("technician", {**form, "hours_spent": "2"}), ("engineer", form)):
        client.force_login(users[who])
        page = client.post(f"/subsystems/{fans.pk}/service/new/", sent)
        assert f"A service of &quot;{plan.name}&quot; is already logged on {day:%d %b %Y}" in page.content.decode()
        asked = re.search(r'name="questioned" value="([^"]*)"', page.content.decode()).group(1)
        client.post(f"/subsystems/{fans.pk}/service/new/", {**sent, "value_confirmed": "on", "questioned": asked})
    assert ServiceRecord.objects.filter(subsystem=fans).count() == 3


def test_ad_hoc_service_says_no_plan_restarts(fans, users, client):
    client.force_login(users["technician"])
    response = client.post(f"/subsystems/{fans.pk}/service/new/", {
        "plan": "", "performed_on": site_today(fans.telescope.site).isoformat(), "hours_spent": "0.5",
        "summary": "Looked at a rattle", "findings": "",
    }, follow=True)
    assert "Service work logged (ad hoc work: no plan's counting restarts)." in _text(response)


def test_a_reading_form_sent_twice_stores_one_reading(telescope, users, client):
    from observatory_ops.logbook.models import Reading

    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive",
                             counting_from=site_today(telescope.site) - dt.timedelta(days=30))
    yesterday = site_today(telescope.site) - dt.timedelta(days=1)
    form = {"quantity": "settle_time_s", "value": "0.61", "taken_at": f"{yesterday.isoformat()}T22:30", "note": ""}
    client.force_login(users["technician"])
    client.post(f"/subsystems/{drive.pk}/readings/new/", form)
    again = client.post(f"/subsystems/{drive.pk}/readings/new/", form, follow=True)
    assert "This reading was already logged, with the same values (the form was sent twice); nothing was added." in \
        _text(again)
    assert Reading.objects.filter(subsystem=drive).count() == 1
    client.post(f"/subsystems/{drive.pk}/readings/new/", {**form, "value": "0.62"})
    assert Reading.objects.filter(subsystem=drive).count() == 2


def test_the_admins_service_records_name_people_as_the_pages_do(fans, users, admin_client):
    users["technician"].first_name, users["technician"].last_name = "Ines", "Varga"  # invented
    users["technician"].save()
    services.service_record_log(fans, None, site_today(fans.telescope.site), users["technician"], "Fan seized",
                                repaired_failure=True)
    page = admin_client.get("/admin/logbook/servicerecord/").content.decode()
    assert "Ines Varga" in page and "Repaired a failure" in page


def test_a_correction_says_who_made_it_when_and_why_beside_both_records(site, telescope, users, client):
    """An auditor's review: the subsystem page said "superseded by a correction" with no who or why, the corrector
    only on an unlinked history page. The reason is asked for, and both rows say it with who and when."""
    from observatory_ops.logbook.models import ServiceRecord
    from observatory_ops.registry.services import subsystem_create

    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    by = users["technician"]
    original = ServiceRecord.objects.create(subsystem=fans, performed_on=dt.date(2026, 2, 1), performed_by=by,
                                            created_by=by, hours_spent=1.5, summary="filters")
    client.force_login(users["engineer"])
    form = {"performed_on": "2026-02-01", "hours_spent": "2.5", "summary": "filters", "findings": ""}
    refused = client.post(f"/service/{original.pk}/correct/", form)
    assert refused.status_code == 200 and not ServiceRecord.objects.filter(corrects=original).exists()
    client.post(f"/service/{original.pk}/correct/", {**form, "reason": "  hours of the wrong day  "})
    correction = ServiceRecord.objects.get(corrects=original)
    assert correction.correction_reason == "hours of the wrong day" and correction.created_by == users["engineer"]
    page = _text(client.get(f"/subsystems/{fans.pk}/"))
    assert "superseded by a correction by engineer on " in page and ": hours of the wrong day" in page
    assert "corrects the record of 01 Feb 2026, by engineer on " in page
    # The service-records CSV says it too, with who entered each record and when.
    import csv
    import io

    rows = list(csv.DictReader(io.StringIO(client.get(f"/sites/{site.slug}/service-records.csv", {
        "from": "2026-01-01", "to": site_today(site).isoformat()}).content.decode("utf-8-sig"))))
    assert [(r["entered_by"], r["correction_reason"]) for r in rows] == [("technician", ""),
                                                                         ("engineer", "hours of the wrong day")]


def test_the_correction_service_itself_refuses_a_correction_without_a_reason(fans, users):
    """A diff review: only the form asked why, so a script or the API could correct a record and say nothing. The
    service refuses it and stores nothing."""
    from django.core.exceptions import ValidationError

    record = services.service_record_log(fans, None, site_today(fans.telescope.site), users["technician"], "filters")
    for blank in ("", "   "):
        with pytest.raises(ValidationError, match="say why the record is corrected"):
            services.service_record_correct(record, users["engineer"], "filters", hours_spent=2.0, reason=blank)
    assert list(ServiceRecord.objects.filter(subsystem=fans)) == [record]
