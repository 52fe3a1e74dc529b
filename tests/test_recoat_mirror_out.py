"""A recoat stopped with its mirror out (its removal finished, its other orders withdrawn) and planned again: the new
recoat goes on from the mirror out, with no removal of its own.

A hand-back walk-through planned a second recoat with the mirror still out: the planner asked for a removal, and that
removal's slews under power were not held, the tube out of balance with its axes pinned and its drives on the site's
long-term locks (OSHA 29 CFR 1910.147(f)(4), shift and personnel changes; how the removal leaves the telescope is
common practice, no published source).
"""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from django.core.exceptions import ValidationError
from test_recoat_phases import orders, slings_rated  # noqa: F401  (orders: a fixture, used by name)
from test_telescope_out import _finish, other_work  # noqa: F401  (other_work: a fixture, used by name)

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import RecoatPlan
from observatory_ops.planning.services import recoat_downtime, site_today
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.models import WorkOrder


@pytest.fixture
def stopped(orders, users):  # noqa: F811  (the imported fixture)
    """The recoat of tests/test_recoat_phases.py with its removal finished (today) and its other orders withdrawn:
    the mirror is out and no recoat is in hand."""
    recoat = {order.recoat_phase: order for order in slings_rated(list(orders.values()))}
    _finish(recoat["removal"], users)
    for phase in ("coating", "reinstall", "realignment"):
        services.work_order_move(WorkOrder.objects.get(pk=recoat[phase].pk), "withdraw", users["engineer"],
                                 reason="the coating plant closed")
    return WorkOrder.objects.get(pk=recoat["removal"].pk)


def _mirror(removal):
    return selectors.lift_mirror(removal)


def _text(response) -> str:
    assert response.status_code == 200
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def _planned_again(removal, users) -> RecoatPlan:
    mirror = _mirror(removal)
    left = mirror_services.recoat_phases_left(mirror)
    start = site_today(removal.site) + dt.timedelta(days=7)
    return mirror_services.recoat_plan_create(mirror, start, [p for _, p in left.phases], 2.0, users["engineer"])


def test_the_planner_offers_no_removal_and_says_why(stopped, users, client):
    mirror = _mirror(stopped)
    left = mirror_services.recoat_phases_left(mirror)
    assert [p.name for _, p in left.phases] == [p.name for p in RECOAT_PHASES if p.work != "removal"]
    assert left.removal == stopped
    assert f"(removed by {stopped.number} for an earlier recoat, which was stopped)" in left.text
    assert "with no removal" in left.text and "until the reinstall is finished" in left.text

    client.force_login(users["engineer"])
    page = client.get(f"/mirrors/{mirror.pk}/recoat/", {"start": site_today(stopped.site).isoformat(),
                                                        "horizon_days": 120})
    said = _text(page)
    assert left.text in said
    assert 'name="phase_0"' not in page.content.decode()  # the removal's days are not asked
    assert "Makes draft work orders for strip and coat, reinstall, realignment and measurement" in said


def test_planned_again_it_has_no_removal_and_goes_on_from_the_one_that_took_the_mirror_out(stopped, users):
    plan = _planned_again(stopped, users)
    assert plan.continues_from == stopped and plan.removal() == stopped
    assert sorted(o.recoat_phase for o in plan.work_orders.all()) == ["coating", "realignment", "reinstall"]
    # Its first order may start: no phase before it in this plan.
    coating = plan.work_orders.get(recoat_phase="coating")
    assert selectors.recoat_order_refusal(coating) == ""
    # The forecasts keep the telescope out from the removal on, the mirror out.
    downtime = recoat_downtime(plan, site_today(stopped.site))
    assert downtime.mirror_out and downtime.first <= site_today(stopped.site)
    assert f"the mirror removed by {stopped.number} for an earlier recoat" in downtime.changed


def test_a_full_recoat_is_refused_with_the_mirror_out(stopped, users):
    mirror = _mirror(stopped)
    start = site_today(stopped.site) + dt.timedelta(days=7)
    with pytest.raises(ValidationError, match="with no removal"):
        mirror_services.recoat_plan_create(mirror, start, list(RECOAT_PHASES), 2.0, users["engineer"])
    assert not RecoatPlan.objects.filter(continues_from__isnull=False).exists()


def test_a_coating_dated_before_the_mirror_came_out_is_refused_for_the_recoat_going_on(stopped, users):
    _planned_again(stopped, users)
    mirror = _mirror(stopped)
    out_on = selectors.work_done_on(stopped)
    assert "the mirror came out of the telescope on" in mirror_services.coating_before_removal(
        mirror, out_on - dt.timedelta(days=3))
    assert mirror_services.coating_before_removal(mirror, out_on) == ""


def test_coated_since_it_came_out_the_planner_goes_on_from_the_return(stopped, users):
    mirror = _mirror(stopped)
    mirror_services.coating_log(mirror, users["technician"], selectors.work_done_on(stopped), "al", [])
    left = mirror_services.recoat_phases_left(mirror)
    assert [p.name for _, p in left.phases] == ["return", "reinstall", "realignment and measurement"]
    assert "no transport or strip and coat either" in left.text
    plan = _planned_again(stopped, users)
    assert sorted(o.recoat_phase for o in plan.work_orders.all()) == ["realignment", "reinstall"]


def test_its_realignment_holds_other_work_s_hand_back(stopped, other_work, users):  # noqa: F811
    plan = _planned_again(stopped, users)
    realignment = plan.work_orders.get(recoat_phase="realignment")
    assert selectors.recoat_hands_back(WorkOrder.objects.get(pk=other_work.pk)) == realignment


def test_a_removal_still_to_do_with_the_mirror_out_carries_the_notice(stopped, users):
    """A removal order still to do (made before this was mended, or by hand) while the mirror is out: its slews to
    the removal position under power are held like any other order's (``_WRITTEN_FOR_MIRROR_OUT``)."""
    removal = WorkOrder.objects.create(
        site=stopped.site, telescope=stopped.telescope, title="Take the primary out", recoat_phase="removal",
        steps="Slew to the removal position under power\nRemove the mirror", created_by=users["engineer"],
    )
    [(title, _body, _todo)] = selectors.telescope_out_notices(removal)
    assert title.endswith("is out of service: its primary mirror is out")


def _issued_back(*issued, days: int = 30) -> None:
    """Date the orders' issue ``days`` back: their work may be entered from paper as done since then."""
    from django.utils import timezone

    WorkOrder.objects.filter(pk__in=[o.pk for o in issued]).update(
        issued_at=timezone.now() - dt.timedelta(days=days))


def _finished_on(order, users, day) -> None:
    from conftest import new_coating_logged
    from test_workorders import _confirmed

    order = WorkOrder.objects.get(pk=order.pk)
    if order.state == "issued":
        services.work_order_move(order, "start", users["technician"])
    new_coating_logged(order, users["technician"])
    services.work_order_finish(order, users["technician"], 4.0, "done from the paper",
                               {r.pk: 0.9 for r in order.required_readings.all()}, work_done_on=day,
                               **_confirmed(WorkOrder.objects.get(pk=order.pk)))


def test_paper_entered_later_is_held_as_the_mirror_stood_on_the_day_the_work_was_done(orders, other_work, users):  # noqa: F811
    """A walk-through entered drive work done while the mirror was out once it was back, its slews confirmed done,
    and had work done before the removal held until the reinstall."""
    recoat = {order.recoat_phase: order for order in slings_rated(list(orders.values()))}
    today = site_today(other_work.site)
    for order in recoat.values():
        services.work_order_move(WorkOrder.objects.get(pk=order.pk), "issue", users["engineer"])
    _issued_back(other_work, *recoat.values())
    _finished_on(recoat["removal"], users, today - dt.timedelta(days=10))
    order = WorkOrder.objects.get(pk=other_work.pk)
    services.work_order_move(order, "start", users["technician"])
    unticked = selectors.unticked_lines(order)
    # Done the day before the removal, entered with the mirror out: nothing holds it.
    assert services.finish_waits(order, unticked, today - dt.timedelta(days=11)) == ""
    # Done today with the mirror out: held, as today's page says.
    assert "Finish this order once the reinstall is finished" in services.finish_waits(order, unticked, today)
    _finished_on(recoat["coating"], users, today - dt.timedelta(days=6))
    _finished_on(recoat["reinstall"], users, today - dt.timedelta(days=2))
    assert selectors.telescope_out_notices(order) == []
    # Done while it was out, entered once it is back: held, saying how the mirror stood that day.
    held = services.finish_waits(order, unticked, today - dt.timedelta(days=5))
    removal, reinstall = recoat["removal"].number, recoat["reinstall"].number
    assert (f"({removal} took it out on {today - dt.timedelta(days=10):%d %b %Y}; {reinstall} put it back on "
            f"{today - dt.timedelta(days=2):%d %b %Y})") in held
    assert ("they were not done then. Do them now that it is back and tick them on this page, then finish with the "
            "day the rest of the work was done") in held
    with pytest.raises(services.Refused, match="the day the work was done, the Primary of T1 was out"):
        _finished_on(order, users, today - dt.timedelta(days=5))
    # The day the reinstall put it back, and after: the mirror is in.
    assert services.finish_waits(order, unticked, today - dt.timedelta(days=2)) == ""
    # Another mirror of the telescope out today: not "now that it is back" (a diff review).
    from observatory_ops.registry.models import Subsystem

    secondary = Subsystem.objects.create(telescope=order.telescope, kind="secondary_mirror", name="Secondary")
    taken = WorkOrder.objects.create(
        site=order.site, telescope=order.telescope, title="Secondary out", recoat_phase="removal", state="finished",
        finished_at=WorkOrder.objects.get(pk=recoat["removal"].pk).finished_at, created_by=users["engineer"])
    taken.items.create(subsystem=secondary, why="recoat")
    held = services.finish_waits(order, unticked, today - dt.timedelta(days=5))
    assert "Do them once the reinstall is finished" in held and "the Primary of T1 was out" in held


def test_with_the_mirror_out_the_soonest_window_is_the_cheapest_and_none_is_late(stopped, users, client):
    """A diff review was offered a window four months on as the cheapest (4.4 hours), the telescope out all the
    while: each window now costs every night from the search's start to its end."""
    mirror = _mirror(stopped)
    start = site_today(stopped.site)
    left = mirror_services.recoat_phases_left(mirror)
    found = mirror_services.recoat_windows(mirror, start, 120, [p for _, p in left.phases])
    assert found["out_already"]
    first = found["windows"][0]
    assert all(first["end"] <= w["end"] for w in found["windows"])
    assert not any(w["late"] for w in found["windows"])
    assert first["waiting"] == (first["start"] - start).days
    client.force_login(users["engineer"])
    said = _text(client.get(f"/mirrors/{mirror.pk}/recoat/", {"start": start.isoformat(), "horizon_days": 120}))
    assert "the window that ends soonest costs least" in said


def test_a_page_shown_before_the_mirror_came_out_plans_nothing(orders, users, client):  # noqa: F811
    recoat = {order.recoat_phase: order for order in slings_rated(list(orders.values()))}
    mirror = _mirror(recoat["removal"])
    start = site_today(recoat["removal"].site) + dt.timedelta(days=7)
    # The full recoat's fields, as the page showed them with the mirror in; then the removal is finished and the
    # rest withdrawn before the choice is sent.
    sent = {"start": start.isoformat(), "horizon_days": "120",
            **{f"phase_{i}": str(p.days) for i, p in enumerate(RECOAT_PHASES)}}
    _finish(recoat["removal"], users)
    for phase in ("coating", "reinstall", "realignment"):
        services.work_order_move(WorkOrder.objects.get(pk=recoat[phase].pk), "withdraw", users["engineer"],
                                 reason="stopped")
    found = mirror_services.recoat_windows(mirror, start, 120, [p for _, p in
                                                                mirror_services.recoat_phases_left(mirror).phases])
    client.force_login(users["engineer"])
    response = client.post(f"/mirrors/{mirror.pk}/recoat/plan/",
                           {**sent, "window": found["windows"][0]["start"].isoformat()}, follow=True)
    said = response.content.decode()
    assert "the recoat&#x27;s phases have changed since the page was shown: The mirror has been out" in said
    assert "which was stopped), so this recoat goes on from there with no removal: transport" in said
    assert not RecoatPlan.objects.filter(continues_from__isnull=False).exists()


def test_with_the_mirror_in_a_recoat_without_its_removal_is_refused(orders, users):  # noqa: F811
    mirror = _mirror(orders["removal"])
    for order in orders.values():
        services.work_order_move(WorkOrder.objects.get(pk=order.pk), "withdraw", users["engineer"], reason="redo")
    with pytest.raises(ValidationError, match="the mirror is in its telescope: a recoat begins with its removal"):
        mirror_services.recoat_plan_create(mirror, site_today(orders["removal"].site) + dt.timedelta(days=7),
                                           [p for p in RECOAT_PHASES if p.work != "removal"], 2.0, users["engineer"])


def test_a_removal_entered_from_paper_keeps_the_telescope_out_from_the_day_its_work_was_done(orders, users):  # noqa: F811
    recoat = {order.recoat_phase: order for order in slings_rated(list(orders.values()))}
    services.work_order_move(WorkOrder.objects.get(pk=recoat["removal"].pk), "issue", users["engineer"])
    _issued_back(recoat["removal"])
    out_on = site_today(recoat["removal"].site) - dt.timedelta(days=10)
    _finished_on(recoat["removal"], users, out_on)
    for phase in ("coating", "reinstall", "realignment"):
        services.work_order_move(WorkOrder.objects.get(pk=recoat[phase].pk), "withdraw", users["engineer"],
                                 reason="stopped")
    removal = WorkOrder.objects.get(pk=recoat["removal"].pk)
    plan = _planned_again(removal, users)
    downtime = recoat_downtime(plan, site_today(removal.site))
    assert downtime.first == out_on and f"out since {out_on:%d %b %Y}" in downtime.changed
    [(_title, body, _todo)] = [n for o in selectors.telescopes_out([removal.site]) for n in [o.notice()]]
    assert f"was removed on {out_on:%d %b %Y}" in body


def test_two_mirrors_out_of_one_telescope_each_hold_the_work(stopped, users):
    """A diff review: with the primary out, the secondary's removal, once claimed by its finish, hid the primary's
    notice (one entry a telescope), and its slew under power was let through as "done or did not apply"."""
    from django.utils import timezone

    from observatory_ops.registry.models import Subsystem

    secondary = Subsystem.objects.create(telescope=stopped.telescope, kind="secondary_mirror", name="Secondary")
    removal = WorkOrder.objects.create(
        site=stopped.site, telescope=stopped.telescope, title="Take the secondary out", recoat_phase="removal",
        steps="Slew to the removal position under power\nRemove the mirror", created_by=users["engineer"],
        state="underway",
    )
    removal.items.create(subsystem=secondary, why="recoat")
    [(title, _body, _todo)] = selectors.telescope_out_notices(removal)
    assert title == "T1 is out of service: its primary mirror is out"
    WorkOrder.objects.filter(pk=removal.pk).update(state="finished", finished_at=timezone.now())
    out = selectors.telescopes_out([stopped.site])
    assert sorted(o.kind for o in out) == ["primary mirror", "secondary mirror"]
    # Claimed by its own finish, the secondary's removal is still held by the primary out, and only by it.
    removal.state = "underway"
    [(title, _body, _todo)] = selectors.telescope_out_notices(removal)
    assert title == "T1 is out of service: its primary mirror is out"


def test_a_hand_back_dated_before_the_removal_is_not_left_to_the_realignment(stopped, other_work, users):  # noqa: F811
    plan = _planned_again(stopped, users)
    realignment = plan.work_orders.get(recoat_phase="realignment")
    order = WorkOrder.objects.get(pk=other_work.pk)
    out_on = selectors.work_done_on(stopped)
    assert selectors.recoat_hands_back(order) == realignment
    assert selectors.recoat_hands_back(order, out_on) == realignment  # the removal's day: out
    assert selectors.recoat_hands_back(order, out_on - dt.timedelta(days=1)) is None
    # Ticked now, the hand-back is refused, saying how work done on paper before the removal is finished instead (a
    # diff review: the refusal and the finish said different things).
    from observatory_ops.registry.catalogue import is_hand_back

    key = next(i for i, step in enumerate(order.step_list) if is_hand_back(step))
    assert (f"If this work was done on paper before the mirror came out ({out_on:%d %b %Y}), finish the order with "
            "the day it was done") in services._telescope_out_refusal(order, key)


def test_stopped_and_not_planned_again_the_mirror_out_keeps_its_telescope_out_up_to_today(orders, users):  # noqa: F811
    """The last notes: a recoat stopped with its mirror out and not planned again counted no downtime, so the
    forecasts took the telescope as observing. It counts out from the day the mirror came out up to today, as a recoat
    running late with its mirror out does (``recoat_downtime``), and once a recoat is planned again, that one's
    downtime alone."""
    from observatory_ops.planning.services import downtimes_of

    recoat = {order.recoat_phase: order for order in slings_rated(list(orders.values()))}
    services.work_order_move(WorkOrder.objects.get(pk=recoat["removal"].pk), "issue", users["engineer"])
    _issued_back(recoat["removal"])
    today = site_today(recoat["removal"].site)
    out_on = today - dt.timedelta(days=10)
    _finished_on(recoat["removal"], users, out_on)
    for phase in ("coating", "reinstall", "realignment"):
        services.work_order_move(WorkOrder.objects.get(pk=recoat[phase].pk), "withdraw", users["engineer"],
                                 reason="stopped")
    removal = WorkOrder.objects.get(pk=recoat["removal"].pk)
    [down] = downtimes_of(removal.site, removal.telescope_id, False, today)
    assert (down.first, down.last, down.nights) == (out_on, today, 11) and down.mirror_out
    assert down.what == "the stopped recoat of T1: Primary"
    assert f"out since {out_on:%d %b %Y} (removed by {removal.number}) and no recoat in hand" in down.changed

    from django.test import Client

    client = Client()
    client.force_login(users["viewer"])
    page = _text(client.get(removal.site.get_absolute_url()))
    assert (f"The stopped recoat of T1: Primary : out of service {out_on:%d %b %Y} to today (11 nights: its primary "
            "mirror out since") in page and "plan its recoat again" in page and "No recoat planned" not in page

    plan = _planned_again(removal, users)
    [down] = downtimes_of(removal.site, removal.telescope_id, False, today)
    assert down == recoat_downtime(RecoatPlan.objects.get(pk=plan.pk), today)
    assert "plan its recoat again" not in _text(client.get(removal.site.get_absolute_url()))


def test_with_the_mirror_out_a_blocked_run_costs_five_times_its_hours_and_a_closed_night_nothing(stopped):
    """A newcomer review: the planner priced its windows by a second formula beside ``night_costs``, and its calendar
    said "blocked" for nights it priced 5 x. One rule now (``night_costs(blocking=False)``): the hand sum below,
    each night moonless dark hours x open fraction (calc.windows.night_cost), x 5 on the booked ones (BOOKED_WEIGHT),
    0 on a closed one whatever is booked on it."""
    import math

    from observatory_ops.planning.models import BookedRun, Closure

    mirror = _mirror(stopped)
    site, start = stopped.site, site_today(stopped.site)
    BookedRun.objects.create(site=site, title="Occultation", starts_on=start + dt.timedelta(days=2),
                             ends_on=start + dt.timedelta(days=4), blocked=True)
    Closure.objects.create(site=site, first_night=start + dt.timedelta(days=3), last_night=start + dt.timedelta(days=3),
                           reason="road closed")
    left = mirror_services.recoat_phases_left(mirror)
    costs, _off, found = mirror_services.site_crew_windows(site, start, 60, [p for _, p in left.phases],
                                                           telescope=mirror.subsystem.telescope, out_already=True)
    by_night = {c.night: c for c in costs}
    for offset, weight in ((1, 1), (2, 5), (3, 0), (4, 5), (5, 1)):
        night = by_night[start + dt.timedelta(days=offset)]
        assert night.cost == pytest.approx(night.moonless_dark_hours * night.open_fraction * weight)
    assert all(math.isfinite(c.cost) for c in costs)
    first = found[0]
    assert first["cost"] == pytest.approx(sum(c.cost for c in costs if c.night <= first["end"]), abs=1e-3)
    # Planned with the mirror in, the run blocks its nights, the closed one too.
    blocked = mirror_services.night_costs(site, start, 10, mirror.subsystem.telescope)
    assert [math.isinf(c.cost) for c in blocked[2:5]] == [True, True, True]


def test_a_mirror_retired_while_out_no_longer_holds_its_telescope(stopped, users):
    """A diff review: a mirror retired while out (replaced) kept its telescope out of service in the forecasts for good,
    and its other work held, with nothing able to put it back."""
    from observatory_ops.planning.services import downtimes_of
    from observatory_ops.registry.models import Subsystem

    today = site_today(stopped.site)
    assert downtimes_of(stopped.site, stopped.telescope_id, False, today)
    Subsystem.objects.filter(pk=_mirror(stopped).subsystem_id).update(retired_on=today)
    assert selectors.telescopes_out([stopped.site]) == []
    assert downtimes_of(stopped.site, stopped.telescope_id, False, today) == []
