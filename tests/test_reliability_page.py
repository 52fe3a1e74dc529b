"""Specifications for the reliability page: what counts as a failure, whose hours count, and the figures per kind."""
from __future__ import annotations

import datetime as dt

import pytest
from django.contrib.auth.models import User
from django.urls import reverse
from django.utils import timezone
from lifelines import WeibullFitter
from scipy import stats

from observatory_ops.calc import reliability
from observatory_ops.logbook.models import NightUsage, ServiceRecord
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_create
from observatory_ops.reliability.selectors import (
    AFTER_RETIRED,
    BEFORE_LOG,
    BEFORE_START,
    FIRST_NIGHT,
    IN_SERVICE_SINCE,
    PLANS_COUNTING_FROM,
    REGISTERED,
    REPLACED_UNIT,
    Start,
    left_out_reason,
    site_reliability,
)
from observatory_ops.workorders.models import State, WorkOrder
from observatory_ops.workorders.services import work_order_ad_hoc

pytestmark = pytest.mark.django_db

START = dt.date(2026, 1, 1)
TODAY = dt.date(2026, 4, 20)


def _order(site, subsystems, by, night: dt.date, state=State.COUNTERSIGNED, kind=WorkOrder.Type.CORRECTIVE, hours=2.0):
    """An order on ``subsystems`` whose work was finished on the afternoon of ``night`` (site time)."""
    order = work_order_ad_hoc(site, subsystems, "Fault", by, order_type=kind)
    order.state, order.actual_hours = state, hours
    if state in (State.FINISHED, State.COUNTERSIGNED):
        order.finished_at = timezone.make_aware(dt.datetime.combine(night, dt.time(15, 0)), site.zone)
    order.save()
    return order


@pytest.fixture
def record(site, telescope, users):
    """100 logged nights from 1 Jan 2026, 5 open hours each; two fans, one fan retired on 1 Feb, an encoder."""
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=START + dt.timedelta(days=i), open_hours=5.0) for i in range(100)
    )
    fan_a, fan_b, fan_c = (
        subsystem_create(telescope, "cooling_fans", name, counting_from=START) for name in ("Fan A", "Fan B", "Fan C")
    )
    fan_c.retired_on = dt.date(2026, 2, 1)
    fan_c.save()
    encoder = subsystem_create(telescope, "encoder", "Axis 1 encoder", counting_from=START)
    engineer = users["engineer"]
    _order(site, [fan_a], engineer, dt.date(2026, 1, 21))  # 21 nights: 105 h
    _order(site, [fan_a], engineer, dt.date(2026, 2, 20), state=State.FINISHED)  # 51 nights: 255 h
    _order(site, [fan_b], engineer, dt.date(2026, 3, 1), hours=3.0)  # 60 nights: 300 h
    _order(site, [encoder], engineer, dt.date(2026, 1, 11))  # 11 nights: 55 h
    # Not failures: a corrective order still underway, one withdrawn, and finished preventive work.
    _order(site, [fan_b], engineer, dt.date(2026, 4, 1), state=State.UNDERWAY)
    _order(site, [fan_b], engineer, dt.date(2026, 4, 2), state=State.WITHDRAWN)
    _order(site, [fan_a, fan_b], engineer, dt.date(2026, 4, 5), kind=WorkOrder.Type.PREVENTIVE, hours=4.0)
    _order(site, [encoder], engineer, dt.date(2026, 4, 6), kind=WorkOrder.Type.CONDITION_BASED, hours=None)
    return site


def test_fans_failures_hours_mtbf_and_fit_by_hand(record):
    fans = next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")
    # Hours: 100 nights x 5 h for fans A and B in service; fan C retired on 1 Feb after 31 nights (155 h).
    assert (fans.in_service, fans.retired, fans.failures) == (2, 1, 3)
    assert fans.operating_hours == pytest.approx(1155.0)
    # Times between failures (hand computation): fan A 105 then 150 h, fan B 300 h; running 245, 200, 155 h.
    assert sorted(fans.between) == [105.0, 150.0, 300.0]
    assert sorted(fans.running) == [155.0, 200.0, 245.0]
    assert fans.mtbf == reliability.mtbf(1155.0, 3)
    assert fans.mtbf.mtbf_hours == pytest.approx(385.0)
    # The fit agrees with lifelines.WeibullFitter on the same censored data (independent reference).
    reference = WeibullFitter().fit([105, 150, 300, 155, 200, 245], event_observed=[1, 1, 1, 0, 0, 0])
    assert fans.fit.beta == pytest.approx(reference.rho_, rel=1e-5)
    assert fans.fit.eta_hours == pytest.approx(reference.lambda_, rel=1e-5)


def test_maintenance_hours_are_the_service_records_hours_by_the_type_of_order_that_wrote_them(record, users):
    """The hours of the service records in the last 12 months: a finished order's records carry its hours shared
    among its subsystems (workorders.services), so they are summed as they are, by the order's type; service
    logged with neither an order nor a plan has its own column; a corrected record counts as corrected, a withdrawn
    one not."""
    fan_a, fan_b = (Subsystem.objects.get(name=n) for n in ("Fan A", "Fan B"))
    encoder = Subsystem.objects.get(name="Axis 1 encoder")
    preventive = WorkOrder.objects.get(order_type=WorkOrder.Type.PREVENTIVE)
    corrective = WorkOrder.objects.filter(order_type=WorkOrder.Type.CORRECTIVE, state=State.COUNTERSIGNED).first()
    by = users["engineer"]

    def logged(subsystem, hours, order=None, on=dt.date(2026, 4, 5), **more):
        return ServiceRecord.objects.create(subsystem=subsystem, performed_on=on, performed_by=by, created_by=by,
                                            hours_spent=hours, summary="work", work_order=order, **more)

    logged(fan_a, 2.0, preventive)
    logged(fan_b, 2.0, preventive)
    logged(fan_a, 2.5, corrective)
    logged(encoder, 1.5)  # from the subsystem page, no order
    wrong = logged(encoder, 9.0)
    logged(encoder, 0.5, corrects=wrong)  # the correction counts, the record it corrects does not
    withdrawn = logged(fan_b, 6.0)
    logged(fan_b, 0.0, corrects=withdrawn, void=True)
    logged(fan_b, 5.0, on=TODAY - dt.timedelta(days=400))  # before the 12 months
    report = site_reliability(record, TODAY)
    fans = next(k for k in report.kinds if k.code == "cooling_fans")
    encoders = next(k for k in report.kinds if k.code == "encoder")
    assert fans.hours_by_type == {"preventive": 4.0, "corrective": 2.5, "condition": 0.0, "without_order": 0.0}
    assert encoders.hours_by_type == {"preventive": 0.0, "corrective": 0.0, "condition": 0.0, "without_order": 2.0}
    assert report.hours_by_type == {"preventive": 4.0, "corrective": 2.5, "condition": 0.0, "without_order": 2.0}
    assert report.records_in_window == 5


def test_service_logged_against_a_plan_without_an_order_counts_as_preventive(record, users):
    """A reviewer's year-end table read "preventive 0.0 h" for a year of scheduled service logged on subsystem pages:
    service against one of the subsystem's plans is planned work (EN 13306: preventive maintenance), whether or not
    a work order was printed for it. Only service with neither an order nor a plan has its own column."""
    encoder = Subsystem.objects.get(name="Axis 1 encoder")
    by = users["engineer"]
    ServiceRecord.objects.create(subsystem=encoder, plan=encoder.plans.first(), performed_on=dt.date(2026, 4, 5),
                                 performed_by=by, created_by=by, hours_spent=1.5, summary="scheduled check")
    ServiceRecord.objects.create(subsystem=encoder, performed_on=dt.date(2026, 4, 6), performed_by=by, created_by=by,
                                 hours_spent=0.5, summary="looked at it")
    encoders = next(k for k in site_reliability(record, TODAY).kinds if k.code == "encoder")
    assert encoders.hours_by_type == {"preventive": 1.5, "corrective": 0.0, "condition": 0.0, "without_order": 0.5}


def test_a_repair_entered_days_later_is_placed_where_it_was_done_and_listed_with_its_order(record, users, client):
    """A repair done on 30 Mar and entered on 4 Apr: its failure is the night before the day the work was done (the
    day the finish form gives, stored on the order's service records), not the night it was entered, so the hours up
    to it and the intervals are those the subsystem ran. The page lists each failure counted with its order."""
    fan_b = Subsystem.objects.get(name="Fan B")
    order = _order(record, [fan_b], users["engineer"], dt.date(2026, 4, 4))
    ServiceRecord.objects.create(subsystem=fan_b, performed_on=dt.date(2026, 3, 30), performed_by=users["engineer"],
                                 created_by=users["engineer"], hours_spent=1.0, summary="fan replaced",
                                 work_order=order)
    fans = next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")
    listed = [f for f in fans.failures_listed if f.order_id == order.pk]
    assert [(f.subsystem, f.night) for f in listed] == [("T1: Fan B", dt.date(2026, 3, 29))]
    # 5 open hours a night from 1 Jan (its counting-from date) through the night of 29 Mar: 88 nights.
    assert listed[0].hours == 88 * 5.0

    client.force_login(users["viewer"])
    page = client.get(reverse("site-reliability", args=[record.slug])).content.decode()
    assert (f'<a href="/workorders/{order.pk}/">{order.number}</a> T1: Fan B: night of 29 Mar 2026, after 440 of its '
            "counted operating hours") in page


def test_a_repair_logged_without_an_order_counts_as_a_failure_until_withdrawn(record, users, client):
    """A reviewer could not record a fan repaired on the spot in October: the service form now asks whether the work
    repaired a failure. Marked so, it counts as a failure (the night before its date) and its hours as corrective; a
    correction keeps the mark; a withdrawn record counts nothing."""
    from observatory_ops.logbook.services import service_record_correct

    fan_b = Subsystem.objects.get(name="Fan B")

    def fans():
        return next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")

    corrective_before = fans().hours_by_type["corrective"]
    client.force_login(users["technician"])
    client.post(f"/subsystems/{fan_b.pk}/service/new/", {
        "plan": "", "performed_on": "2026-04-10", "hours_spent": "1.25", "summary": "Fan seized; replaced",
        "findings": "", "repaired_failure": "on",
    })
    record_ = ServiceRecord.objects.get(subsystem=fan_b, repaired_failure=True)
    listed = [f for f in fans().failures_listed if f.order_id is None]
    assert [(f.subsystem, f.night, f.order_number) for f in listed] == [("T1: Fan B", dt.date(2026, 4, 9), "")]
    assert fans().hours_by_type["corrective"] == corrective_before + 1.25
    page = client.get(reverse("site-reliability", args=[record.slug])).content.decode()
    assert (f'<a href="/subsystems/{fan_b.pk}/">logged without an order</a>: T1: Fan B: night of 09 Apr 2026'
            in page)
    assert "repair of a failure (no work order)" in client.get(fan_b.get_absolute_url()).content.decode()

    corrected = service_record_correct(record_, users["engineer"], "Fan seized; replaced (bearing)",
                                       performed_on=dt.date(2026, 4, 11), reason="typo")
    assert corrected.repaired_failure
    assert [f.night for f in fans().failures_listed if f.order_id is None] == [dt.date(2026, 4, 10)]
    service_record_correct(corrected, users["engineer"], "logged in error", void=True, reason="typo")
    assert [f for f in fans().failures_listed if f.order_id is None] == []


def test_one_failure_gives_an_interval_but_no_fit(record):
    encoders = next(k for k in site_reliability(record, TODAY).kinds if k.code == "encoder")
    assert encoders.failures == 1 and encoders.fit is None
    assert encoders.no_fit == "too few failures for a fit: 1"
    assert encoders.mtbf.lower_hours < 500.0 < encoders.mtbf.upper_hours


def test_the_selector_reads_a_fixed_number_of_queries(record, telescope, django_assert_max_num_queries):
    for i in range(10):
        subsystem_create(telescope, "brake", f"Brake {i}", counting_from=START)
    with django_assert_max_num_queries(8):  # the usage log reads the site's closures too (planning.UsageLog)
        site_reliability(record, TODAY)


def test_the_page_shows_the_figures_and_says_how_they_are_made(record, client):
    client.force_login(User.objects.get(username="viewer"))
    dashboard = client.get(reverse("site-dashboard", args=[record.slug])).content.decode()
    url = reverse("site-reliability", args=[record.slug])
    assert url in dashboard
    page = client.get(url).content.decode()
    assert "Cooling fans and filters" in page and "385 h" in page
    assert "too few failures for a fit: 1" in page
    for words in ("corrective work order that was finished or countersigned",
                  "open hours of the nightly log of the subsystem", "2T / χ²(0.95; 2n+2)", "NIST/SEMATECH e-Handbook",
                  "<svg"):
        assert words in page


def test_a_subsystem_with_neither_plans_nor_a_history_entry_counts_from_the_first_logged_night(record, telescope):
    """Registered before the history was kept, and without plans: nothing says when it entered service, so it is
    counted from the first logged night (it used to stop the page with a KeyError)."""
    old = Subsystem.objects.create(telescope=telescope, kind="computers", name="Old control PC")
    Subsystem.history.filter(id=old.pk).delete()
    computers = next(k for k in site_reliability(record, TODAY).kinds if k.code == "computers")
    assert computers.operating_hours == 100 * 5.0  # every logged night, 5 open hours each
    assert computers.start_bases == FIRST_NIGHT
    assert computers.no_fit == "no failure to fit"
    # Its age at the first logged night is not known: its running interval is not the fit's (the MTBF's hours, yes).
    assert computers.unknown_age == ["T1: Old control PC"] and computers.running == []


def test_a_subsystem_in_service_before_the_log_is_fitted_from_its_first_failure_seen(record, telescope, users, client):
    """Fan E has been in service since 1 Dec 2025, before the log began on 1 Jan 2026: how long it had run by then
    nobody knows. By hand (5 open hours a night, 100 nights): its failures on the nights of 20 Jan, 1 Mar and 31 Mar
    come at 100, 300 and 450 h of the log. Its first interval (100 h counted, of an age not known) is left out of the
    fit; then 200 and 150 h from new, and 50 h running since. The MTBF counts all: with the fixture's fans (1,155 h,
    3 failures), T = 1,655 h, n = 6."""
    fan_e = subsystem_create(telescope, "cooling_fans", "Fan E", counting_from=START,
                             in_service_since=dt.date(2025, 12, 1))
    for night in (dt.date(2026, 1, 20), dt.date(2026, 3, 1), dt.date(2026, 3, 31)):
        _order(record, [fan_e], users["engineer"], night)
    fans = next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")
    assert (fans.failures, fans.operating_hours) == (6, pytest.approx(1655.0))
    assert fans.mtbf.mtbf_hours == pytest.approx(1655.0 / 6)
    assert fans.unknown_age == ["T1: Fan E"] and fans.delayed_entries == 0
    assert sorted(fans.between) == [105.0, 150.0, 150.0, 200.0, 300.0]
    assert sorted(fans.running) == [50.0, 155.0, 200.0, 245.0]
    # lifelines.WeibullFitter on the same censored data (independent reference; every interval fitted from new).
    reference = WeibullFitter().fit([105, 150, 150, 200, 300, 50, 155, 200, 245],
                                    event_observed=[1, 1, 1, 1, 1, 0, 0, 0, 0])
    assert fans.fit.beta == pytest.approx(reference.rho_, rel=1e-5)
    assert fans.fit.eta_hours == pytest.approx(reference.lambda_, rel=1e-5)
    assert fans.fit_inputs == ("between failures: 105, 150, 150, 200, 300 h; still running (censored): 50, 155, 200, "
                               "245 h")
    # Said once, beside the fit, not again among the hours fitted (a phone review found it twice).
    assert "1 first interval (T1: Fan E) is left out of the fit" in fans.entry_note
    client.force_login(users["viewer"])
    page = client.get(reverse("site-reliability", args=[record.slug])).content.decode().replace("&#x27;", "'")
    assert ("1 first interval (T1: Fan E) is left out of the fit, as its subsystem's hours before the log began are "
            "not known.</span>") in page


def test_a_failure_with_no_operating_hours_logged_says_the_mtbf_cannot_be_estimated(site, telescope, users, client):
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=START)
    _order(site, [fans], users["engineer"], dt.date(2026, 1, 5))
    client.force_login(users["viewer"])
    page = client.get(reverse("site-reliability", args=[site.slug])).content.decode()
    assert "no operating hours logged: not estimable" in page and "0 h (0 to 0 h)" not in page
    assert "Left out: T1: Fans on the night of 05 Jan 2026 (before the first logged night" in page


def test_the_page_lists_the_hours_each_fit_was_made_from(record, client):
    """So that anyone can fit them again. By hand from the fixture (5 open hours a night): fan A fails at 105 h and
    at 255 h (150 h later), then runs 245 h to the last night; fan B fails at 300 h and runs 200 h; fan C, retired
    on 1 February, ran 155 h."""
    fans = next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")
    assert fans.fit_inputs == "between failures: 105, 150, 300 h; still running (censored): 155, 200, 245 h"
    client.force_login(User.objects.get(username="viewer"))
    assert fans.fit_inputs in client.get(reverse("site-reliability", args=[record.slug])).content.decode()


def test_a_subsystem_with_an_in_service_date_counts_its_hours_from_that_date(record):
    """Fan B went into service on 1 Feb 2026, though its plans count from 1 Jan. By hand (5 open hours a night):
    the 31 January nights (155 h) drop out, so its failure on the night of 1 Mar comes 29 nights (145 h) after it
    went into service, and it has run 200 h since; the fans' hours are 1,155 - 155 = 1,000 h."""
    Subsystem.objects.filter(name="Fan B").update(in_service_since=dt.date(2026, 2, 1))
    fans = next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")
    assert fans.operating_hours == pytest.approx(1000.0)
    assert sorted(fans.between) == [105.0, 145.0, 150.0]
    assert sorted(fans.running) == [155.0, 200.0, 245.0]
    assert [(s.subsystem, s.day, s.basis) for s in fans.starts] == [
        ("T1: Fan A", START, PLANS_COUNTING_FROM),
        ("T1: Fan B", dt.date(2026, 2, 1), IN_SERVICE_SINCE),
        ("T1: Fan C", START, PLANS_COUNTING_FROM),
    ]
    assert fans.start_bases == "the in-service date given (1), the plans' earliest counting-from date (2)"


def test_an_in_service_date_before_its_plans_counting_from_date_counts_the_nights_between(record, telescope):
    """A spare encoder registered with plans counting from 1 Mar 2026 but in service since 1 Jan: it counts all
    100 logged nights (500 h), not the 51 from 1 Mar (255 h)."""
    spare = subsystem_create(telescope, "encoder", "Axis 2 encoder", counting_from=dt.date(2026, 3, 1),
                             in_service_since=START)
    encoders = next(k for k in site_reliability(record, TODAY).kinds if k.code == "encoder")
    assert encoders.operating_hours == pytest.approx(500.0 + 500.0)
    assert next(s for s in encoders.starts if s.subsystem == f"T1: {spare.name}").basis == IN_SERVICE_SINCE


def test_without_an_in_service_date_the_hours_count_as_before(record, telescope):
    """None of the fixture's subsystems has an in-service date: each counts from its plans' earliest date, as the
    first test's hand-computed figures show; one registered without plans counts from the day it was registered
    (the site's local date of its entry in the history)."""
    unplanned = Subsystem.objects.create(telescope=telescope, kind="computers", name="Dome PC")
    registered = unplanned.history.get().history_date.astimezone(record.zone).date()
    kinds = site_reliability(record, TODAY).kinds
    for kind in kinds:
        if kind.code != "computers":
            assert {s.basis for s in kind.starts} == {PLANS_COUNTING_FROM}
            assert kind.start_bases == PLANS_COUNTING_FROM
    computers = next(k for k in kinds if k.code == "computers")
    assert [(s.day, s.basis) for s in computers.starts] == [(registered, REGISTERED)]


def test_the_page_says_where_each_kinds_hours_were_counted_from(record, client):
    Subsystem.objects.filter(name="Fan B").update(in_service_since=dt.date(2026, 2, 1))
    client.force_login(User.objects.get(username="viewer"))
    page = client.get(reverse("site-reliability", args=[record.slug])).content.decode()
    assert "counted from the in-service date given (1), the plans&#x27; earliest counting-from date (2)" in page
    assert "T1: Fan B: from 01 Feb 2026 (the in-service date given)" in page
    # The retired fan is named with its retire day: a replacement often takes the old unit's name.
    assert "T1: Fan C (retired on 01 Feb 2026): from 01 Jan 2026" in page
    assert "counted from the plans&#x27; earliest counting-from date</summary>" in page  # the encoder
    assert "its &quot;in service since&quot; date where one is given" not in page  # written as text, not escaped
    assert 'its "in service since" date where one is given' in page


def test_failures_before_a_subsystems_in_service_date_are_the_replaced_units_and_left_out(record):
    """Fan A was replaced: the unit in service since 1 Mar 2026 is a new one, so the failures on the nights of 21 Jan
    and 20 Feb were the old unit's. Fan B has been in service since 25 Feb 2026, and its failure on the night of 1 Mar
    (on its fifth night) is its own. By hand (5 open hours a night; the log runs 1 Jan to 10 Apr 2026):
    fan A 1 Mar-10 Apr, 41 nights, 205 h, no failure, running 205 h; fan B 25 Feb-10 Apr, 45 nights, 225 h, its
    failure after the nights of 25 Feb-1 Mar (25 h), running 200 h; fan C as before, 155 h. T = 585 h, n = 1."""
    Subsystem.objects.filter(name="Fan A").update(in_service_since=dt.date(2026, 3, 1))
    Subsystem.objects.filter(name="Fan B").update(in_service_since=dt.date(2026, 2, 25))
    fans = next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")
    assert (fans.failures, fans.operating_hours) == (1, pytest.approx(585.0))
    assert fans.between == [25.0] and sorted(fans.running) == [155.0, 200.0, 205.0]
    assert fans.zero_intervals == 0
    assert [(f.subsystem, f.night, f.reason) for f in fans.left_out] == [
        ("T1: Fan A", dt.date(2026, 1, 21), REPLACED_UNIT), ("T1: Fan A", dt.date(2026, 2, 20), REPLACED_UNIT),
    ]
    # MTBF = T / n = 585 h; 90 % interval 2T / chi2(0.95; 4) to 2T / chi2(0.05; 2), quantiles from scipy.stats.chi2
    # (NIST/SEMATECH e-Handbook, chapter 8, time-terminated exponential bounds).
    assert fans.mtbf.mtbf_hours == pytest.approx(585.0)
    assert fans.mtbf.lower_hours == pytest.approx(2 * 585.0 / stats.chi2.ppf(0.95, 4))
    assert fans.mtbf.upper_hours == pytest.approx(2 * 585.0 / stats.chi2.ppf(0.05, 2))
    assert fans.fit is None and fans.no_fit == "too few failures for a fit: 1"
    assert fans.fit_inputs == (
        "between failures: 25 h; still running (censored): 155, 200, 205 h; "
        "left out: T1: Fan A on the nights of 21 Jan 2026, 20 Feb 2026 "
        "(on or before its in-service date: a failure of the unit it replaced)"
    )


def test_the_replaced_units_failures_leave_a_fit_of_the_rest(record, telescope, users):
    """Fan A's failures before its in-service date (1 Mar 2026) are left out; three later failures of fan B (nights
    of 10, 20 and 30 Mar: 345, 395 and 445 h into the log) remain, enough for a fit. By hand: fan A 205 h running;
    fan B failures at 300 h (1 Mar), 345, 395, 445 h: between 300, 45, 50, 50 h, running 55 h; fan C 155 h.
    T = 205 + 500 + 155 = 860 h, n = 4: MTBF 215 h."""
    for night in (dt.date(2026, 3, 10), dt.date(2026, 3, 20), dt.date(2026, 3, 30)):
        _order(record, [Subsystem.objects.get(name="Fan B")], users["engineer"], night)
    Subsystem.objects.filter(name="Fan A").update(in_service_since=dt.date(2026, 3, 1))
    fans = next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")
    assert (fans.failures, fans.operating_hours) == (4, pytest.approx(860.0))
    assert fans.mtbf.mtbf_hours == pytest.approx(215.0)
    assert fans.mtbf.lower_hours == pytest.approx(2 * 860.0 / stats.chi2.ppf(0.95, 10))
    assert fans.mtbf.upper_hours == pytest.approx(2 * 860.0 / stats.chi2.ppf(0.05, 8))
    assert fans.fit_inputs == (
        "between failures: 45, 50, 50, 300 h; still running (censored): 55, 155, 205 h; "
        "left out: T1: Fan A on the nights of 21 Jan 2026, 20 Feb 2026 "
        "(on or before its in-service date: a failure of the unit it replaced)"
    )
    # The fit is of the failures kept (lifelines.WeibullFitter on the same censored data, independent reference).
    reference = WeibullFitter().fit([45, 50, 50, 300, 55, 155, 205], event_observed=[1, 1, 1, 1, 0, 0, 0])
    assert fans.fit.beta == pytest.approx(reference.rho_, rel=1e-5)
    assert fans.fit.eta_hours == pytest.approx(reference.lambda_, rel=1e-5)


def test_the_page_says_which_failures_were_left_out_and_why(record, client):
    Subsystem.objects.filter(name="Fan A").update(in_service_since=dt.date(2026, 3, 1))
    client.force_login(User.objects.get(username="viewer"))
    page = client.get(reverse("site-reliability", args=[record.slug])).content.decode()
    assert "2 left out</summary>" in page
    assert ("Left out: T1: Fan A on the nights of 21 Jan 2026, 20 Feb 2026 (on or before its in-service date: a "
            "failure of the unit it replaced). Not counted in the failures, the MTBF or the fit.") in page
    assert "came with no dome-open hours since the one before" not in page


# --- which failures are a subsystem's own: left_out_reason, the one place the rule is kept ------------------


@pytest.mark.parametrize(("night", "reason"), [
    (dt.date(2026, 2, 28), REPLACED_UNIT),
    (dt.date(2026, 3, 1), REPLACED_UNIT),  # the day of the swap: the order for the old unit's failure
    (dt.date(2026, 3, 2), None),
])
def test_a_failure_on_or_before_the_in_service_date_is_the_replaced_units(night, reason):
    start = Start("T1: Fan B", dt.date(2026, 3, 1), IN_SERVICE_SINCE)
    assert left_out_reason(night, start, first_night=START) == reason


@pytest.mark.parametrize(("night", "reason"), [
    (dt.date(2026, 2, 28), BEFORE_START),
    (dt.date(2026, 3, 1), None),  # the counting-from date is no replacement: its failure is the subsystem's own
    (dt.date(2025, 12, 31), BEFORE_LOG),  # before the log too: the log is the reason no hours lead up to it
])
def test_a_failure_before_the_day_the_hours_count_from_or_before_the_log_has_no_hours_and_is_left_out(night, reason):
    start = Start("T1: Fan D", dt.date(2026, 3, 1), PLANS_COUNTING_FROM)
    assert left_out_reason(night, start, first_night=START) == reason


def test_without_a_logged_night_no_failure_has_hours_leading_up_to_it():
    start = Start("T1: Fans", TODAY, FIRST_NIGHT)
    assert left_out_reason(dt.date(2026, 1, 5), start, first_night=None) == BEFORE_LOG


@pytest.mark.parametrize(("night", "reason"), [
    (dt.date(2026, 1, 31), None),
    (dt.date(2026, 2, 1), None),  # the day it was retired: the unit failed and was retired that day
    (dt.date(2026, 2, 2), AFTER_RETIRED),
])
def test_a_failure_after_the_day_a_subsystem_was_retired_is_not_one_in_service(night, reason):
    start = Start("T1: Fan C", START, PLANS_COUNTING_FROM)
    assert left_out_reason(night, start, first_night=START, retired_on=dt.date(2026, 2, 1)) == reason


def test_failures_after_a_subsystems_retirement_are_left_out_and_the_one_on_its_day_counts(record, users, client):
    """Fan C, retired on 1 Feb 2026, with corrective orders finished on the nights of 20 Jan, 1 Feb (the day it was
    retired), 10 Feb and 1 Mar. By hand (5 open hours a night, its hours the 31 January nights, 155 h): its failures
    at 100 h (after the nights of 1-20 Jan) and at the end of its hours, 155 h (the night of 1 Feb, which its hours no
    longer count); between 100 and 55 h, running 0 h. The two after 1 Feb are left out: they used to be placed at
    155 h as well, two more failures with 0 h between them. With the fixture's fans A and B (1,000 h, failures after
    105, 150 and 300 h, running 245 and 200 h): T = 1,155 h, n = 5, MTBF 231 h."""
    fan_c = Subsystem.objects.get(name="Fan C")
    for night in (dt.date(2026, 1, 20), dt.date(2026, 2, 1), dt.date(2026, 2, 10), dt.date(2026, 3, 1)):
        _order(record, [fan_c], users["engineer"], night)
    fans = next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")
    assert [(f.subsystem, f.night, f.reason) for f in fans.left_out] == [
        ("T1: Fan C", dt.date(2026, 2, 10), AFTER_RETIRED), ("T1: Fan C", dt.date(2026, 3, 1), AFTER_RETIRED),
    ]
    assert (fans.failures, fans.operating_hours, fans.zero_intervals) == (5, pytest.approx(1155.0), 0)
    assert sorted(fans.between) == [55.0, 100.0, 105.0, 150.0, 300.0]
    assert sorted(fans.running) == [0.0, 200.0, 245.0]
    # MTBF = T / n and its 90 % interval 2T / chi2(0.95; 2n+2) to 2T / chi2(0.05; 2n), quantiles from
    # scipy.stats.chi2 (NIST/SEMATECH e-Handbook, chapter 8, time-terminated exponential bounds).
    assert fans.mtbf.mtbf_hours == pytest.approx(231.0)
    assert fans.mtbf.lower_hours == pytest.approx(2 * 1155.0 / stats.chi2.ppf(0.95, 12))
    assert fans.mtbf.upper_hours == pytest.approx(2 * 1155.0 / stats.chi2.ppf(0.05, 10))
    # The fit is of the failures kept, fan C's interval of 0 h still running adding nothing (lifelines.WeibullFitter
    # on the same censored data, independent reference).
    reference = WeibullFitter().fit([55, 100, 105, 150, 300, 200, 245], event_observed=[1, 1, 1, 1, 1, 0, 0])
    assert fans.fit.beta == pytest.approx(reference.rho_, rel=1e-5)
    assert fans.fit.eta_hours == pytest.approx(reference.lambda_, rel=1e-5)
    client.force_login(users["viewer"])
    page = client.get(reverse("site-reliability", args=[record.slug])).content.decode()
    assert "2 left out</summary>" in page
    assert ("Left out: T1: Fan C on the nights of 10 Feb 2026, 01 Mar 2026 (after the day it was retired: it was no "
            "longer in service). Not counted in the failures, the MTBF or the fit.") in page


def test_a_failure_on_the_night_of_the_in_service_date_is_the_replaced_units(record):
    """The order for the failure that led to a replacement is finished the day of the swap. Fan B in service since
    1 Mar 2026, the night its repair finished: that failure was the old unit's. By hand (5 open hours a night, log
    1 Jan to 10 Apr 2026): fan A as in the fixture, 500 h, failures at 105 and 255 h, running 245 h; fan B 1 Mar-10
    Apr, 41 nights, 205 h, no failure; fan C 155 h. T = 860 h, n = 2: MTBF 430 h."""
    Subsystem.objects.filter(name="Fan B").update(in_service_since=dt.date(2026, 3, 1))
    fans = next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")
    assert [(f.subsystem, f.night, f.reason) for f in fans.left_out] == [
        ("T1: Fan B", dt.date(2026, 3, 1), REPLACED_UNIT),
    ]
    assert (fans.failures, fans.operating_hours) == (2, pytest.approx(860.0))
    assert sorted(fans.between) == [105.0, 150.0] and sorted(fans.running) == [155.0, 205.0, 245.0]
    # 90 % interval 2T / chi2(0.95; 2n+2) to 2T / chi2(0.05; 2n), quantiles from scipy.stats.chi2 (NIST/SEMATECH
    # e-Handbook, chapter 8, time-terminated exponential bounds).
    assert fans.mtbf.mtbf_hours == pytest.approx(430.0)
    assert fans.mtbf.lower_hours == pytest.approx(2 * 860.0 / stats.chi2.ppf(0.95, 6))
    assert fans.mtbf.upper_hours == pytest.approx(2 * 860.0 / stats.chi2.ppf(0.05, 4))


def test_failures_with_no_counted_hours_before_them_are_left_out_of_the_mtbf_and_the_fit(record, telescope, users):
    """Fan D's plans count from 1 Feb 2026: its failure on the night of 25 Jan has no counted hours before it. Fan E
    has been in service since 1 Dec 2025, before the log began on 1 Jan 2026: its failure on the night of 15 Dec 2025
    has no logged hours before it. Placed at 0 h they used to shorten the MTBF; now they are left out, named.
    By hand (5 open hours a night, log 1 Jan to 10 Apr 2026, 100 nights): fan D from 1 Feb, 69 nights, 345 h, its
    failure on the night of 10 Mar after 38 nights (190 h), running 155 h; fan E every logged night, 500 h, its
    failure on the night of 31 Mar after 90 nights (450 h), running 50 h; with the fixture's fans (1,155 h, failures
    after 105, 150 and 300 h, running 155, 200 and 245 h): T = 2,000 h, n = 5, MTBF 400 h.
    Fan E's first interval (450 h counted) began before the log, at an age nobody knows: the MTBF counts its hours
    and failure, the fit leaves that interval out (its running 50 h since, from new, stays)."""
    engineer = users["engineer"]
    fan_d = subsystem_create(telescope, "cooling_fans", "Fan D", counting_from=dt.date(2026, 2, 1))
    fan_e = subsystem_create(telescope, "cooling_fans", "Fan E", counting_from=START,
                             in_service_since=dt.date(2025, 12, 1))
    for subsystem, night in ((fan_d, dt.date(2026, 1, 25)), (fan_d, dt.date(2026, 3, 10)),
                             (fan_e, dt.date(2025, 12, 15)), (fan_e, dt.date(2026, 3, 31))):
        _order(record, [subsystem], engineer, night)
    fans = next(k for k in site_reliability(record, TODAY).kinds if k.code == "cooling_fans")
    assert [(f.subsystem, f.night, f.reason) for f in fans.left_out] == [
        ("T1: Fan D", dt.date(2026, 1, 25), BEFORE_START), ("T1: Fan E", dt.date(2025, 12, 15), BEFORE_LOG),
    ]
    assert (fans.failures, fans.operating_hours, fans.zero_intervals) == (5, pytest.approx(2000.0), 0)
    assert sorted(fans.between) == [105.0, 150.0, 190.0, 300.0]
    assert sorted(fans.running) == [50.0, 155.0, 155.0, 200.0, 245.0]
    assert fans.unknown_age == ["T1: Fan E"] and fans.delayed_entries == 0
    # MTBF and its 90 % interval, quantiles from scipy.stats.chi2 (NIST/SEMATECH e-Handbook, chapter 8).
    assert fans.mtbf.mtbf_hours == pytest.approx(400.0)
    assert fans.mtbf.lower_hours == pytest.approx(2 * 2000.0 / stats.chi2.ppf(0.95, 12))
    assert fans.mtbf.upper_hours == pytest.approx(2 * 2000.0 / stats.chi2.ppf(0.05, 10))
    # The fit is of the failures kept (lifelines.WeibullFitter on the same censored data, independent reference).
    reference = WeibullFitter().fit([105, 150, 190, 300, 50, 155, 155, 200, 245],
                                    event_observed=[1, 1, 1, 1, 0, 0, 0, 0, 0])
    assert fans.fit.beta == pytest.approx(reference.rho_, rel=1e-5)
    assert fans.fit.eta_hours == pytest.approx(reference.lambda_, rel=1e-5)
    assert "unknown age" not in fans.fit_inputs and "(T1: Fan E) is left out of the fit" in fans.entry_note
    assert fans.fit_inputs.endswith(
        "left out: T1: Fan D on the night of 25 Jan 2026 (before the day its hours are counted from: no counted hours "
        "lead up to it); T1: Fan E on the night of 15 Dec 2025 (before the first logged night: no logged hours lead "
        "up to it)"
    )


def test_the_page_names_the_failures_with_no_hours_before_them(record, telescope, users, client):
    fan_d = subsystem_create(telescope, "cooling_fans", "Fan D", counting_from=dt.date(2026, 2, 1))
    _order(record, [fan_d], users["engineer"], dt.date(2026, 1, 25))
    client.force_login(users["viewer"])
    page = client.get(reverse("site-reliability", args=[record.slug])).content.decode()
    assert "1 left out</summary>" in page
    assert ("Left out: T1: Fan D on the night of 25 Jan 2026 (before the day its hours are counted from: no counted "
            "hours lead up to it). Not counted in the failures, the MTBF or the fit.") in page


def test_an_interval_past_the_right_edge_is_solid_and_dashed_only_where_it_runs_on(record):
    """A reviewer saw whole intervals dotted: only the stretch near the edge is dashed, where the upper bound lies
    beyond the axis (at twice the largest MTBF); an interval inside the axis is solid throughout."""
    import re

    from observatory_ops.reliability.plots import mtbf_svg

    kinds = site_reliability(record, TODAY).kinds
    shown = [k for k in kinds if k.failures and k.operating_hours > 0]
    x_high = max(k.mtbf.mtbf_hours for k in shown) * 2.0
    lines = re.findall(r'<polyline points="([\d.]+),([\d.]+) ([\d.]+),[\d.]+"[^>]*?( stroke-dasharray="3 3")?/>',
                       str(mtbf_svg(kinds)))
    dashed = [line for line in lines if line[3]]
    assert len(dashed) == sum(k.mtbf.upper_hours > x_high for k in shown) >= 1
    assert len(lines) - len(dashed) == len(shown)  # one solid line a row
    for x_start, y, _, _ in dashed:  # each dashed stretch starts where its row's solid line ends
        assert any(solid[1] == y and solid[2] == x_start for solid in lines if not solid[3])


def test_the_service_records_of_a_period_download_as_csv_with_how_each_counts(record, users, client):
    """For the year-end review in a spreadsheet: each record of the period with its order, the column its hours count
    in on this page (``logbook.models.maintenance_type``) and whether it still stands, so the table can be checked
    row by row."""
    import csv
    import io

    from observatory_ops.logbook.services import service_record_correct

    fan_a, encoder = Subsystem.objects.get(name="Fan A"), Subsystem.objects.get(name="Axis 1 encoder")
    by = users["engineer"]
    corrective = WorkOrder.objects.filter(order_type=WorkOrder.Type.CORRECTIVE, state=State.COUNTERSIGNED).first()

    def logged(subsystem, on, summary, **more):
        return ServiceRecord.objects.create(subsystem=subsystem, performed_on=on, performed_by=by, created_by=by,
                                            summary=summary, **more)

    logged(fan_a, dt.date(2026, 3, 2), "=SUM(A1)", hours_spent=1.0, plan=fan_a.plans.first())
    logged(fan_a, dt.date(2026, 3, 3), "fan replaced", hours_spent=2.0, work_order=corrective)
    wrong = logged(encoder, dt.date(2026, 3, 4), "cleaned", hours_spent=9.0)
    fixed = service_record_correct(wrong, by, "cleaned", hours_spent=0.5, reason="typo")
    gone = logged(encoder, dt.date(2026, 3, 5), "typed on the wrong subsystem", repaired_failure=True)
    withdrawal = service_record_correct(gone, by, "logged in error", void=True, reason="typo")
    logged(encoder, dt.date(2026, 4, 1), "after the period")

    client.force_login(users["viewer"])
    response = client.get(f"/sites/{record.slug}/service-records.csv?from=2026-03-01&to=2026-03-31")
    assert response["Content-Disposition"] == (
        f'attachment; filename="{record.slug}-service-records-2026-03-01-to-2026-03-31.csv"')
    rows = list(csv.DictReader(io.StringIO(response.content.decode())))
    assert [(r["summary"], r["work_order"], r["maintenance_type"], r["hours_spent"], r["standing"]) for r in rows] == [
        ("'=SUM(A1)", "", "preventive", "1.0", "current"),  # against a plan; a formula is neutralised
        ("fan replaced", corrective.number, "corrective", "2.0", "current"),
        ("cleaned", "", "without_order", "9.0", f"superseded by record {fixed.pk}"),
        ("cleaned", "", "without_order", "0.5", "current"),
        ("typed on the wrong subsystem", "", "corrective", "", "withdrawn"),
        ("logged in error", "", "corrective", "", f"withdraws record {gone.pk}"),
    ]
    assert withdrawal.pk == int(rows[-1]["record_id"])
    # A reviewer summed hours_spent and got more than the page: counted_hours is what the page adds up.
    assert [r["counted_hours"] for r in rows] == ["1.0", "2.0", "", "0.5", "", ""]
    # The kind as the page groups the hours (a manager's review mapped names to kinds by hand).
    assert all(r["kind"] for r in rows) and rows[0]["kind"] == Subsystem.objects.get(
        name=rows[0]["subsystem"], telescope__site=record).kind_label
    assert client.get(f"/sites/{record.slug}/service-records.csv?from=2026-03-32").status_code == 400
    # A reversed period asked for from the reliability page gets a page in words with the way back to it.
    reversed_period = client.get(f"/sites/{record.slug}/service-records.csv?from=2026-04-02&to=2026-04-01",
                                 HTTP_REFERER=f"http://testserver/sites/{record.slug}/reliability/")
    assert reversed_period.status_code == 400
    assert "from (2026-04-02) is after to (2026-04-01)" in reversed_period.content.decode()
    assert f'href="http://testserver/sites/{record.slug}/reliability/"' in reversed_period.content.decode()
    default = client.get(f"/sites/{record.slug}/service-records.csv")  # the page's 12 months to the site's today
    assert default.status_code == 200 and "after the period" in default.content.decode()


def test_the_hours_fitted_leave_out_a_running_interval_of_no_hours_as_the_fit_does():
    """A reviewer read "still running (censored): 0, 495 h" beside "1 running interval": a subsystem repaired today has
    run 0 h since, which the fit leaves out (calc.reliability.weibull_fit); the list says what was fitted."""
    from observatory_ops.reliability.selectors import KindReliability

    kind = KindReliability("cooling_fans", "Cooling fans", between=[100.0, 200.0, 300.0], between_entry=[0.0] * 3,
                           running=[0.0, 495.0], running_entry=[0.0, 0.0])
    assert kind.fit_inputs == "between failures: 100, 200, 300 h; still running (censored): 495 h"
    assert reliability.weibull_fit(kind.between, kind.running).censored == 1


def test_the_chart_is_described_in_words_by_the_figures_it_draws(record, client):
    """For whoever cannot see the picture: the sentence it names (aria-describedby, as the mirror and subsystem pages'
    charts do) gives each drawn kind's MTBF, its 90 % interval and failures, row by row from the top, and where the
    axis ends with the intervals that run on past it."""
    import html
    import re

    client.force_login(User.objects.get(username="viewer"))
    page = client.get(reverse("site-reliability", args=[record.slug])).content.decode()
    assert re.search(r'<svg [^>]*aria-describedby="mtbf-words"', page)
    words = html.unescape(re.search(r'<figcaption [^>]*id="mtbf-words">(.*?)</figcaption>', page, re.S).group(1))
    # Bounds 2T / χ²(0.95; 2n+2) and 2T / χ²(0.05; 2n) (NIST/SEMATECH e-Handbook, chapter 8), with scipy.stats.chi2
    # as the reference. Fans: T = 1,155 h, n = 3 (test_fans_failures_hours_mtbf_and_fit_by_hand); the encoder: 100
    # nights x 5 h = 500 h, n = 1.
    fans = (f"Cooling fans and filters 385 h ({2 * 1155 / stats.chi2.ppf(0.95, 8):,.0f} to "
            f"{2 * 1155 / stats.chi2.ppf(0.05, 6):,.0f} h, 3 failures)")
    encoder = (f"Encoder scale and read head 500 h ({2 * 500 / stats.chi2.ppf(0.95, 4):,.0f} to "
               f"{2 * 500 / stats.chi2.ppf(0.05, 2):,.0f} h, 1 failure)")
    assert fans in words and encoder in words
    assert "the MTBF in operating hours and its 90 % interval" in words
    # In the picture's order: its row labels, top first.
    rows = re.findall(r">([^<>]+) \(\d+ failures?\)</text>", page)
    assert sorted(rows, key=words.index) == rows and len(rows) == 2
    # The axis ends at twice the largest MTBF (500 h); both upper bounds lie past it (1,413 h and 9,747 h).
    assert "The axis runs to 1,000 h; intervals that run on past it: " in words
    assert all(row in words.split("run on past it: ")[1] for row in rows)
