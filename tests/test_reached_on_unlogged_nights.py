"""A counter whose expected use reaches its limit on a past night not yet logged is due today (its forecast clamped
to today, planning.services._clamp); its basis says on which night the limit was reached at the expected rate, so the
due list's "forecast <today>", read day after day until the nights are logged, is explained (a year's review).

Hand computation: every night has 10 dark hours (tests/conftest.py constant_sky) and the log 8 open hours on each
logged night, so every month's open fraction is 0.8 and 8 h a night are expected. The plan counts the logged nights
from today - 20 to today - 6 (15 nights, 120 h) against a limit of 150 h: 30 h remain; the unlogged nights from
today - 5 add 8 h each, 32 h >= 30 h on the fourth, the night of today - 2."""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning import services
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.registry.models import Site, Subsystem, Telescope

pytestmark = pytest.mark.django_db


def _scene(limit: float, behind: int = 5):
    """The log's last ``behind`` nights to last night not logged."""
    from conftest import constant_sky

    site = Site.objects.create(name="Scarp End", slug="scarp-end", latitude_deg=0, longitude_deg=0, time_zone="UTC")
    telescope = Telescope.objects.create(site=site, name="S40", aperture_m=0.4, mount="fork")
    today = services.site_today(site)
    constant_sky(site, today - dt.timedelta(days=400), today + dt.timedelta(days=services.HORIZON_DAYS + 5))
    NightUsage.objects.bulk_create(NightUsage(site=site, night=today - dt.timedelta(days=i), open_hours=8.0)
                                   for i in range(behind + 1, 401))
    fans = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name="Fans")
    plan = ServicePlan.objects.create(subsystem=fans, name="Fan bearings", counting_from=today - dt.timedelta(days=20),
                                      counting_from_given=True)
    Trigger.objects.create(plan=plan, metric="open_hours", limit=limit)
    services.site_recompute(site)
    return today, PlanStatus.objects.get(plan=plan)


def test_a_limit_reached_on_unlogged_nights_is_due_today_and_its_basis_says_when_it_was_reached():
    today, status = _scene(150.0)
    assert status.value == pytest.approx(120.0) and status.status == "due" and status.forecast_date == today
    reached = today - dt.timedelta(days=2)
    assert (f"at the expected rate the limit was reached on the night of {reached:%d %b %Y}, not logged yet: due today "
            "until the nights since the last logged one are logged") in status.basis


def test_a_limit_expected_on_a_coming_night_says_nothing_of_unlogged_nights():
    """200 h: 80 h remain, ten nights at 8 h from today - 5, the night of today + 4: nothing to say."""
    today, status = _scene(200.0)
    assert status.forecast_date == today + dt.timedelta(days=4)
    assert "not logged yet" not in status.basis



def test_the_due_record_gives_the_night_reached_on_a_log_a_few_nights_behind():
    """An API review: the due list said a log behind only in its sentence, so control software whose sending had
    stopped read "due" and never "overdue". Five nights behind (as above), the night reached is given; the nights not
    logged are not (at most 30 are not said)."""
    from observatory_ops.planning.selectors import due_record

    today, status = _scene(150.0)
    record = due_record(status)
    assert (record["reached_unlogged_on"], record["unlogged_nights"]) == (
        (today - dt.timedelta(days=2)).isoformat(), 0)
    assert record["last_service_on"] is None and record["kind"] == "cooling_fans"


def test_the_due_record_gives_the_nights_not_logged_on_a_log_far_behind():
    """40 nights behind: none logged since today - 41, so 0 h; the plan counts from today - 20, and 19 nights at 8 h
    reach 150 h on the night of today - 2; its 20 nights to last night are counted at the expected rate."""
    from observatory_ops.planning.selectors import due_record

    today, status = _scene(150.0, behind=40)
    record = due_record(status)
    assert status.value == 0 and record["status"] == "due" and record["forecast_date"] == today.isoformat()
    assert (record["reached_unlogged_on"], record["unlogged_nights"]) == (
        (today - dt.timedelta(days=2)).isoformat(), 20)


def test_the_due_record_gives_no_night_reached_for_a_limit_still_to_come():
    from observatory_ops.planning.selectors import due_record

    _, status = _scene(200.0)
    assert due_record(status)["reached_unlogged_on"] is None
