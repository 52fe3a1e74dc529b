"""The reliability page after a takeover (a network manager's review).

A site taken over with its past: the subsystems are entered in the admin in December (their plans count from that
day, last service unknown), their last services are logged with their real dates in July, and the nights from July
on are imported. The hours used to count from the plans' earliest counting-from date (December): 0 h, the July-to-
December failure left out, "MTBF not estimable". Without an in-service date the hours now count from the earliest day
the record shows the subsystem in service: the earlier of its earliest service record (as it stands: not withdrawn)
and its plans' counting date. By hand below, 5 open hours a night.
"""
from __future__ import annotations

import datetime as dt

import pytest
from django.urls import reverse

from observatory_ops.logbook.models import NightUsage, ServiceRecord
from observatory_ops.planning.models import ServicePlan
from observatory_ops.registry.services import subsystem_create
from observatory_ops.reliability.selectors import FIRST_SERVICE, PLANS_COUNTING_FROM, site_reliability
from tests.test_reliability_page import _order

pytestmark = pytest.mark.django_db

REGISTERED = dt.date(2026, 12, 8)
TODAY = dt.date(2026, 12, 10)
LAST_SERVICE = dt.date(2026, 7, 15)


@pytest.fixture
def taken_over(site, telescope, users):
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=dt.date(2026, 7, 1) + dt.timedelta(days=i), open_hours=5.0)
        for i in range((REGISTERED - dt.date(2026, 7, 1)).days + 2)  # 1 Jul to 9 Dec
    )
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=REGISTERED)
    subsystem_create(telescope, "encoder", "Axis 1 encoder", counting_from=REGISTERED)
    ServicePlan.objects.update(counting_from_given=False)  # as the admin enters them: last service unknown
    by = users["engineer"]

    def logged(on, **more):
        return ServiceRecord.objects.create(subsystem=fans, plan=fans.plans.first(), performed_on=on, performed_by=by,
                                            created_by=by, summary="service", **more)

    logged(LAST_SERVICE)
    mistaken = logged(dt.date(2026, 3, 1))  # logged by mistake, then withdrawn: shows nothing
    logged(dt.date(2026, 3, 1), corrects=mistaken, void=True)
    _order(site, [fans], by, dt.date(2026, 10, 1))  # finished on the afternoon of 1 Oct: a failure that night
    return site


def test_hours_count_from_the_earliest_service_record_after_a_takeover(taken_over):
    """Fans: the nights of 15 Jul to 9 Dec, 148 (17 + 31 + 30 + 31 + 30 + 9), 740 h; its failure on the night of
    1 Oct after 79 nights (395 h), running 345 h since; MTBF 740 h. The encoder, with no service logged, counts from
    its plans' date: the nights of 8 and 9 Dec, 10 h."""
    kinds = {k.code: k for k in site_reliability(taken_over, TODAY).kinds}
    fans, encoders = kinds["cooling_fans"], kinds["encoder"]
    assert [(s.day, s.basis) for s in fans.starts] == [(LAST_SERVICE, FIRST_SERVICE)]
    assert (fans.operating_hours, fans.failures, fans.left_out) == (pytest.approx(740.0), 1, [])
    assert fans.between == [395.0] and fans.running == [345.0]
    assert fans.mtbf.mtbf_hours == pytest.approx(740.0)
    assert [(s.day, s.basis) for s in encoders.starts] == [(REGISTERED, PLANS_COUNTING_FROM)]
    assert encoders.operating_hours == pytest.approx(10.0)


def test_a_plans_counting_date_before_the_first_service_still_counts_from_itself(taken_over):
    """A counting date given earlier than any service (the last service known, given by hand) is the earlier day."""
    ServicePlan.objects.filter(subsystem__name="Fans").update(counting_from=dt.date(2026, 7, 1),
                                                              counting_from_given=True)
    fans = next(k for k in site_reliability(taken_over, TODAY).kinds if k.code == "cooling_fans")
    assert [(s.day, s.basis) for s in fans.starts] == [(dt.date(2026, 7, 1), PLANS_COUNTING_FROM)]
    assert fans.operating_hours == pytest.approx(162 * 5.0)  # every night from 1 Jul to 9 Dec


def test_the_page_says_the_hours_count_from_the_earliest_service_record(taken_over, users, client):
    client.force_login(users["viewer"])
    page = client.get(reverse("site-reliability", args=[taken_over.slug])).content.decode()
    assert "T1: Fans: from 15 Jul 2026 (its earliest service record)" in page
    assert "its earliest service record or its plans&#x27; earliest" in page or \
        "its earliest service record or its plans' earliest" in page
