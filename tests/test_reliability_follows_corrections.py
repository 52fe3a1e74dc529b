"""The reliability page's failures follow their service records as corrected, by one rule for both paths: a corrective
work order's records and a repair logged without an order. The failure takes the date of the newest correction in
force, on the subsystem it names; a record withdrawn, with no correction standing after it, counts no failure.

Hand count used throughout (common practice, no published source for the counting; the formula MTBF = T / n and its
chi-squared bounds are NIST/SEMATECH e-Handbook chapter 8, checked in tests/test_calc_reliability.py and taken here
from ``calc.reliability.mtbf``): 100 logged nights from 1 Jan 2026 (1 Jan to 10 Apr), 5 open hours each, so every
subsystem below, counted from 1 Jan (its plans' counting-from date), has 100 x 5 = 500 operating hours. A failure
repaired on day D is placed on the night of D - 1, and the hours up to it are 5 h for each night from 1 Jan through
that night.
"""
from __future__ import annotations

import datetime as dt
import html

import pytest
from django.urls import reverse

from observatory_ops.calc import reliability
from observatory_ops.logbook.models import NightUsage, ServiceRecord
from observatory_ops.logbook.services import service_record_correct
from observatory_ops.registry.services import subsystem_create
from observatory_ops.reliability.selectors import Period, site_reliability
from observatory_ops.workorders.models import WorkOrder
from tests.test_reliability_page import _order

pytestmark = pytest.mark.django_db

START = dt.date(2026, 1, 1)
TODAY = dt.date(2026, 4, 20)


@pytest.fixture
def log(site):
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=START + dt.timedelta(days=i), open_hours=5.0) for i in range(100)
    )
    return site


@pytest.fixture
def parts(log, telescope):
    return {name: subsystem_create(telescope, kind, name, counting_from=START)
            for name, kind in (("Fan A", "cooling_fans"), ("Fan B", "cooling_fans"), ("Focuser", "focus_mechanism"))}


def _repair(site, subsystem, by, day: dt.date, path: str, hours: float = 2.0) -> ServiceRecord:
    """A repair done on ``day``, as each path logs it: a corrective order finished with its service record dated that
    day (``workorders.services.work_order_finish`` writes one per subsystem it names), or a record logged on the
    subsystem's page without an order, marked as the repair of a failure."""
    order = _order(site, [subsystem], by, day) if path == "order" else None
    return ServiceRecord.objects.create(
        subsystem=subsystem, performed_on=day, performed_by=by, created_by=by, hours_spent=hours, summary="repair",
        work_order=order, repaired_failure=order is None,
    )


def _kind(site, code: str, period: Period | None = None):
    return next(k for k in site_reliability(site, TODAY, period).kinds if k.code == code)


PATHS = ("order", "without order")


@pytest.mark.parametrize("path", PATHS)
def test_a_corrected_date_moves_the_failure_to_the_night_before_it(parts, users, recomputes_recorded, path):
    """Logged as repaired on 21 Jan (night of 20 Jan, 20 x 5 = 100 h), corrected to 16 Jan: night of 15 Jan, at
    15 x 5 = 75 h."""
    record = _repair(parts["Fan A"].telescope.site, parts["Fan A"], users["engineer"], dt.date(2026, 1, 21), path)
    service_record_correct(
        record, users["engineer"], "repair, date corrected", performed_on=dt.date(2026, 1, 16), reason="typo")
    fans = _kind(record.subsystem.telescope.site, "cooling_fans")
    [failure] = fans.failures_listed
    assert (failure.night, failure.repaired_on, failure.hours) == (dt.date(2026, 1, 15), dt.date(2026, 1, 16), 75.0)
    assert failure.corrected
    # Fans A and B: 2 x 500 h over 1 failure.
    assert fans.mtbf == reliability.mtbf(1000.0, 1)


@pytest.mark.parametrize("path", PATHS)
def test_the_newest_correction_counts(parts, users, recomputes_recorded, path):
    """21 Jan, corrected to 16 Jan, that corrected again to 18 Jan: night of 17 Jan, 17 x 5 = 85 h."""
    by = users["engineer"]
    first = _repair(parts["Fan A"].telescope.site, parts["Fan A"], by, dt.date(2026, 1, 21), path)
    second = service_record_correct(first, by, "date corrected", performed_on=dt.date(2026, 1, 16), reason="typo")
    service_record_correct(second, by, "date corrected again", performed_on=dt.date(2026, 1, 18), reason="typo")
    [failure] = _kind(first.subsystem.telescope.site, "cooling_fans").failures_listed
    assert (failure.night, failure.hours) == (dt.date(2026, 1, 17), 85.0)


@pytest.mark.parametrize("path", PATHS)
def test_a_withdrawn_record_counts_no_failure_and_no_hours(parts, users, recomputes_recorded, path):
    """Logged on the wrong subsystem, the Focuser, and withdrawn: its kind keeps its 500 h and no failure (only the
    one-sided lower bound), and its corrective hours go too."""
    site = parts["Focuser"].telescope.site
    record = _repair(site, parts["Focuser"], users["engineer"], dt.date(2026, 2, 10), path, hours=3.0)
    service_record_correct(record, users["engineer"], "logged on the wrong subsystem", void=True, reason="typo")
    focus = _kind(site, "focus_mechanism")
    assert (focus.failures, focus.failures_listed, focus.left_out) == (0, [], [])
    assert focus.operating_hours == 500.0
    assert focus.mtbf == reliability.mtbf(500.0, 0)
    assert focus.hours_by_type["corrective"] == 0.0


@pytest.mark.parametrize("path", PATHS)
def test_a_withdrawal_corrected_in_turn_brings_the_failure_back_on_its_date(parts, users, recomputes_recorded, path):
    """Withdrawn, then the withdrawal corrected (a record standing again) dated 1 Mar: night of 28 Feb, at
    (31 + 28) x 5 = 295 h."""
    by = users["engineer"]
    record = _repair(parts["Fan B"].telescope.site, parts["Fan B"], by, dt.date(2026, 2, 10), path)
    withdrawal = service_record_correct(record, by, "withdrawn", void=True, reason="typo")
    service_record_correct(
        withdrawal, by, "it was a repair after all, on 1 Mar", performed_on=dt.date(2026, 3, 1), reason="typo")
    [failure] = _kind(record.subsystem.telescope.site, "cooling_fans").failures_listed
    assert (failure.subsystem, failure.night, failure.hours) == ("T1: Fan B", dt.date(2026, 2, 28), 295.0)


def test_a_correction_naming_another_subsystem_moves_the_failure_there(parts, users):
    """A correction stored naming another subsystem (the logbook's form keeps the original's; one entered otherwise
    may not): the failure is that subsystem's, on the correction's date."""
    by = users["engineer"]
    site = parts["Focuser"].telescope.site
    record = _repair(site, parts["Focuser"], by, dt.date(2026, 2, 10), "order")
    ServiceRecord.objects.create(subsystem=parts["Fan A"], performed_on=dt.date(2026, 2, 11), performed_by=by,
                                 created_by=by, hours_spent=2.0, summary="on the fan", corrects=record,
                                 work_order=record.work_order)
    assert _kind(site, "focus_mechanism").failures == 0
    [failure] = _kind(site, "cooling_fans").failures_listed
    # Night of 10 Feb: (31 + 10) x 5 = 205 h.
    assert (failure.subsystem, failure.night, failure.hours) == ("T1: Fan A", dt.date(2026, 2, 10), 205.0)
    assert failure.order_number == record.work_order.number


def test_a_period_places_the_failure_by_its_corrected_repair_day(parts, users, recomputes_recorded):
    """A period from 17 Jan: the repair corrected from 21 Jan to 16 Jan was done before it, so none of its failures."""
    by = users["engineer"]
    site = parts["Fan A"].telescope.site
    record = _repair(site, parts["Fan A"], by, dt.date(2026, 1, 21), "order")
    assert _kind(site, "cooling_fans", Period(dt.date(2026, 1, 17), TODAY)).failures == 1
    service_record_correct(record, by, "date corrected", performed_on=dt.date(2026, 1, 16), reason="typo")
    assert _kind(site, "cooling_fans", Period(dt.date(2026, 1, 17), TODAY)).failures == 0


def test_an_order_finished_without_a_service_record_still_counts_on_its_finish_night(parts, users):
    """Nothing to correct: the order's failure falls back to the night of its finish time (15:00 on 21 Jan, site
    time: the night of 21 Jan, 21 x 5 = 105 h), as before."""
    _order(parts["Fan A"].telescope.site, [parts["Fan A"]], users["engineer"], dt.date(2026, 1, 21))
    [failure] = _kind(parts["Fan A"].telescope.site, "cooling_fans").failures_listed
    assert (failure.night, failure.hours, failure.corrected) == (dt.date(2026, 1, 21), 105.0, False)


def test_corrections_made_on_the_subsystem_page_reach_the_reliability_page(parts, users, client,
                                                                          recomputes_recorded):
    """As the review did it: the order's record corrected on the subsystem page to a new date (21 -> 16 Jan), and the
    Focuser's record withdrawn ("Withdraw the original record" ticked); a repair without an order corrected 1 -> 6 Mar.
    Fans: Fan A's failure on the night of 15 Jan (75 h), Fan B's on the night of 5 Mar ((31 + 28 + 5) x 5 = 320 h);
    MTBF = (500 + 500) h / 2 failures = 500 h. The Focuser: 500 h, no failure."""
    by = users["engineer"]
    site = parts["Fan A"].telescope.site
    on_order = _repair(site, parts["Fan A"], by, dt.date(2026, 1, 21), "order")
    without = _repair(site, parts["Fan B"], by, dt.date(2026, 3, 1), "without order", hours=1.5)
    wrong = _repair(site, parts["Focuser"], by, dt.date(2026, 2, 10), "order", hours=3.0)
    client.force_login(by)
    for record, day, void in ((on_order, "2026-01-16", ""), (without, "2026-03-06", ""), (wrong, "2026-02-10", "on")):
        answer = client.post(reverse("service-correct", args=[record.pk]),
                             {"performed_on": day, "summary": "corrected", "findings": "", "hours_spent": "",
                              "reason": "dated wrongly", **({"void": void} if void else {})})
        assert answer.status_code == 302
    fans, focus = _kind(site, "cooling_fans"), _kind(site, "focus_mechanism")
    assert [(f.subsystem, f.night, f.hours) for f in fans.failures_listed] == [
        ("T1: Fan A", dt.date(2026, 1, 15), 75.0), ("T1: Fan B", dt.date(2026, 3, 5), 320.0)]
    assert fans.mtbf == reliability.mtbf(1000.0, 2)
    assert fans.mtbf.mtbf_hours == 500.0
    assert fans.hours_by_type["corrective"] == 2.0 + 1.5
    assert (focus.failures, focus.operating_hours, focus.hours_by_type["corrective"]) == (0, 500.0, 0.0)
    page = html.unescape(client.get(reverse("site-reliability", args=[site.slug])).content.decode())
    order = WorkOrder.objects.get(pk=on_order.work_order_id)
    assert (f"{order.number}</a> T1: Fan A: night of 15 Jan 2026 (its service record as corrected), after 75 of "
            "its counted operating hours") in page
    assert ("T1: Fan B: night of 05 Mar 2026 (its service record as corrected), after 320 of its counted operating "
            "hours") in page
    assert "a record withdrawn, with no correction standing after it, counts no failure" in page
