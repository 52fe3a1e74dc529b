"""The service form asks before it logs what is more often a slip than the truth (logbook.forms.ServiceRecordForm),
each question beside its field, kept with "Log it as entered" ticked on the page that asked
(logbook.forms.QuestionedValueMixin). A site engineer's review: 500 h typed for a 1 h brake check went straight onto
the reliability page's hours, and service logged on a plan whose work order was issued left the order open to be done
again."""
from __future__ import annotations

import datetime as dt
import re

import pytest

from observatory_ops.logbook.models import ServiceRecord
from observatory_ops.planning.services import site_today
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import services as workorders

pytestmark = pytest.mark.django_db


@pytest.fixture
def fans(telescope):
    return subsystem_create(telescope, "cooling_fans", "Mirror cell fans",
                            counting_from=site_today(telescope.site) - dt.timedelta(days=200))


def _asked(page) -> str:
    return re.search(r'name="questioned" value="([^"]*)"', page.content.decode()).group(1)


def _form(fans, **more) -> dict:
    plan = fans.plans.first()
    return {"plan": plan.pk, "performed_on": site_today(fans.telescope.site).isoformat(), "hours_spent": "1",
            "summary": plan.name, "findings": "", **more}


def test_hours_far_above_the_plans_estimate_are_asked_about(fans, users, client):
    """Over logbook.forms.HOURS_QUESTION_FACTOR (10) times the plan's estimate (our own factor, common practice, no
    published source)."""
    plan = fans.plans.first()
    estimate = plan.estimated_hours
    url = f"/subsystems/{fans.pk}/service/new/"
    client.force_login(users["technician"])
    sent = _form(fans, hours_spent=f"{50 * estimate:g}")
    page = client.post(url, sent)
    assert page.status_code == 200 and not ServiceRecord.objects.exists()
    assert (f"{50 * estimate:g} h is 50 times the plan&#x27;s estimate of {estimate:g} h: were minutes typed for "
            "hours?") in page.content.decode()
    assert client.post(url, _form(fans, hours_spent=f"{10 * estimate:g}")).status_code == 302  # not above 10 x
    ServiceRecord.objects.all().delete()
    assert client.post(url, {**sent, "value_confirmed": "on", "questioned": _asked(page)}).status_code == 302
    assert ServiceRecord.objects.get().hours_spent == 50 * estimate


def test_a_plan_with_a_work_order_still_to_do_names_the_order_before_its_service_is_logged(fans, users, client):
    plan = fans.plans.first()
    order = workorders.work_order_from_due([plan], users["engineer"], site_today(fans.telescope.site))
    url = f"/subsystems/{fans.pk}/service/new/"
    client.force_login(users["technician"])
    page = client.post(url, _form(fans))
    text = " ".join(page.content.decode().split())
    assert (f"Work order {order.number} (draft) is still to do for this plan: log its work by finishing the order. "
            "Log it here only for work done outside the order, then withdraw the order on its page.") in text
    assert not ServiceRecord.objects.exists()
    assert client.post(url, {**_form(fans), "value_confirmed": "on", "questioned": _asked(page)}).status_code == 302
    assert ServiceRecord.objects.count() == 1
    # Ad hoc work (no plan) and a plan whose order is finished or withdrawn are not asked about.
    workorders.work_order_move(order, "withdraw", users["engineer"], reason="done outside the order")
    ServiceRecord.objects.all().delete()
    assert client.post(url, _form(fans)).status_code == 302


def test_a_service_dated_before_the_unit_entered_service_is_asked_about(fans, users, client):
    """A forecast review fitted a new brake on 3 Dec and logged a service on it dated 1 Jun: it became the plan's
    baseline without a word, and the brake was overdue, counting the nights of the one it replaced. Asked, and kept
    once confirmed (a unit fitted used)."""
    today = site_today(fans.telescope.site)
    fans.in_service_since = today - dt.timedelta(days=2)
    fans.save()
    url = f"/subsystems/{fans.pk}/service/new/"
    client.force_login(users["technician"])
    early = today - dt.timedelta(days=180)
    sent = _form(fans, performed_on=early.isoformat())
    page = client.post(url, sent)
    assert page.status_code == 200 and not ServiceRecord.objects.exists()
    assert (f"{early:%d %b %Y} is before the day Mirror cell fans entered service here "
            f"({fans.in_service_since:%d %b %Y}): the "
            "plan would count this telescope&#x27;s nights from") in page.content.decode()
    assert client.post(url, _form(fans)).status_code == 302  # on or after the day it entered service: not asked
    ServiceRecord.objects.all().delete()
    assert client.post(url, {**sent, "value_confirmed": "on", "questioned": _asked(page)}).status_code == 302
    assert ServiceRecord.objects.get().performed_on == early


def test_a_correction_moving_a_service_before_the_unit_entered_service_is_asked_about(fans, users, client):
    """The correction form asks as the service form does (logbook.forms.CorrectionForm.clean); a date left as it was is
    not asked about again. A forecast review's left-alone list: a correction could move the date there unasked."""
    today = site_today(fans.telescope.site)
    client.force_login(users["technician"])
    assert client.post(f"/subsystems/{fans.pk}/service/new/", _form(fans)).status_code == 302
    original = ServiceRecord.objects.get()
    fans.in_service_since = today - dt.timedelta(days=2)
    fans.save()
    early = today - dt.timedelta(days=180)
    url = f"/service/{original.pk}/correct/"
    sent = {"performed_on": early.isoformat(), "hours_spent": "1", "summary": "Fans cleaned", "findings": "",
            "reason": "typed the wrong day"}
    page = client.post(url, sent)
    assert page.status_code == 200
    assert (f"{early:%d %b %Y} is before the day Mirror cell fans entered service here "
            f"({fans.in_service_since:%d %b %Y})"
            ) in page.content.decode()
    assert ServiceRecord.objects.count() == 1
    assert client.post(url, {**sent, "value_confirmed": "on", "questioned": _asked(page)}).status_code == 302
    assert ServiceRecord.objects.filter(corrects=original).get().performed_on == early


def test_a_correction_keeping_its_date_is_not_asked_about(fans, users, client):
    client.force_login(users["technician"])
    early = site_today(fans.telescope.site) - dt.timedelta(days=30)
    sent = _form(fans, performed_on=early.isoformat())
    assert client.post(f"/subsystems/{fans.pk}/service/new/", sent).status_code == 302
    original = ServiceRecord.objects.get()
    fans.in_service_since = early + dt.timedelta(days=5)  # entered in the register later, after the service
    fans.save()
    page = client.post(f"/service/{original.pk}/correct/", {
        "performed_on": early.isoformat(), "hours_spent": "2", "summary": "Fans cleaned", "findings": "",
        "reason": "two hours, not one"})
    assert page.status_code == 302


def test_a_repair_without_a_plan_dated_before_the_unit_entered_service_is_asked_about(fans, users, client):
    """A reliability review logged a repair (no plan) dated before the fans entered service: nothing was asked, and the
    message said the reliability page counted the failure, which the page left out as the unit replaced's."""
    from observatory_ops.logbook.models import NightUsage
    from observatory_ops.reliability.selectors import BEFORE_LOG, REPLACED_UNIT

    today = site_today(fans.telescope.site)
    fans.in_service_since = today - dt.timedelta(days=100)
    fans.save()
    url = f"/subsystems/{fans.pk}/service/new/"
    client.force_login(users["technician"])
    early = today - dt.timedelta(days=150)
    sent = {"plan": "", "performed_on": early.isoformat(), "hours_spent": "2", "summary": "Fan replaced",
            "findings": "seized bearing", "repaired_failure": "on"}
    page = client.post(url, sent)
    assert page.status_code == 200 and not ServiceRecord.objects.exists()
    assert (f"{early:%d %b %Y} is before the day Mirror cell fans entered service here "
            f"({fans.in_service_since:%d %b %Y}): the "
            "reliability page would take the failure (night of "
            f"{early - dt.timedelta(days=1):%d %b %Y}) for one of the unit it replaced, and leave it out."
            ) in page.content.decode()
    kept = client.post(url, {**sent, "value_confirmed": "on", "questioned": _asked(page)}, follow=True)
    said = " ".join(str(m) for m in kept.context["messages"])
    assert (f"The reliability page leaves its failure (night of {early - dt.timedelta(days=1):%d %b %Y}) out of the "
            f"failures of Mirror cell fans: {REPLACED_UNIT}.") in said
    # Ad hoc work that repaired nothing is not asked about; a repair after the in-service date is counted, and said
    # so, once its nights are logged (this site has none: said too).
    assert client.post(url, {**sent, "repaired_failure": "", "summary": "Looked at"}).status_code == 302
    later = {**sent, "performed_on": (today - dt.timedelta(days=10)).isoformat(), "summary": "Fan replaced again"}
    said = " ".join(str(m) for m in client.post(url, later, follow=True).context["messages"])
    assert f"out of the failures of Mirror cell fans: {BEFORE_LOG}." in said
    NightUsage.objects.create(site=fans.telescope.site, night=today - dt.timedelta(days=60), open_hours=8)
    again = client.post(url, {**later, "summary": "And again"}, follow=True)
    said = " ".join(str(m) for m in again.context["messages"])
    assert (f"The reliability page counts it as a failure on the night of {today - dt.timedelta(days=11):%d %b %Y}."
            in said)


def test_a_repair_the_day_after_the_unit_entered_service_is_asked_about_as_the_reliability_page_counts_it(
        fans, users, client):
    """A diff review: a repair on 02 Nov of a unit in service since 01 Nov was not asked about, while the reliability
    page left its failure (night of 01 Nov) out as the replaced unit's. Asked now by the page's own rule; one on 03 Nov
    is not."""
    today = site_today(fans.telescope.site)
    since = today - dt.timedelta(days=10)
    fans.in_service_since = since
    fans.save()
    url = f"/subsystems/{fans.pk}/service/new/"
    client.force_login(users["technician"])
    sent = {"plan": "", "performed_on": (since + dt.timedelta(days=1)).isoformat(), "hours_spent": "1",
            "summary": "Fan replaced", "findings": "", "repaired_failure": "on"}
    page = client.post(url, sent)
    assert page.status_code == 200 and not ServiceRecord.objects.exists()
    assert (f"{since + dt.timedelta(days=1):%d %b %Y} is the day after the day Mirror cell fans entered service here "
            f"({since:%d %b %Y}): the reliability page would take the failure (night of {since:%d %b %Y})"
            ) in page.content.decode()
    assert client.post(url, {**sent, "performed_on": (since + dt.timedelta(days=2)).isoformat()}).status_code == 302


def test_a_tick_answers_every_question_the_page_showed_and_no_other(fans, users, client):
    """Both questions of the date are shown beside it (a diff review's tick on "a second one?" let the date before the
    unit entered service through unseen); a tick given before the repair box was ticked does not hold for it."""
    today = site_today(fans.telescope.site)
    plan = fans.plans.first()
    url = f"/subsystems/{fans.pk}/service/new/"
    client.force_login(users["technician"])
    early = today - dt.timedelta(days=30)
    assert client.post(url, _form(fans, performed_on=early.isoformat(), summary="First")).status_code == 302
    fans.in_service_since = today - dt.timedelta(days=5)
    fans.save()
    page = client.post(url, _form(fans, performed_on=early.isoformat(), summary="Second"))
    text = page.content.decode()
    assert f"A service of &quot;{plan.name}&quot; is already logged on {early:%d %b %Y}" in text
    assert f"{early:%d %b %Y} is before the day Mirror cell fans entered service here" in text
    # The tick was given for the work without the repair box: ticked now, the repair is asked about again.
    again = client.post(url, _form(fans, performed_on=early.isoformat(), summary="Second", repaired_failure="on",
                                   value_confirmed="on", questioned=_asked(page)))
    assert again.status_code == 200 and ServiceRecord.objects.count() == 1


def test_a_corrected_repair_says_what_the_reliability_page_does_with_its_failure(fans, users, client):
    """A diff review moved a repair before the unit's in-service date: the correction's message said nothing of the
    failure leaving the reliability page, which the service form's says."""
    from observatory_ops.reliability.selectors import REPLACED_UNIT

    today = site_today(fans.telescope.site)
    client.force_login(users["technician"])
    assert client.post(f"/subsystems/{fans.pk}/service/new/", {
        "plan": "", "performed_on": today.isoformat(), "hours_spent": "1", "summary": "Fan replaced", "findings": "",
        "repaired_failure": "on"}).status_code == 302
    original = ServiceRecord.objects.get()
    fans.in_service_since = today - dt.timedelta(days=20)
    fans.save()
    early = today - dt.timedelta(days=40)
    url = f"/service/{original.pk}/correct/"
    sent = {"performed_on": early.isoformat(), "hours_spent": "1", "summary": "Fan replaced", "findings": "",
            "reason": "the day from the paper log"}
    page = client.post(url, sent)
    assert "the reliability page would take the failure" in page.content.decode()
    done = client.post(url, {**sent, "value_confirmed": "on", "questioned": _asked(page)}, follow=True)
    said = " ".join(str(m) for m in done.context["messages"])
    assert f"out of the failures of Mirror cell fans: {REPLACED_UNIT}." in said
