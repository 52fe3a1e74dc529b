"""A telescope whose primary mirror a recoat has removed: every other piece of work on it, and the pages a site
engineer and a manager read, say so until the reinstall is finished.

Between the removal and the reinstall the tube is out of balance, its axes pinned and its drives on the site's
long-term locks (OSHA 29 CFR 1910.147(f)(4), shift and personnel changes). Work on the telescope meanwhile is
usual, but nothing may move an axis or take those locks off; how the removal leaves it is common practice, no
published source.
"""
from __future__ import annotations

import datetime as dt
import html
import io
import re

import pytest
from conftest import new_coating_logged
from pypdf import PdfReader
from test_recoat_phases import orders, slings_rated  # noqa: F401  (orders: a fixture, used by name)
from test_workorders import _confirmed

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.registry.catalogue import is_hand_back
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import HAND_BACKS_HELD_TITLE, TELESCOPE_OUT_TODO
from observatory_ops.workorders.models import WorkOrder

OUT = "T1 is out of service: its primary mirror is out"


@pytest.fixture
def recoat(orders):  # noqa: F811  (the imported fixture)
    """The recoat of tests/test_recoat_phases.py (a 500 mm primary, planned from 1 Aug 2026), its four phase
    orders by the phase each carries, the slings' working load limit entered on each that lifts."""
    return {order.recoat_phase: order for order in slings_rated(list(orders.values()))}


@pytest.fixture
def other_work(telescope, users):
    """Drive work on the same telescope, issued: the kind of order a crew does while the mirror is away."""
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=dt.date(2026, 1, 1))
    order = services.work_order_from_due(list(drive.plans.all()), users["engineer"])
    order.planned_date = dt.date(2026, 8, 4)
    order.save()
    services.work_order_move(order, "issue", users["engineer"])
    return order


def _finish(order, users) -> None:
    order = WorkOrder.objects.get(pk=order.pk)
    if order.state == "draft":
        services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    new_coating_logged(order, users["technician"])
    services.work_order_finish(
        order, users["technician"], 8.0, "done", {r.pk: 0.9 for r in order.required_readings.all()},
        **_confirmed(order),
    )


def _text(response) -> str:
    assert response.status_code == 200
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def _pdf(client, order) -> str:
    document = client.get(f"/workorders/{order.pk}/pdf/").content
    return " ".join(" ".join(page.extract_text() for page in PdfReader(io.BytesIO(document)).pages).split())


def test_the_planner_marks_each_order_with_its_phase(recoat):
    assert set(recoat) == {"removal", "coating", "reinstall", "realignment"}
    assert all(order.title.endswith(": " + phase.name) for phase in RECOAT_PHASES if phase.work
               for order in [recoat[phase.work]])


def test_nothing_is_out_before_the_removal_is_finished(recoat, other_work, site, users):
    services.work_order_move(recoat["removal"], "issue", users["engineer"])
    services.work_order_move(recoat["removal"], "start", users["technician"])  # underway: the mirror may be in
    assert selectors.telescopes_out([site]) == []
    assert selectors.telescope_out_notices(other_work) == []


def test_once_the_removal_is_finished_other_work_on_the_telescope_carries_the_notice(
    recoat, other_work, site, users, client
):
    _finish(recoat["removal"], users)
    [stands] = selectors.telescopes_out([site])
    assert stands.telescope_id == other_work.telescope_id
    assert stands.removal == recoat["removal"] and stands.reinstall == recoat["reinstall"]
    title, body, todo = stands.notice()
    assert title == OUT and todo == TELESCOPE_OUT_TODO
    assert f"({recoat['removal'].number})" in body and f"goes back with {recoat['reinstall'].number}" in body
    assert "planned for" in body and "long-term locks" in body

    client.force_login(users["technician"])
    page = _text(client.get(other_work.get_absolute_url()))
    assert OUT in page and TELESCOPE_OUT_TODO in page
    printed = _pdf(client, other_work)
    assert OUT in printed and "takes those locks off" in printed
    # The recoat's own orders are written for a telescope without its mirror: no notice on them.
    assert selectors.telescope_out_notices(WorkOrder.objects.get(pk=recoat["reinstall"].pk)) == []
    assert OUT not in _text(client.get(recoat["reinstall"].get_absolute_url()))


def test_with_the_mirror_out_starting_asks_and_nothing_that_moves_an_axis_or_brings_energy_back_is_ticked(
    recoat, other_work, site, users, client
):
    """A safety review started drive work on a telescope whose mirror was out and ticked its brake air, its test
    under power and the hand-back to robotic control; a diff review then ticked its slew under power and parking, and
    finished it with the rest confirmed "done or did not apply". Starting now asks; the steps that move an axis, bring
    energy back or hand the telescope back (``services.moves_or_restores``) wait until the reinstall is finished,
    and so does the finish. Out of robotic control, the lockout and the locked-out work go on."""
    from test_workorders import _all_readings

    _finish(recoat["removal"], users)
    order = WorkOrder.objects.get(pk=other_work.pk)
    questions = selectors.start_questions(order)
    assert len(questions) == 1 and questions[0].startswith(f"{OUT}. ") and questions[0].endswith("Start anyway?")
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/move/start/", {"go": "start"})
    assert response.status_code == 200 and OUT in _text(response)
    assert WorkOrder.objects.get(pk=order.pk).state == "issued"
    response = client.post(f"/workorders/{order.pk}/move/start/", {"asked": "confirmed"})
    assert response.status_code == 302
    order = WorkOrder.objects.get(pk=order.pk)
    steps = order.step_list
    waiting = services.moves_or_restores(steps)
    lockout, locked = services.isolated_steps(steps)
    assert {i for i in range(lockout) if "slew" in steps[i].lower() or "park" in steps[i].lower()} <= waiting
    assert set(range(locked.stop + 1, len(steps))) <= waiting and lockout not in waiting and locked.stop not in waiting
    for index in range(len(steps)):
        if index == lockout:  # the locks go on
            for point in selectors.isolation_points(order):
                services.checklist_tick_set(order, "point", point.pk, True, users["technician"])
        if index in waiting and is_hand_back(steps[index]):  # left to the recoat's realignment (below)
            with pytest.raises(services.Refused, match=rf"step {index + 1} hands the observatory back to robotic and "
                                                       rf"remote control, and the recoat of T1 is not done: "
                                                       rf"{recoat['realignment'].number} "):
                services.checklist_tick_set(order, "step", index, True, users["technician"])
        elif index in waiting:
            with pytest.raises(services.Refused, match=rf"step {index + 1} (is done under power before the lockout "
                                                       r"and may move an axis|is done after the locks come off|hands "
                                                       r"the telescope back|moves the telescope), and T1 is out of "
                                                       r"service: .* Leave this step until the reinstall is finished"):
                services.checklist_tick_set(order, "step", index, True, users["technician"])
        else:
            services.checklist_tick_set(order, "step", index, True, users["technician"])
    with pytest.raises(services.Refused, match="steps that wait while the telescope's mirror is out are not ticked"):
        services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6),
                                   confirmed_unticked=[steps[i] for i in waiting])
    # Once the reinstall is finished the telescope is balanced again: the steps go on, but the hand-back, which waits
    # for the realignment (a recoat review handed the telescope back between the two); the finish leaves it to it.
    _finish(recoat["coating"], users)
    _finish(recoat["reinstall"], users)
    realignment = recoat["realignment"]
    for index in sorted(waiting):
        if is_hand_back(steps[index]):
            with pytest.raises(services.Refused, match="its crew hands the observatory back at its end"):
                services.checklist_tick_set(order, "step", index, True, users["technician"])
        else:
            services.checklist_tick_set(order, "step", index, True, users["technician"])
    services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6))
    order = WorkOrder.objects.get(pk=order.pk)
    assert list(order.hand_back_left_to.all()) == [realignment]
    assert (f"the hand-back to robotic and remote control, was left to the last crew out: {realignment.number} "
            f"{realignment.title}, still at work on the telescope or, for a recoat's realignment, still to do") in \
        order.findings


def test_the_dashboard_and_the_due_list_say_which_telescope_stands_without_its_mirror(
    recoat, site, users, client
):
    _finish(recoat["removal"], users)
    client.force_login(users["viewer"])
    for url in (site.get_absolute_url(), "/due/", f"/due/?site={site.pk}"):
        page = _text(client.get(url))
        assert OUT in page, url
        assert recoat["reinstall"].number in page


def test_the_notice_goes_once_the_reinstall_is_finished(recoat, other_work, site, users):
    _finish(recoat["removal"], users)
    _finish(recoat["coating"], users)
    _finish(recoat["reinstall"], users)
    assert selectors.telescopes_out([site]) == []
    assert selectors.telescope_out_notices(other_work) == []


def test_a_removal_and_reinstall_finished_at_the_same_instant_leave_the_telescope_in(recoat, site, users):
    """Paper entered later can give both the same timestamp; the later order (by number) decides, on every database
    (PostgreSQL returned ties in either order, and a refactor's test failed there)."""
    _finish(recoat["removal"], users)
    _finish(recoat["coating"], users)
    _finish(recoat["reinstall"], users)
    same = WorkOrder.objects.get(pk=recoat["reinstall"].pk).finished_at
    WorkOrder.objects.filter(pk=recoat["removal"].pk).update(finished_at=same)
    assert selectors.telescopes_out([site]) == []


def test_a_withdrawn_reinstall_leaves_the_telescope_out_and_says_none_is_planned(recoat, site, users):
    _finish(recoat["removal"], users)
    services.work_order_move(recoat["reinstall"], "withdraw", users["engineer"], reason="replanned")
    [stands] = selectors.telescopes_out([site])
    assert stands.reinstall is None
    assert "no reinstall order is planned yet" in stands.notice()[1]


def test_finished_work_and_other_sites_show_nothing(recoat, other_work, site, users):
    from observatory_ops.registry.models import Site

    _finish(other_work, users)  # before the removal: finishing is held while the mirror is out (its steps wait)
    _finish(recoat["removal"], users)
    elsewhere = Site.objects.create(name="Elsewhere", slug="elsewhere", latitude_deg=10, longitude_deg=10,
                                    elevation_m=100, time_zone="UTC")
    assert selectors.telescopes_out([elsewhere]) == []
    assert selectors.telescope_out_notices(WorkOrder.objects.get(pk=other_work.pk)) == []


def test_the_query_count_does_not_grow_with_the_orders(recoat, site, users, django_assert_max_num_queries):
    _finish(recoat["removal"], users)
    with django_assert_max_num_queries(3):
        selectors.telescopes_out([site])


def test_the_upgrade_finds_the_phase_of_orders_planned_before_it_by_their_titles(recoat):
    import importlib

    from django.apps import apps

    step = importlib.import_module("observatory_ops.workorders.migrations.0010_recoat_phase")
    WorkOrder.objects.update(recoat_phase="")  # as stored before the field existed
    step.phases_from_titles(apps, None)
    assert {o.recoat_phase: o.pk for o in WorkOrder.objects.all()} == {k: o.pk for k, o in recoat.items()}


def test_an_order_done_but_its_hand_back_finishes_while_the_mirror_is_out_leaving_it_to_the_realignment(
    recoat, other_work, site, users
):
    """A recoat review: a short job underway when the removal started, its work done and its locks off, could not be
    finished until the reinstall, weeks later (first "no hand-back of its own to leave it to", then "once the reinstall
    is finished"). Its hand-back is the recoat's realignment's to do: the finish leaves it to that order."""
    from conftest import ticked_in_sequence
    from test_workorders import _all_readings

    order = WorkOrder.objects.get(pk=other_work.pk)
    services.work_order_move(order, "start", users["technician"])
    order = WorkOrder.objects.get(pk=order.pk)
    ticked_in_sequence(order, users["technician"], through=len(order.step_list) - 2)
    assert is_hand_back(order.step_list[-1])
    _finish(recoat["removal"], users)
    order = WorkOrder.objects.get(pk=order.pk)
    # Its page and paper say so throughout (a safety walk-through: only the tick online was refused).
    assert any(note.startswith("The recoat of T1 is not done: its realignment, " + recoat["realignment"].number)
               for note in selectors.standing_notes(order))
    assert services.finish_waits(order, selectors.unticked_lines(order)) == ""
    services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6))
    order = WorkOrder.objects.get(pk=order.pk)
    realignment = WorkOrder.objects.get(pk=recoat["realignment"].pk)
    assert order.state == "finished" and list(order.hand_back_left_to.all()) == [realignment]
    # The realignment, not begun, holds it: its page says so, and withdrawn (a stopped recoat's orders are) it says who
    # hands the telescope back then, not nothing (a diff review: the hand-back was left to a withdrawn order).
    from django.test import Client

    client = Client()
    client.force_login(users["engineer"])
    page = _text(client.get(realignment.get_absolute_url()))
    assert order.number in page.split(HAND_BACKS_HELD_TITLE, 1)[1][:400]
    # Its paper says so too (a paper review: only the page named them).
    assert order.number in _pdf(client, realignment).split(HAND_BACKS_HELD_TITLE, 1)[1][:400]
    said = services.withdrawal_hand_back_text(realignment)
    assert said.startswith("This is the recoat's realignment: withdrawn, its telescope is left without its "
                           "collimation check")  # said first (a safety walk-through: the page pointed to handing back)
    assert ("Withdrawn, nobody's order hands the telescope back to robotic and remote control "
            f"({order.number} left its hand-back to this order)") in said


def test_the_dashboard_says_when_an_order_is_planned_and_when_a_finished_one_was_finished(recoat, site, users, client):
    """A recoat review read "WO-00014 ... finished 15 Dec 2026" on the dashboard: the state, then the planned day,
    in the future, of an order finished today. A finished order says the day it was finished, awaiting its
    countersignature; the others their planned day."""
    _finish(recoat["removal"], users)
    removal, coating = (WorkOrder.objects.get(pk=recoat[phase].pk) for phase in ("removal", "coating"))
    client.force_login(users["viewer"])
    page = _text(client.get(site.get_absolute_url()))
    finished_on = removal.finished_at.astimezone(site.zone)
    assert f"{removal.number} {removal.title} finished on {finished_on:%d %b %Y}, to countersign" in page
    assert f"{coating.number} {coating.title} draft planned for {coating.planned_date:%d %b %Y}" in page


def test_the_calendar_places_a_done_recoat_on_the_days_it_was_done(recoat, site, users, client):
    """A recoat review did the four phases on one day, a week before they were planned: the calendar kept a CONFIRMED
    recoat window on the planned days (and their planned length) and each order on its planned day, so a subscribed
    observer saw the telescope out for two weeks once it was back. RFC 5545 3.6.1: an all-day event's DTEND is the day
    after its last day."""
    from icalendar import Calendar

    for phase in ("removal", "coating", "reinstall", "realignment"):
        _finish(recoat[phase], users)
    today = dt.datetime.now(site.zone).date()
    client.force_login(users["viewer"])
    events = {str(e["uid"]).split("@")[0]: e for e in Calendar.from_ical(
        client.get(f"/sites/{site.slug}/downtime.ics").content).walk("VEVENT")}
    for phase in ("removal", "coating", "reinstall", "realignment"):
        event = events[f"workorder-{recoat[phase].pk}"]
        assert (event["dtstart"].dt, event["dtend"].dt) == (today, today + dt.timedelta(days=1)), phase
        assert "(done)" in str(event["summary"])
    [window] = [e for uid, e in events.items() if uid.startswith("recoat-")]
    assert str(window["summary"]).startswith("Recoat done: T1 ")
    assert (window["dtstart"].dt, window["dtend"].dt) == (today, today + dt.timedelta(days=1))
    assert str(window["description"]).startswith(f"Done {today:%a %d %b %Y}. The phases as planned: ")



def test_in_a_shared_enclosure_another_telescopes_hand_back_waits_for_the_realignment_too(recoat, site, users):
    """A diff review: where the telescopes share one enclosure, the hand-back of work on the other telescope was
    accepted between the reinstall and the realignment, the dome moving over the telescope not realigned."""
    from observatory_ops.registry.models import Telescope

    site.shared_enclosure = True
    site.save()
    other = Telescope.objects.create(site=site, name="T2", aperture_m=0.4, mount="fork")
    fans = subsystem_create(other, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    order = services.work_order_from_due(list(fans.plans.all()), users["engineer"])
    assert services.recoat_hands_back(order) is None  # the removal is not finished: nothing is out
    _finish(recoat["removal"], users)
    assert services.recoat_hands_back(WorkOrder.objects.get(pk=order.pk)) == recoat["realignment"]
    site.shared_enclosure = False
    site.save()
    assert services.recoat_hands_back(WorkOrder.objects.get(pk=order.pk)) is None


def test_a_recoat_stopped_with_its_mirror_out_is_not_said_done_on_the_calendar(recoat, site, users, client):
    """A diff review finished the removal and withdrew the other orders, as a stopped recoat asks: the calendar said
    "Recoat done" while the mirror was out."""
    from icalendar import Calendar

    _finish(recoat["removal"], users)
    for phase in ("coating", "reinstall", "realignment"):
        services.work_order_move(WorkOrder.objects.get(pk=recoat[phase].pk), "withdraw", users["engineer"],
                                 reason="stopped")
    client.force_login(users["viewer"])
    [window] = [e for e in Calendar.from_ical(client.get(f"/sites/{site.slug}/downtime.ics").content).walk("VEVENT")
                if str(e["uid"]).startswith("recoat-")]
    assert str(window["summary"]).startswith("Recoat window: T1 ")



def test_an_orders_own_hand_back_is_its_last_tick(recoat, other_work, users):
    """A safety walk-through ticked a realignment's "only when the collimation check is recorded" before the check
    on a star: an order's own hand-back is refused while another of its steps is not ticked."""
    from conftest import ticked_in_sequence

    order = WorkOrder.objects.get(pk=other_work.pk)
    services.work_order_move(order, "start", users["technician"])
    order = WorkOrder.objects.get(pk=order.pk)
    last = len(order.step_list) - 1
    assert is_hand_back(order.step_list[last])
    ticked_in_sequence(order, users["technician"], through=last - 2)
    with pytest.raises(services.Refused, match=rf"step {last + 1} hands the observatory back to robotic and remote "
                                               rf"control, the crew's last act, and step {last} is not ticked yet"):
        services.checklist_tick_set(order, "step", last, True, users["technician"])
    services.checklist_tick_set(order, "step", last - 1, True, users["technician"])
    services.checklist_tick_set(order, "step", last, True, users["technician"])


def test_work_planned_while_the_recoat_is_planned_to_have_the_mirror_out_says_so_before_the_removal(
    recoat, other_work, users, client
):
    """A paper review printed drive work planned inside a recoat's days before its removal began: nothing on it said
    the mirror was to come out. It is said (page and paper), not refused; once the removal is finished the notice
    that holds the work takes its place."""
    [(title, body, todo)] = selectors.recoat_planned_notices(other_work)
    assert title == "T1's Primary is planned to be out for its recoat"
    removal = recoat["removal"]
    assert f"its removal {removal.number} is planned for {removal.planned_date:%d %b %Y} (draft)" in body
    assert f"its reinstall {recoat['reinstall'].number} planned for" in body
    assert "ask the site engineer whether the removal has begun" in todo
    assert selectors.telescope_out_notices(other_work) == []  # nothing is held
    client.force_login(users["technician"])
    assert title in _text(client.get(other_work.get_absolute_url()))
    assert title in _pdf(client, other_work)
    # The recoat's own orders, and work planned outside its days, carry none.
    assert selectors.recoat_planned_notices(WorkOrder.objects.get(pk=recoat["coating"].pk)) == []
    WorkOrder.objects.filter(pk=other_work.pk).update(planned_date=dt.date(2026, 9, 30))
    assert selectors.recoat_planned_notices(WorkOrder.objects.get(pk=other_work.pk)) == []
    WorkOrder.objects.filter(pk=other_work.pk).update(planned_date=dt.date(2026, 8, 4))
    _finish(recoat["removal"], users)
    order = WorkOrder.objects.get(pk=other_work.pk)
    assert selectors.recoat_planned_notices(order) == [] and selectors.telescope_out_notices(order)


def test_a_removal_underway_and_late_still_warns_work_planned_after_its_days(recoat, other_work, users):
    """A diff review: the recoat planned from August, its removal underway in December, drive work planned for
    tomorrow got no notice (the late recoat's days end today)."""
    from observatory_ops.planning.services import site_today

    services.work_order_move(recoat["removal"], "issue", users["engineer"])
    services.work_order_move(WorkOrder.objects.get(pk=recoat["removal"].pk), "start", users["technician"])
    WorkOrder.objects.filter(pk=other_work.pk).update(planned_date=site_today(other_work.site) + dt.timedelta(days=1))
    [(title, body, todo)] = selectors.recoat_planned_notices(WorkOrder.objects.get(pk=other_work.pk))
    assert "(underway)" in body and todo.startswith("Its removal is underway: the mirror may already be out.")
