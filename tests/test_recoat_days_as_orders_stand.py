"""A recoat in hand is shown, priced and held against other work on its days as its work orders now stand
(mirrors.services.with_days_out), as the forecasts count them (planning.services.recoat_downtime): a re-dated recoat
kept its planned days on the mirror page, the recoat planner and the downtime offer, and the dashboard gave the cost
of its planned days only.

Hand computation: the scene's sky has 5 moonless dark hours a night (tests/conftest.py constant_sky) and its log 8
open hours on each of 400 nights of 10 dark hours, so every month's open fraction is 0.8 and a night out of service
loses 5 x 0.8 = 4.0 usable moonless open hours (calc.windows.night_cost: moonless dark hours x open fraction)."""
from __future__ import annotations

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from test_downtime_in_forecasts import _recoat_redated, scene  # noqa: F401  (the scene is a fixture)

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import Mirror
from observatory_ops.planning import services
from observatory_ops.registry.models import Subsystem
from observatory_ops.workorders.models import WorkOrder

pytestmark = pytest.mark.django_db
LOST_PER_NIGHT = 5.0 * 0.8
SHIFT = 30


def test_the_dashboard_prices_a_re_dated_recoat_on_its_new_nights_beside_its_planned_cost(scene, users, client):  # noqa: F811
    recoat, today = _recoat_redated(scene, users, SHIFT)
    out = services.recoat_downtime(recoat, today)
    assert out.first == recoat.starts_on + dt.timedelta(days=SHIFT)
    assert mirror_services.hours_lost(scene[0], out.first, out.last, recoat.mirror.subsystem.telescope) == (
        pytest.approx((LOST_PER_NIGHT * out.nights, 10.0 * out.nights, 5.0 * out.nights)))
    client.force_login(users["viewer"])
    page = client.get(scene[0].get_absolute_url()).content.decode()
    # Beside it, the darkness of those nights (10 h a night, 5 moonless): a manager's review took the hours lost for
    # the dark time lost.
    assert (f"about {LOST_PER_NIGHT * out.nights:.1f} usable moonless open hours lost on these nights (each night's "
            "moonless dark hours x its month's open fraction; its planned days were priced at 10.0 when it was "
            f"planned, a booked night weighed more), of {10.0 * out.nights:.1f} h of astronomical darkness on them, "
            f"{5.0 * out.nights:.1f} h of it moonless") in page


def test_a_recoat_as_planned_gives_the_hours_lost_on_its_nights_not_the_planners_price(scene, users, client):  # noqa: F811
    """A diff review: the dashboard showed the planner's price of an unchanged recoat (a booked night weighed more,
    here the fixture's 10.0) beside the darkness of its nights, reading as more moonless hours lost than there were.
    It gives the hours lost on its nights, as for a re-dated one, with no note of a planned price."""
    recoat, today = _recoat_redated(scene, users, 0)
    out = services.recoat_downtime(recoat, today)
    client.force_login(users["viewer"])
    page = client.get(scene[0].get_absolute_url()).content.decode()
    assert f"about {LOST_PER_NIGHT * out.nights:.1f} usable moonless open hours lost on these nights" in page
    assert "when it was planned" not in page


def test_the_mirror_page_and_the_planner_give_a_re_dated_recoat_its_new_days(scene, users, client):  # noqa: F811
    recoat, today = _recoat_redated(scene, users, SHIFT)
    out = services.recoat_downtime(recoat, today)
    client.force_login(users["engineer"])
    mirror = recoat.mirror
    page = client.get(mirror.get_absolute_url()).content.decode()
    assert (f"{out.first:%d %b %Y} to {out.last:%d %b %Y} as its work orders now stand "
            f"({LOST_PER_NIGHT * out.nights:.1f} usable moonless open hours lost; planned {recoat.starts_on:%d %b %Y} "
            f"to {recoat.ends_on:%d %b %Y}, priced at 10.0 h when planned)") in page
    planner = client.get(f"/mirrors/{mirror.pk}/recoat/").content.decode()
    assert (f"already planned, {out.first:%d %b %Y} to {out.last:%d %b %Y} as its work orders now stand (planned "
            f"{recoat.starts_on:%d %b %Y} to {recoat.ends_on:%d %b %Y})") in planner
    with pytest.raises(ValidationError, match=f"already planned, {out.first:%d %b %Y} to {out.last:%d %b %Y} as its "
                                              "work orders now stand"):
        mirror_services.recoat_plan_create(mirror, today + dt.timedelta(days=200), list(RECOAT_PHASES), 1.0,
                                           users["engineer"])


def test_another_mirrors_planner_holds_the_crew_on_a_re_dated_recoats_new_days(scene, users):  # noqa: F811
    recoat, today = _recoat_redated(scene, users, SHIFT)
    out = services.recoat_downtime(recoat, today)
    secondary = Subsystem.objects.create(telescope=recoat.mirror.subsystem.telescope, kind="secondary_mirror",
                                         name="Secondary mirror")
    other = Mirror.objects.create(subsystem=secondary, diameter_mm=150, thickness_mm=20, material="borosilicate")
    site = scene[0]
    assert mirror_services._recoats_planned_at(site, other, recoat.starts_on, recoat.ends_on) == []
    assert mirror_services._recoats_planned_at(site, other, out.last, out.last + dt.timedelta(days=3)) == [recoat]


def test_the_downtime_offer_follows_a_recoat_put_off_past_its_planned_days(scene, users):  # noqa: F811
    """A recoat planned for days now gone by, its orders all put off to coming days: the offer of other work was
    withdrawn as for a recoat over. It is made for its days as its orders stand: the fans' plan, forecast inside them,
    is offered, on the realignment's day."""
    site, today, plan, mirror = scene
    recoat = mirror_services.recoat_plan_create(mirror, today + dt.timedelta(days=3), list(RECOAT_PHASES), 10.0,
                                                users["engineer"])
    back = dt.timedelta(days=40)
    type(recoat).objects.filter(pk=recoat.pk).update(starts_on=recoat.starts_on - back, ends_on=recoat.ends_on - back)
    recoat = type(recoat).objects.get(pk=recoat.pk)
    services.site_recompute(site)
    offer = mirror_services.due_in_downtime(recoat)
    realignment = WorkOrder.objects.get(recoat_plans=recoat, recoat_phase="realignment")
    assert offer is not None and offer.planned_on == realignment.planned_date
    assert [s.plan_id for s in offer.states] == [plan.pk]
