"""A part swapped by editing the subsystem's "in service since" date leaves the old unit's failures and hours out of
the reliability page's figures, where retiring the old unit and registering the new one keeps them. The page says so
beside the kind, with how many failures and about how many hours, and lists each subsystem's counted hours.

Hand count (common practice, no published source for the counting; MTBF = T / n and its chi-squared bounds are
NIST/SEMATECH e-Handbook chapter 8, checked in tests/test_calc_reliability.py and taken here from
``calc.reliability.mtbf``): 100 logged nights from 1 Jan 2026 (1 Jan to 10 Apr), 5 open hours each. Every fan is
registered with its plans counting from 1 Jan. The swap is on 1 Mar: the nights before it, 1 Jan to 28 Feb, are
31 + 28 = 59 nights, 295 h; the nights from it, 1 Mar to 10 Apr, are 31 + 10 = 41 nights, 205 h. Repairs are done on
21 Jan, 20 Feb and 1 Mar (the swap, the failure of the night of 28 Feb), each a corrective order's service record.
"""
from __future__ import annotations

import datetime as dt
import html

import pytest
from django.urls import reverse

from observatory_ops.calc import reliability
from observatory_ops.logbook.models import NightUsage, ServiceRecord
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_create
from observatory_ops.reliability.selectors import PLANS_COUNTING_FROM, REPLACED_UNIT, Period, site_reliability
from tests.test_reliability_page import _order

pytestmark = pytest.mark.django_db

START = dt.date(2026, 1, 1)
SWAP = dt.date(2026, 3, 1)
TODAY = dt.date(2026, 4, 20)
REPAIRS = (dt.date(2026, 1, 21), dt.date(2026, 2, 20), SWAP)
ADVICE = ("(a unit replaced by editing its in-service date; to keep a replaced unit's record, retire it and register "
          "the new one)")


def _repaired(site, subsystem, by, day: dt.date) -> None:
    """A corrective order finished with its service record dated ``day`` (as ``work_order_finish`` writes it)."""
    order = _order(site, [subsystem], by, day)
    ServiceRecord.objects.create(subsystem=subsystem, performed_on=day, performed_by=by, created_by=by,
                                 hours_spent=2.0, summary="fan repaired", work_order=order)


@pytest.fixture
def swapped(site, telescope, users):
    """Fan A swapped by editing its in-service date to 1 Mar; Fan B swapped by retiring it on 1 Mar and registering
    Fan B2 in service since 1 Mar. Both old units failed on the same nights."""
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=START + dt.timedelta(days=i), open_hours=5.0) for i in range(100)
    )
    by = users["engineer"]
    fan_a, fan_b = (subsystem_create(telescope, "cooling_fans", n, counting_from=START) for n in ("Fan A", "Fan B"))
    for day in REPAIRS:
        _repaired(site, fan_a, by, day)
        _repaired(site, fan_b, by, day)
    Subsystem.objects.filter(pk=fan_a.pk).update(in_service_since=SWAP, serial_number="NEW-2")
    Subsystem.objects.filter(pk=fan_b.pk).update(retired_on=SWAP)
    subsystem_create(telescope, "cooling_fans", "Fan B2", counting_from=START, in_service_since=SWAP)
    return site


def _fans(site, period: Period | None = None):
    return next(k for k in site_reliability(site, TODAY, period).kinds if k.code == "cooling_fans")


def test_the_old_units_failures_and_hours_are_counted_and_said(swapped):
    fans = _fans(swapped)
    [note] = fans.before_in_service
    # Fan A's three failures (nights of 20 Jan, 19 Feb, 28 Feb) are left out as the unit it replaced; its hours
    # before the in-service date, from its plans' counting-from date 1 Jan to 28 Feb, are 59 x 5 = 295 h: the same
    # failures and hours that Fan B, retired on the day of its swap, keeps.
    assert (note.subsystem, note.since, note.failures, note.hours) == ("T1: Fan A", SWAP, 3, 295.0)
    assert (note.first, note.last, note.basis) == (START, dt.date(2026, 2, 28), PLANS_COUNTING_FROM)
    assert [(f.subsystem, f.reason) for f in fans.left_out] == [("T1: Fan A", REPLACED_UNIT)] * 3
    assert note.text == (f"T1: Fan A: 3 failures and about 295 h before its in-service date 01 Mar 2026 are left out "
                         f"{ADVICE}. The hours: the open hours of its log from 01 Jan 2026 (the plans' earliest "
                         "counting-from date) to 28 Feb 2026. The failures are those left out as a failure of the "
                         "unit it replaced.")


def test_each_subsystems_counted_hours_add_up_to_the_kinds(swapped):
    """Fan A from 1 Mar: 205 h; Fan B retired on 1 Mar: 295 h, its 3 failures counted; Fan B2 from 1 Mar: 205 h.
    MTBF = (205 + 295 + 205) h / 3 failures = 705 / 3 = 235 h."""
    fans = _fans(swapped)
    assert [(s.subsystem, s.hours) for s in fans.starts] == [
        ("T1: Fan A", 205.0), ("T1: Fan B", 295.0), ("T1: Fan B2", 205.0)]
    assert fans.operating_hours == sum(s.hours for s in fans.starts) == 705.0
    assert fans.failures == 3
    assert fans.mtbf == reliability.mtbf(705.0, 3)
    assert fans.mtbf.mtbf_hours == 235.0


def test_a_new_unit_registered_with_its_date_and_nothing_before_it_gets_no_note(site, telescope, users):
    """Registered with its in-service date and repaired on that day (its swap order naming the new unit): the failure
    of the night before is left out as the old unit's, but nothing was logged against it before its date."""
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=START + dt.timedelta(days=i), open_hours=5.0) for i in range(100)
    )
    new = subsystem_create(telescope, "cooling_fans", "Fan C", counting_from=START, in_service_since=SWAP)
    _repaired(site, new, users["engineer"], SWAP)
    fans = _fans(site)
    assert [f.reason for f in fans.left_out] == [REPLACED_UNIT]
    assert fans.before_in_service == []


def test_a_period_counts_only_what_it_leaves_out(swapped):
    """From 1 Feb: the failures of the nights of 19 and 28 Feb (repaired 20 Feb and 1 Mar, in it) and 1 to 28 Feb,
    28 x 5 = 140 h. From 1 Apr: nothing before the in-service date lies in it, and nothing is said."""
    [note] = _fans(swapped, Period(dt.date(2026, 2, 1), TODAY)).before_in_service
    assert (note.failures, note.hours, note.first, note.last) == (2, 140.0, dt.date(2026, 2, 1), dt.date(2026, 2, 28))
    assert _fans(swapped, Period(dt.date(2026, 4, 1), TODAY)).before_in_service == []


def test_a_single_failure_without_hours_reads_in_the_singular(swapped):
    """From 1 Mar: only the swap's own repair (night of 28 Feb, repaired 1 Mar, in the period) and no hours."""
    [note] = _fans(swapped, Period(SWAP, TODAY)).before_in_service
    assert (note.failures, note.hours) == (1, 0.0)
    assert note.text.startswith(f"T1: Fan A: 1 failure before its in-service date 01 Mar 2026 is left out {ADVICE}.")
    assert "The hours" not in note.text


def test_the_page_says_it_beside_the_kind_and_lists_each_subsystems_hours(swapped, client, users):
    client.force_login(users["viewer"])
    page = html.unescape(client.get(reverse("site-reliability", args=[swapped.slug])).content.decode())
    assert f"T1: Fan A: 3 failures and about 295 h before its in-service date 01 Mar 2026 are left out {ADVICE}" in page
    assert 'id="before-in-service-cooling_fans"' in page
    assert "T1: Fan A: from 01 Mar 2026 (the in-service date given), 205 h" in page
    assert ("T1: Fan B (retired on 01 Mar 2026): from 01 Jan 2026 (the plans' earliest counting-from date), "
            "295 h") in page
    assert "705 h in all" in page
