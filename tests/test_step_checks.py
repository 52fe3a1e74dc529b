"""The work order checklist as a record: each tick on a step or an isolation point, and each tick taken back,
is kept with who and when; the newest entry of a line gives its state.

Orders are built as in tests/test_workorders.py (its ``drive`` and ``order`` fixtures: an axis drive whose
catalogue plan asks for readings, on a telescope with one AC isolation point, "Mount isolator").
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import io
import re
from zoneinfo import ZoneInfo

import pytest
from conftest import ticked_in_sequence
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.utils import dateformat
from django.utils.html import escape
from pypdf import PdfReader
from test_workorders import (  # noqa: F401  (fixtures, used by name)
    ISOLATED,
    _all_readings,
    _confirmed,
    drive,
    order,
)

from observatory_ops.registry.catalogue import RELEASE
from observatory_ops.registry.models import Telescope
from observatory_ops.workorders import pdf, selectors, services
from observatory_ops.workorders.cautions import ISOLATION_UNTICKED, needs_isolation
from observatory_ops.workorders.models import ChecklistTick, IsolationPoint, State, WorkOrder
from observatory_ops.workorders.sheet import SheetTick

STEP, POINT = ChecklistTick.Kind.STEP, ChecklistTick.Kind.POINT
#: The engineer taking back a technician's lock ticks says why, in their place (services.checklist_tick_set).
AWAY = "technician gone home, phone off; told before the next shift"
# The test site's zone (tests/conftest.py), read here from the IANA database directly, not from the site.
MADRID = ZoneInfo("Europe/Madrid")


def _start(work_order, users):
    services.work_order_move(work_order, "issue", users["engineer"])
    services.work_order_move(work_order, "start", users["technician"])
    work_order.refresh_from_db()
    return work_order


def _finish(work_order, users):
    services.work_order_finish(
        work_order, users["technician"], 2.0, "brake pads fine", _all_readings(work_order, 0.7),
        **_confirmed(work_order),
    )
    work_order.refresh_from_db()
    return work_order


def _point(work_order) -> IsolationPoint:
    return IsolationPoint.objects.get(telescope=work_order.telescope, label="Mount isolator")


def _page_time(moment: dt.datetime) -> str:
    return dateformat.format(moment.astimezone(MADRID), "d M Y H:i")


@pytest.fixture
def draft(order):  # noqa: F811  (the fixture of tests/test_workorders.py, imported above)
    return order


@pytest.fixture
def underway(draft, users):
    return _start(draft, users)


# --- the service ----------------------------------------------------------------------------------------


def test_ticking_and_taking_back_are_both_recorded_and_the_newest_wins(underway, users):
    technician, engineer = users["technician"], users["engineer"]
    services.checklist_tick_set(underway, STEP, 0, True, technician)
    services.checklist_tick_set(underway, STEP, 0, False, technician)
    services.checklist_tick_set(underway, STEP, 0, True, engineer)
    services.checklist_tick_set(underway, POINT, _point(underway).pk, True, technician)

    rows = list(ChecklistTick.objects.filter(work_order=underway, kind=STEP))
    assert [(r.ticked, r.recorded_by.username) for r in rows] == [
        (True, "technician"), (False, "technician"), (True, "engineer")
    ]
    assert {r.text for r in rows} == {underway.step_list[0]}  # the step's words, copied at the time
    lines = selectors.checklist(underway)
    assert lines.steps[0].ticked and lines.steps[0].latest.recorded_by == engineer
    assert not any(line.ticked for line in lines.steps[1:])
    assert lines.points[0].ticked and lines.points[0].latest.text == _point(underway).description
    assert lines.points[0].note.startswith("ticked by technician, ")

    services.checklist_tick_set(underway, STEP, 0, False, technician)
    line = selectors.checklist(underway).steps[0]
    assert not line.ticked and line.note.startswith("tick taken back by technician, ")
    assert ChecklistTick.objects.filter(work_order=underway).count() == 5  # nothing was deleted


def test_a_tick_keeps_its_history_entry_with_the_person(underway, users):
    tick = services.checklist_tick_set(underway, STEP, 1, True, users["technician"])
    assert [(h.history_type, h.history_user) for h in tick.history.all()] == [("+", users["technician"])]


def _bring_to(work_order, state, users):
    if state == State.DRAFT:
        return work_order
    if state == State.WITHDRAWN:
        services.work_order_move(work_order, "withdraw", users["engineer"], reason="mount replaced instead")
    elif state == State.ISSUED:
        services.work_order_move(work_order, "issue", users["engineer"])
    else:
        _start(work_order, users)
        services.checklist_tick_set(work_order, STEP, 0, True, users["technician"])
        _finish(work_order, users)
        if state == State.COUNTERSIGNED:
            services.work_order_move(work_order, "countersign", users["engineer"])
    work_order.refresh_from_db()
    return work_order


@pytest.mark.parametrize(
    "state, shown_as",
    [
        (State.DRAFT, "draft"),
        (State.ISSUED, "issued"),
        (State.FINISHED, "finished, awaiting countersignature"),
        (State.COUNTERSIGNED, "countersigned"),
        (State.WITHDRAWN, "withdrawn"),
    ],
)
def test_a_tick_outside_the_work_underway_is_refused_and_nothing_is_stored(draft, users, state, shown_as):
    moved = _bring_to(draft, state, users)
    before = list(ChecklistTick.objects.values_list("pk", "ticked"))
    for kind, key, ticked in ((STEP, 0, False), (STEP, 1, True), (POINT, _point(moved).pk, True)):
        with pytest.raises(services.Refused) as refusal:
            services.checklist_tick_set(moved, kind, key, ticked, users["technician"])
        assert str(refusal.value) == (
            f"ticks are recorded only while the work is underway; {moved.number} is {shown_as}"
        )
    assert list(ChecklistTick.objects.values_list("pk", "ticked")) == before


def test_a_step_number_outside_the_list_is_refused_and_nothing_is_stored(underway, users):
    count = len(underway.step_list)
    with pytest.raises(services.Refused, match=f"there is no step {count + 1}: {underway.number} has {count} step"):
        services.checklist_tick_set(underway, STEP, count, True, users["technician"])
    with pytest.raises(services.Refused, match="there is no step 0"):
        services.checklist_tick_set(underway, STEP, -1, True, users["technician"])
    assert not ChecklistTick.objects.exists()


def test_an_isolation_point_of_another_telescope_is_refused_and_nothing_is_stored(underway, users, site):
    other = Telescope.objects.create(site=site, name="T2", aperture_m=0.3, mount="fork")
    foreign = IsolationPoint.objects.create(telescope=other, energy="ac", label="T2 isolator")
    with pytest.raises(services.Refused, match=rf"isolation point #{foreign.pk} is not one of the points of"):
        services.checklist_tick_set(underway, POINT, foreign.pk, True, users["technician"])
    with pytest.raises(services.Refused, match="unknown kind of checklist line 'lever'"):
        services.checklist_tick_set(underway, "lever", _point(underway).pk, True, users["technician"])
    assert not ChecklistTick.objects.exists()


def test_ticking_a_ticked_line_or_taking_back_an_open_one_changes_nothing(underway, users):
    with pytest.raises(services.Refused, match="step 1 is not ticked"):
        services.checklist_tick_set(underway, STEP, 0, False, users["technician"])
    services.checklist_tick_set(underway, STEP, 0, True, users["technician"])
    with pytest.raises(services.Refused, match="step 1 is already ticked"):
        services.checklist_tick_set(underway, STEP, 0, True, users["engineer"])
    assert ChecklistTick.objects.count() == 1


def test_a_viewer_cannot_tick_even_through_the_service(underway, users):
    with pytest.raises(services.Refused, match="needs the technician role"):
        services.checklist_tick_set(underway, STEP, 0, True, users["viewer"])
    assert not ChecklistTick.objects.exists()


def test_a_changed_step_loses_its_tick_and_a_page_showing_the_old_words_is_refused(underway, users):
    first, second = underway.step_list[:2]
    services.checklist_tick_set(underway, STEP, 1, True, users["technician"], seen_text=second)
    # Someone rewrites step 2 (the admin can still edit the steps of an order underway).
    underway.steps = underway.steps.replace(second, "Check the brake pads and the clutch")
    underway.save()
    line = selectors.checklist(underway).steps[1]
    assert not line.ticked and line.latest.text == second  # the record still says what was confirmed
    assert f'when it read "{second}"; changed since: check it again' in line.note
    with pytest.raises(services.Refused, match="step 2 has been changed since your page was loaded"):
        services.checklist_tick_set(underway, STEP, 1, True, users["technician"], seen_text=second)
    services.checklist_tick_set(underway, STEP, 1, True, users["technician"],
                                seen_text="Check the brake pads and the clutch")
    assert selectors.checklist(underway).steps[1].ticked
    assert selectors.checklist(underway).steps[0].text == first


def test_the_checklist_is_read_in_the_same_number_of_queries_however_many_ticks(underway, users):
    def queries() -> int:
        fresh = WorkOrder.objects.select_related("site").get(pk=underway.pk)  # as the page reads it
        with CaptureQueriesContext(connection) as captured:
            lines = selectors.checklist(fresh)
            [line.note for line in lines.steps + lines.points]
        return len(captured)

    few = queries()
    assert few == 3  # the ticks; the order's items (for their telescopes); the isolation points
    _point(underway)
    ticked_in_sequence(underway, users["technician"])  # in order: the lockout before the locked-out work
    for index in reversed(range(len(underway.step_list))):  # the lockout's tick after the work done under it
        services.checklist_tick_set(underway, STEP, index, False, users["engineer"], in_place_of=AWAY)
    assert queries() == few


# --- the sequence of the lockout ------------------------------------------------------------------------
# The axis drive's order (electrical, moving machinery): steps 1-4 under power, step 5 the lockout, step 6 the
# locked-out inspection, step 7 the release (catalogue.RELEASE), step 8 restoring, step 9 the hand back to robotic and
# remote control (catalogue.HAND_BACK).


def _brake_air(work_order) -> IsolationPoint:
    return IsolationPoint.objects.create(telescope=work_order.telescope, energy="air", label="Brake air valve")


def _ticks() -> list[tuple]:
    return list(ChecklistTick.objects.values_list("pk", "kind", "step_index", "isolation_point", "ticked"))


def test_the_axis_order_places_the_lockout_and_the_release_as_these_tests_read_it(underway):
    assert underway.step_list[4] == services.LOCKOUT_STEP and underway.step_list[6] == RELEASE
    assert services.isolated_steps(underway.step_list) == (4, range(5, 6))


def test_locked_out_work_is_ticked_only_after_the_lockout_step_and_every_isolation_point(underway, users):
    """The record follows the sequence of the lockout, OSHA 29 CFR 1910.147(d): the lockout devices go on every
    energy isolating device ((d)(4)), stored energy is relieved ((d)(5)) and the isolation verified ((d)(6)) before
    work starts on the locked-out equipment. So a step done locked out is refused while the lockout step or any
    isolation point is unticked, naming what to tick first, and nothing is stored."""
    technician = users["technician"]
    mount, air = _point(underway), _brake_air(underway)
    for index in range(4):  # the steps under power are ticked as they are done
        services.checklist_tick_set(underway, STEP, index, True, technician)
    before = _ticks()
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(underway, STEP, 5, True, technician)
    assert str(refusal.value) == (
        "step 6 is done with the energy isolated: tick the lockout (step 5) and isolation points "
        "'Mount isolator', 'Brake air valve' first"
    )
    services.checklist_tick_set(underway, POINT, mount.pk, True, technician)
    with pytest.raises(services.Refused, match=r"^step 6 is done with the energy isolated: tick the lockout "
                                               r"\(step 5\) and isolation point 'Brake air valve' first$"):
        services.checklist_tick_set(underway, STEP, 5, True, technician)
    assert len(_ticks()) == len(before) + 1  # the point's tick only

    services.checklist_tick_set(underway, POINT, air.pk, True, technician)
    with pytest.raises(services.Refused, match=r"^step 6 is done with the energy isolated: tick the lockout "
                                               r"\(step 5\) first$"):
        services.checklist_tick_set(underway, STEP, 5, True, technician)
    services.checklist_tick_set(underway, STEP, 4, True, technician)
    services.checklist_tick_set(underway, STEP, 5, True, technician)
    assert selectors.checklist(underway).steps[5].ticked


def test_the_lockout_step_is_ticked_once_every_point_it_locks_is(underway, users):
    """The lockout step's own words are "Isolate, lock and tag every energy source listed under 'Energy isolation
    points'; relieve or restrain stored energy ...; try to start the drives ...": each point is ticked as its lock
    goes on, and the step, which takes them all in, once every one is (OSHA 29 CFR 1910.147(d)(4) to (d)(6), in that
    order)."""
    assert services.LOCKOUT_STEP.startswith("Isolate, lock and tag every energy source listed under 'Energy")
    technician = users["technician"]
    air = _brake_air(underway)
    services.checklist_tick_set(underway, POINT, _point(underway).pk, True, technician)
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(underway, STEP, 4, True, technician)
    assert str(refusal.value) == (
        "step 5 is the lockout, which locks and tags every isolation point: tick isolation point "
        "'Brake air valve' first"
    )
    services.checklist_tick_set(underway, POINT, air.pk, True, technician)
    services.checklist_tick_set(underway, STEP, 4, True, technician)
    assert selectors.checklist(underway).steps[4].ticked


def test_a_step_under_power_that_may_move_an_axis_is_not_ticked_while_the_locks_are_on(underway, users):
    """A tablet walk-through ticked every isolation point, then "slew and track from the control computer", then the
    lockout: the record said the telescope slewed with its drives locked out. Before the lockout, a step that may move
    an axis (services.moves_or_restores) is refused once a point or the lockout is ticked, until the release says the
    locks are off (OSHA 29 CFR 1910.147(d): shutdown under power comes before the isolating devices are locked)."""
    technician = users["technician"]
    steps = underway.step_list
    moving = sorted(i for i in services.moves_or_restores(steps) if i < 4)
    assert moving, "the axis order has steps under power that may move an axis before its lockout"
    mount = _point(underway)
    for index in (i for i in range(4) if i not in moving):  # those that move no axis are free
        services.checklist_tick_set(underway, STEP, index, True, technician)
    services.checklist_tick_set(underway, POINT, mount.pk, True, technician)
    before = _ticks()
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(underway, STEP, moving[0], True, technician)
    assert str(refusal.value) == (
        f"step {moving[0] + 1} is done under power before the lockout and may move an axis, but isolation point "
        "'Mount isolator' is ticked as locked: if it was done before the locks went on, take back those ticks first, "
        "tick this one, then tick them again; if not, it is not done with the locks on"
    )
    assert _ticks() == before  # nothing stored
    # Taken back, the point is ticked again after the moves, in their sequence.
    services.checklist_tick_set(underway, POINT, mount.pk, False, technician)
    for index in moving:
        services.checklist_tick_set(underway, STEP, index, True, technician)
    services.checklist_tick_set(underway, POINT, mount.pk, True, technician)
    services.checklist_tick_set(underway, STEP, 4, True, technician)
    assert all(line.ticked for line in selectors.checklist(underway).steps[:5])


def test_with_the_lockout_ticked_a_move_under_power_waits_for_the_release(underway, users):
    technician = users["technician"]
    steps = underway.step_list
    moving = min(i for i in services.moves_or_restores(steps) if i < 4)
    services.checklist_tick_set(underway, POINT, _point(underway).pk, True, technician)
    services.checklist_tick_set(underway, STEP, 4, True, technician)  # the lockout
    with pytest.raises(services.Refused, match=rf"^step {moving + 1} is done under power before the lockout and may "
                                               r"move an axis, but the lockout \(step 5\) and isolation point "
                                               r"'Mount isolator' are ticked as locked: "):
        services.checklist_tick_set(underway, STEP, moving, True, technician)
    services.checklist_tick_set(underway, STEP, 5, True, technician)  # the locked-out work
    services.checklist_tick_set(underway, STEP, 6, True, technician)  # the release: the locks are off
    services.checklist_tick_set(underway, STEP, moving, True, technician)  # under power again
    assert selectors.checklist(underway).steps[moving].ticked


def test_the_release_is_not_taken_back_from_under_a_move_under_power_ticked_after_it(underway, users):
    """A diff review ticked the slew (before the lockout) once the release said the locks were off, then took the
    release back: the record showed the slew with the locks on. The release's tick stays while such a move stands."""
    technician = users["technician"]
    moving = min(i for i in services.moves_or_restores(underway.step_list) if i < 4)
    services.checklist_tick_set(underway, POINT, _point(underway).pk, True, technician)
    for index in (4, 5, 6):  # the lockout, the locked-out work, the release
        services.checklist_tick_set(underway, STEP, index, True, technician)
    services.checklist_tick_set(underway, STEP, moving, True, technician)
    with pytest.raises(services.Refused, match=rf"^the tick on step 7 stays: take back step {moving + 1} first: it "
                                               r"was done after the locks came off$"):
        services.checklist_tick_set(underway, STEP, 6, False, technician)


def test_without_registered_points_only_the_lockout_step_comes_first(underway, users):
    _point(underway).delete()
    assert selectors.isolation_points(underway) == []
    with pytest.raises(services.Refused, match=r"^step 6 is done with the energy isolated: tick the lockout "
                                               r"\(step 5\) first$"):
        services.checklist_tick_set(underway, STEP, 5, True, users["technician"])
    services.checklist_tick_set(underway, STEP, 4, True, users["technician"])
    services.checklist_tick_set(underway, STEP, 5, True, users["technician"])


def _locked_out_and_working(work_order, users) -> IsolationPoint:
    """The axis order with its point locked, the lockout step ticked and the locked-out inspection (step 6) done."""
    point = _point(work_order)
    services.checklist_tick_set(work_order, POINT, point.pk, True, users["technician"])
    services.checklist_tick_set(work_order, STEP, 4, True, users["technician"])
    services.checklist_tick_set(work_order, STEP, 5, True, users["technician"])
    return point


def test_the_lockout_is_not_taken_back_from_under_the_work_done_locked_out(underway, users):
    """A technician's review: taking back the lockout step or a point after the locked-out work was ticked left
    that work in the record with no lockout before it. The record keeps the sequence of the lockout (OSHA 29 CFR
    1910.147(d)) after the fact too: the locked-out work's tick is taken back first, naming it, and nothing is
    stored meanwhile."""
    engineer = users["engineer"]
    point = _locked_out_and_working(underway, users)
    before = _ticks()
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(underway, STEP, 4, False, engineer, in_place_of=AWAY)
    assert str(refusal.value) == (
        "the tick on step 5 stays: take back step 6 first: it was done with the energy isolated"
    )
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(underway, POINT, point.pk, False, engineer, in_place_of=AWAY)
    assert str(refusal.value) == (  # the lockout step stands on the point too: both, in an order that works
        "the tick on isolation point 'Mount isolator' stays: take back steps 6 and 5 first: step 6 was done with "
        "the energy isolated; step 5 is the lockout, which says every isolation point is locked"
    )
    assert _ticks() == before

    services.checklist_tick_set(underway, STEP, 5, False, engineer)  # the locked-out work's own tick: always
    with pytest.raises(services.Refused, match=r"^the tick on isolation point 'Mount isolator' stays: take back "
                                               r"step 5 first: it is the lockout, which says every isolation "
                                               r"point is locked$"):
        services.checklist_tick_set(underway, POINT, point.pk, False, engineer, in_place_of=AWAY)
    services.checklist_tick_set(underway, STEP, 4, False, engineer, in_place_of=AWAY)
    services.checklist_tick_set(underway, POINT, point.pk, False, engineer, in_place_of=AWAY)
    assert not any(line.ticked for line in selectors.checklist(underway).steps + selectors.checklist(underway).points)
    assert [t[4] for t in _ticks()[len(before):]] == [False, False, False]  # each taking back recorded
    with pytest.raises(services.Refused, match="tick the lockout \\(step 5\\) and isolation point 'Mount isolator'"):
        services.checklist_tick_set(underway, STEP, 5, True, users["technician"])


def test_the_release_step_is_ticked_only_after_the_lockout_step(underway, users):
    """Step 7 (catalogue.RELEASE) removes the locks, which the record shows put on first: OSHA 29 CFR 1910.147(e),
    release from lockout, comes after the work done under (d). The restoring step after it (step 8) waits for it in
    turn (test_the_steps_under_power_are_not_held_and_the_restoring_steps_wait_for_the_release)."""
    technician = users["technician"]
    assert underway.step_list[6] == RELEASE
    before = _ticks()
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(underway, STEP, 6, True, technician)
    assert str(refusal.value) == "step 7 removes the locks: tick the lockout (step 5) first"
    assert _ticks() == before
    services.checklist_tick_set(underway, POINT, _point(underway).pk, True, technician)
    services.checklist_tick_set(underway, STEP, 4, True, technician)
    services.checklist_tick_set(underway, STEP, 6, True, technician)  # the locked-out step 6 need not be ticked
    assert selectors.checklist(underway).steps[6].ticked


def test_locked_out_work_is_not_ticked_once_the_release_says_the_locks_are_off(underway, users):
    """Release from lockout comes after the work is complete, OSHA 29 CFR 1910.147(e): a locked-out step ticked
    after the release would show isolated work done without the locks. It is refused, saying how to record work
    that was in fact done before the release; taking the release back and ticking in order is accepted."""
    technician = users["technician"]
    services.checklist_tick_set(underway, POINT, _point(underway).pk, True, technician)
    services.checklist_tick_set(underway, STEP, 4, True, technician)
    services.checklist_tick_set(underway, STEP, 6, True, technician)  # the release, step 6 not ticked
    before = _ticks()
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(underway, STEP, 5, True, technician)
    assert str(refusal.value).startswith(
        "step 6 is done with the energy isolated, but step 7 says the locks were removed: if it was done before the "
        "release, take back step 7 first"
    )
    assert _ticks() == before
    services.checklist_tick_set(underway, STEP, 6, False, technician)
    services.checklist_tick_set(underway, STEP, 5, True, technician)
    services.checklist_tick_set(underway, STEP, 6, True, technician)
    assert [line.ticked for line in selectors.checklist(underway).steps[4:7]] == [True, True, True]


def test_the_lockout_is_not_taken_back_from_under_the_release_and_the_release_can_be(underway, users):
    engineer = users["engineer"]
    point = _locked_out_and_working(underway, users)
    services.checklist_tick_set(underway, STEP, 6, True, users["technician"])
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(underway, STEP, 4, False, engineer, in_place_of=AWAY)
    assert str(refusal.value) == (
        "the tick on step 5 stays: take back steps 7 and 6 first: step 7 says the locks were removed; step 6 was "
        "done with the energy isolated"
    )
    with pytest.raises(services.Refused, match=r"take back steps 7, 6 and 5 first: step 7 says the locks were "
                                               r"removed; step 6 was done"):
        services.checklist_tick_set(underway, POINT, point.pk, False, engineer, in_place_of=AWAY)
    for index in (6, 5, 4):  # as the refusals name them
        services.checklist_tick_set(underway, STEP, index, False, engineer, in_place_of=AWAY)
    services.checklist_tick_set(underway, POINT, point.pk, False, engineer, in_place_of=AWAY)


def test_several_locked_out_steps_are_named_together(drive, users, site):  # noqa: F811  (fixture, imported above)
    brakes = services.work_order_ad_hoc(
        site, [drive], "Brake service", users["engineer"], powered="Park the telescope at its service position.",
        steps="Replace the brake pads.\nTighten the motor mount.",
    )
    brakes.planned_date = dt.date(2026, 6, 16)  # issued only with one
    brakes.save()
    _start(brakes, users)
    # Step 0 takes the observatory out of robotic and remote control (the drive can move the telescope).
    assert services.isolated_steps(brakes.step_list) == (2, range(3, 5))
    services.checklist_tick_set(brakes, POINT, _point(brakes).pk, True, users["technician"])
    for index in (2, 3, 4):
        services.checklist_tick_set(brakes, STEP, index, True, users["technician"])
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(brakes, STEP, 2, False, users["technician"])
    assert str(refusal.value) == (
        "the tick on step 3 stays: take back steps 5 and 4 first: they were done with the energy isolated"
    )
    services.checklist_tick_set(brakes, STEP, 3, False, users["technician"])  # locked-out work: in any order
    services.checklist_tick_set(brakes, STEP, 4, False, users["technician"])
    services.checklist_tick_set(brakes, STEP, 2, False, users["technician"])


def test_a_tick_on_a_point_whose_words_changed_since_counts_for_nothing_in_the_sequence(underway, users):
    point = _point(underway)
    services.checklist_tick_set(underway, POINT, point.pk, True, users["technician"])
    point.location = "behind the pier door"  # the point's line now reads otherwise: its tick no longer counts
    point.save()
    with pytest.raises(services.Refused, match="tick isolation point 'Mount isolator' first"):
        services.checklist_tick_set(underway, STEP, 4, True, users["technician"])


def test_the_steps_under_power_are_not_held_and_the_restoring_steps_wait_for_the_release(underway, users):
    """The steps before the lockout are done under power and wait for nothing. The restoring step after the release
    (step 8) powers the subsystem up again, which the locks prevent: it is ticked only once the release (step 7) says
    they are off (OSHA 29 CFR 1910.147(e)), and the release's tick then stays until the restoring's is taken back."""
    technician = users["technician"]
    for index in (0, 3):
        services.checklist_tick_set(underway, STEP, index, True, technician)
    before = _ticks()
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(underway, STEP, 7, True, technician)
    assert str(refusal.value) == "step 8 is done after the locks come off: tick step 7, which removes them, first"
    assert _ticks() == before
    _locked_out_and_working(underway, users)
    services.checklist_tick_set(underway, STEP, 6, True, technician)
    services.checklist_tick_set(underway, STEP, 7, True, technician)
    assert [line.ticked for line in selectors.checklist(underway).steps] == [
        True, False, False, True, True, True, True, True, False  # step 9 hands the observatory back
    ]
    with pytest.raises(services.Refused) as refusal:
        services.checklist_tick_set(underway, STEP, 6, False, users["engineer"], in_place_of=AWAY)
    assert str(refusal.value) == (
        "the tick on step 7 stays: take back step 8 first: it was done after the locks came off"
    )


def test_an_order_whose_hazards_need_no_isolation_is_ticked_in_any_order(site, users, telescope):
    from observatory_ops.registry.services import subsystem_create

    mast = subsystem_create(

        telescope, "other", "Weather mast", counting_from=dt.date(2026, 1, 1), no_hazards_found=True

    )
    cleaning = services.work_order_ad_hoc(
        site, [mast], "Clean the rain sensor", users["engineer"],
        steps="Wipe the rain sensor.\nCheck the sensor reads dry.", powered="Note the sensor's reading.",
    )
    cleaning.planned_date = dt.date(2026, 6, 16)  # issued only with one
    cleaning.save()
    assert not needs_isolation(cleaning.hazards) and services.LOCKOUT_STEP not in cleaning.step_list
    _start(cleaning, users)
    services.checklist_tick_set(cleaning, STEP, 2, True, users["technician"])  # the last step first
    services.checklist_tick_set(cleaning, STEP, 0, True, users["technician"])
    assert [line.ticked for line in selectors.checklist(cleaning).steps] == [True, False, True]


# --- the page -------------------------------------------------------------------------------------------


def _post(client, work_order, follow=False, **data):
    """The Record button's post (no JavaScript); ``follow`` to get the page it is sent back to."""
    return client.post(f"/workorders/{work_order.pk}/tick/", data, follow=follow)


def test_a_viewer_gets_403_on_the_tick_post_and_nothing_is_stored(underway, users, client):
    client.force_login(users["viewer"])
    response = _post(client, underway, kind="step", key="0", ticked="1")
    assert response.status_code == 403
    assert not ChecklistTick.objects.exists()


def test_a_tick_posted_without_javascript_returns_to_the_line_and_the_page_says_who_and_when(
    underway, users, client
):
    client.force_login(users["technician"])
    response = _post(client, underway, kind="step", key="1", ticked="1", text=underway.step_list[1])
    assert response.status_code == 302 and response["Location"] == f"/workorders/{underway.pk}/#step-2"
    point = _point(underway)
    response = _post(client, underway, kind="point", key=str(point.pk), ticked="1", text=point.description)
    assert response["Location"] == f"/workorders/{underway.pk}/#point-{point.pk}"
    tick = ChecklistTick.objects.get(kind=STEP)
    assert (tick.step_index, tick.ticked, tick.recorded_by) == (1, True, users["technician"])

    page = client.get(underway.get_absolute_url()).content.decode()
    assert f"ticked by technician, {_page_time(tick.recorded_at)}" in page  # site time, Europe/Madrid
    assert page.count(" checked") == 2 and page.count(">Record</button>") == len(underway.step_list) + 1

    # An unticked box posts no "ticked" field: the tick is taken back.
    _post(client, underway, kind="step", key="1", text=underway.step_list[1])
    assert "tick taken back by technician" in client.get(underway.get_absolute_url()).content.decode()


def test_a_refused_tick_on_the_page_says_why_and_stores_nothing(draft, users, client):
    client.force_login(users["technician"])
    response = _post(client, draft, kind="step", key="0", ticked="1", text=draft.step_list[0])
    assert response["Location"] == f"/workorders/{draft.pk}/#step-1"  # back at the line, as after a tick
    page = client.get(response["Location"]).content.decode()
    assert "Not recorded: ticks are recorded only while the work is underway" in _line(page, "step-1")
    assert "A technician ticks each step and each isolation point once the work has started." in page
    response = _post(client, draft)  # an empty post names no line: the page's top says so
    assert response["Location"] == f"/workorders/{draft.pk}/"
    assert "did not say which line" in client.get(response["Location"]).content.decode()
    assert not ChecklistTick.objects.exists()


def test_a_script_post_gets_the_note_or_the_refusal_as_json(underway, users, client):
    client.force_login(users["technician"])
    answer = client.post(f"/workorders/{underway.pk}/tick/", {"kind": "step", "key": "0", "ticked": "1"},
                         HTTP_ACCEPT="application/json")
    tick = ChecklistTick.objects.get()
    assert answer.json() == {"ticked": True, "note": f"ticked by technician, {_page_time(tick.recorded_at)}"}
    refused = client.post(f"/workorders/{underway.pk}/tick/", {"kind": "step", "key": "99", "ticked": "1"},
                          HTTP_ACCEPT="application/json")
    assert refused.status_code == 409 and refused.json()["error"].startswith("Not recorded: there is no step 100")
    assert ChecklistTick.objects.count() == 1
    # Someone else's tick got there first: the refusal says how the line stands, so the box can show it.
    again = client.post(f"/workorders/{underway.pk}/tick/", {"kind": "step", "key": "0", "ticked": "1"},
                        HTTP_ACCEPT="application/json")
    assert again.status_code == 409 and again.json()["ticked"] is True
    assert "already ticked" in again.json()["error"] and again.json()["note"].startswith("ticked by technician")


def test_locked_out_work_ticked_too_soon_is_refused_on_the_page_with_and_without_javascript(underway, users, client):
    """The sequence of the lockout (OSHA 29 CFR 1910.147(d)) as the tablet meets it: the refusal names what to tick
    first, on the page after a plain post, and in the JSON a script's post gets (its box shows the line as it
    stands, unticked)."""
    client.force_login(users["technician"])
    said = ("Not recorded: step 6 is done with the energy isolated: tick the lockout (step 5) and isolation point "
            "'Mount isolator' first.")
    response = _post(client, underway, kind="step", key="5", ticked="1", text=underway.step_list[5])
    assert response.status_code == 302
    assert escape(said) in client.get(response["Location"]).content.decode()
    answer = client.post(f"/workorders/{underway.pk}/tick/", {"kind": "step", "key": "5", "ticked": "1"},
                         HTTP_ACCEPT="application/json")
    assert answer.status_code == 409 and answer.json() == {"error": said, "ticked": False, "note": ""}
    assert not ChecklistTick.objects.exists()


def _line(page: str, anchor: str) -> str:
    """The checklist line with that id, as the page shows it (its box, words, Record button and note)."""
    return re.search(rf'<li id="{anchor}"[^>]*>(.*?)</li>', page, re.S).group(1)


def _note(page: str, anchor: str) -> str:
    return re.search(r'<span class="tick-note[^"]*"[^>]*>(.*?)</span>', _line(page, anchor), re.S).group(1)


def test_without_javascript_a_refusal_returns_to_its_line_and_says_why_there_for_that_page_only(
    underway, users, client
):
    """A technician's review: a refused Record reloaded at the top of the page while a recorded one returned to
    the line, and an old "Not recorded" stayed on a line after its reason was dealt with. The refusal is said at
    its line (and at the page's top) on the page that answers it, and on no page after."""
    client.force_login(users["technician"])
    response = _post(client, underway, kind="step", key="5", ticked="1", text=underway.step_list[5], follow=True)
    assert response.redirect_chain == [(f"/workorders/{underway.pk}/#step-6", 302)]
    page = response.content.decode()
    said = escape("Not recorded: step 6 is done with the energy isolated: tick the lockout (step 5) and isolation "
                  "point 'Mount isolator' first.")
    assert _note(page, "step-6") == said and 'class="tick-note refused" role="alert"' in _line(page, "step-6")
    assert said in page.split('id="step-6"')[0]  # at the top too, among the page's messages
    assert " checked" not in _line(page, "step-6")  # the box shows the line as recorded: not ticked
    assert not any("refused" in _line(page, anchor) for anchor in ("step-5", f"point-{_point(underway).pk}"))

    # The reason dealt with (the point and the lockout ticked, each with its Record button): the note is gone.
    point = _point(underway)
    _post(client, underway, kind="point", key=str(point.pk), ticked="1", text=point.description)
    _post(client, underway, kind="step", key="4", ticked="1", text=underway.step_list[4])
    page = client.get(underway.get_absolute_url()).content.decode()
    assert "Not recorded" not in page and _note(page, "step-6") == ""
    assert not ChecklistTick.objects.filter(step_index=5).exists()


def test_without_javascript_a_refused_taking_back_stays_at_its_line_with_the_recorded_note(underway, users, client):
    point = _locked_out_and_working(underway, users)
    client.force_login(users["engineer"])
    # An unticked box posts no "ticked" field: the tick on the point would be taken back.
    response = _post(client, underway, kind="point", key=str(point.pk), text=point.description, follow=True)
    assert response.redirect_chain == [(f"/workorders/{underway.pk}/#point-{point.pk}", 302)]
    note = _note(response.content.decode(), f"point-{point.pk}")
    assert note.startswith(escape("Not recorded: the tick on isolation point 'Mount isolator' stays: take back "
                                  "steps 6 and 5 first: step 6 was done with the energy isolated; "))
    assert note.endswith("(ticked by technician, " + _page_time(ChecklistTick.objects.get(kind=POINT).recorded_at)
                         + ")")  # and how the line stands, as the script shows it
    assert " checked" in _line(response.content.decode(), f"point-{point.pk}")
    assert "Not recorded" not in client.get(underway.get_absolute_url()).content.decode()  # a reload: gone


def test_a_refusal_on_one_order_is_not_said_on_another(underway, users, client, drive):  # noqa: F811
    other = services.work_order_from_due(list(drive.plans.all()), users["engineer"], dt.date(2026, 6, 17))
    client.force_login(users["technician"])
    _post(client, underway, kind="step", key="5", ticked="1", text=underway.step_list[5])
    assert "Not recorded" not in _note(client.get(other.get_absolute_url()).content.decode(), "step-6")


@pytest.mark.parametrize("key", ["\N{SUPERSCRIPT TWO}", "-1", "1.5", " 1"])
def test_a_line_number_that_is_not_plain_digits_is_refused_not_an_error(underway, users, client, key):
    client.force_login(users["technician"])
    answer = client.post(f"/workorders/{underway.pk}/tick/", {"kind": "step", "key": key, "ticked": "1"},
                         HTTP_ACCEPT="application/json")
    assert answer.status_code == 409 and "did not say which line" in answer.json()["error"]
    assert not ChecklistTick.objects.exists()


def test_a_finished_order_shows_its_ticks_read_only(underway, users, client):
    services.checklist_tick_set(underway, STEP, 0, True, users["technician"])
    _finish(underway, users)
    client.force_login(users["technician"])
    page = client.get(underway.get_absolute_url()).content.decode()
    assert "ticked by technician" in page
    # Every step and the one point, each with a box that shows its tick and is no control, in no form.
    assert page.count('<span class="tick-box" role="img"') == len(underway.step_list) + 1
    assert page.count('<span class="tick-box" role="img" aria-label="ticked">') == 1
    assert f'action="/workorders/{underway.pk}/tick/"' not in page and 'name="ticked"' not in page
    assert "<button type=\"submit\" class=\"noprint\">Record</button>" not in page


# --- the printed record ---------------------------------------------------------------------------------


def test_the_finished_paper_prints_each_tick_once_beside_its_line_with_who_and_when(underway, users):
    point = _point(underway)
    services.checklist_tick_set(underway, STEP, 0, True, users["technician"])  # under power, before the locks
    services.checklist_tick_set(underway, STEP, 2, True, users["engineer"])
    services.checklist_tick_set(underway, STEP, 2, False, users["engineer"], in_place_of=AWAY)
    services.checklist_tick_set(underway, POINT, point.pk, True, users["technician"])
    assert selectors.sheet(underway, "https://ops.example/wo/1/").confirmations == ()  # not finished yet
    _finish(underway, users)

    sheet = selectors.sheet(underway, "https://ops.example/wo/1/")
    step_tick = ChecklistTick.objects.get(kind=STEP, step_index=0)
    point_tick = ChecklistTick.objects.get(kind=POINT)
    taken_back = ChecklistTick.objects.filter(kind=STEP, step_index=2).last()
    local = "%d %b %Y %H:%M"
    lockout = underway.step_list.index(services.LOCKOUT_STEP)
    # Beside each line: who ticked it and when, or, for a line nobody ticked, what the technician confirmed at
    # finishing: the lockout step on its own (the energy isolated, tests/test_workorder_finish_record.py), the
    # others as done or not applicable. Step 3 was ticked and taken back: both are said.
    assert sheet.point_ticks == (
        SheetTick(True, f"ticked by technician, {point_tick.recorded_at.astimezone(MADRID).strftime(local)}"),
    )
    assert sheet.step_ticks[0] == SheetTick(
        True, f"ticked by technician, {step_tick.recorded_at.astimezone(MADRID).strftime(local)}"
    )
    assert sheet.step_ticks[2] == SheetTick(
        False, f"tick taken back by engineer, {taken_back.recorded_at.astimezone(MADRID).strftime(local)}; not ticked; "
        "at finishing technician confirmed it was done or did not apply"
    )
    assert sheet.step_ticks[lockout] == SheetTick(
        False, "not ticked; at finishing technician confirmed: the energy was isolated, not ticked here"
    )
    # The list after the readings carries only what no line does: the answer for the isolation, in full.
    assert sheet.confirmations == (
        "Finished with the energy isolation not ticked; technician confirmed, apart from the other lines: "
        + ISOLATION_UNTICKED[ISOLATED],
    )
    pages = PdfReader(io.BytesIO(pdf.render_sheet(sheet))).pages
    text = " ".join(" ".join(page.extract_text().split()) for page in pages)
    assert "Checklist as ticked" not in text and "Confirmed when the work was finished" in text
    when = step_tick.recorded_at.astimezone(MADRID).strftime(local)
    assert text.count(f"ticked by technician, {when}") == 1 + (
        point_tick.recorded_at.astimezone(MADRID).strftime(local) == when
    )  # once, beside step 1 (the point's tick, in the same minute, is beside the point)
    assert text.count(underway.step_list[0]) == 1

    # Not the engineer, who took a tick back: someone with no hand in the work (services.countersign_refusal).
    services.work_order_move(underway, "countersign", users["administrator"])
    underway.refresh_from_db()
    assert selectors.sheet(underway, "https://ops.example/wo/1/").confirmations == sheet.confirmations


def test_a_tick_on_a_line_no_longer_on_the_order_is_kept_in_the_list_after_the_readings(underway, users):
    """The one thing only the second list carried: a tick on a line the order no longer lists (here its isolation
    point, moved to another telescope after the work), by whom and when. A tick on a line whose words changed since
    is said beside that line, once."""
    point = _point(underway)
    tick = services.checklist_tick_set(underway, POINT, point.pk, True, users["technician"])
    _finish(underway, users)
    underway.refresh_from_db()
    kept = selectors.sheet(underway, "https://ops.example/wo/1/")
    IsolationPoint.objects.filter(pk=point.pk).update(label="Mount main isolator")
    elsewhere = Telescope.objects.create(site=underway.site, name="T2", aperture_m=0.4, mount="fork")
    # The record keeps its isolation as it stood at finishing (``WorkOrder.isolation_at_finish``): renaming the point
    # or moving it to another telescope afterwards changes nothing of it.
    def printed(sheet):  # all but the time of printing
        return dataclasses.replace(sheet, generated_at=None)

    assert printed(selectors.sheet(underway, "https://ops.example/wo/1/")) == printed(kept)
    IsolationPoint.objects.filter(pk=point.pk).update(telescope=elsewhere)
    assert printed(selectors.sheet(underway, "https://ops.example/wo/1/")) == printed(kept)
    assert kept.point_ticks[0].ticked and kept.isolation_points[0].endswith("Mount isolator")

    # An order finished before the isolation was kept reads the register as it is now.
    WorkOrder.objects.filter(pk=underway.pk).update(isolation_at_finish=None)
    underway.refresh_from_db()
    IsolationPoint.objects.filter(pk=point.pk).update(telescope=underway.telescope)
    sheet = selectors.sheet(underway, "https://ops.example/wo/1/")
    assert not any("Mount isolator" in line for line in sheet.confirmations)
    assert not sheet.point_ticks[0].ticked and f"when it read \"{tick.text}\"" in sheet.point_ticks[0].note

    IsolationPoint.objects.filter(pk=point.pk).update(telescope=elsewhere)
    sheet = selectors.sheet(underway, "https://ops.example/wo/1/")
    when = tick.recorded_at.astimezone(MADRID).strftime("%d %b %Y %H:%M")
    assert sheet.confirmations[-1] == (
        f"Isolation point (no longer on this order): {tick.text} \N{EM DASH} ticked by technician, {when}"
    )


# --- finishing with lines not ticked -----------------------------------------------------------------------


def _finish_form(work_order, **extra) -> dict:
    from observatory_ops.planning.services import site_today

    data = {"actual_hours": "1.5", "findings": "done", "work_done_on": site_today(work_order.site).isoformat()}
    data.update({f"reading_{pk}": str(value) for pk, value in _all_readings(work_order, 0.6).items()})
    return {**data, **extra}


def test_the_finish_page_lists_the_unticked_lines_the_energy_isolation_apart_and_first(underway, users, client):
    services.checklist_tick_set(underway, STEP, 0, True, users["technician"])
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{underway.pk}/finish/").content.decode()

    def listed(opening: str) -> list[str]:
        return re.findall(r"<li>(Isolation point|Step \d+): ", page.split(opening)[1].split("</ul>")[0])

    lockout = underway.step_list.index(services.LOCKOUT_STEP) + 1
    release = services.isolated_steps(underway.step_list)[1].stop + 1  # the lock removal, answered with them
    assert page.index('<ul class="unticked isolation">') < page.index('<ul class="unticked">')
    assert listed('<ul class="unticked isolation">') == ["Isolation point", f"Step {lockout}", f"Step {release}"]
    assert listed('<ul class="unticked">') == [
        f"Step {n}" for n in range(2, len(underway.step_list) + 1) if n not in (lockout, release)
    ]
    assert "I confirm the other unticked lines were done or did not apply" in page


def test_finishing_with_unticked_lines_needs_the_confirmation_and_the_record_keeps_it(underway, users, client):
    services.checklist_tick_set(underway, POINT, _point(underway).pk, True, users["technician"])
    lockout = underway.step_list.index(services.LOCKOUT_STEP)
    services.checklist_tick_set(underway, STEP, lockout, True, users["technician"])
    release = services.isolated_steps(underway.step_list)[1].stop
    services.checklist_tick_set(underway, STEP, release, True, users["technician"])
    client.force_login(users["technician"])
    open_steps = [line.text for line in selectors.unticked_lines(underway)]
    # The point, the lockout and the lock removal are ticked, no other step is: no question on the energy isolation.
    assert open_steps == [step for index, step in enumerate(underway.step_list) if index not in (lockout, release)]
    assert 'name="isolation_answer"' not in client.get(f"/workorders/{underway.pk}/finish/").content.decode()

    page = client.post(f"/workorders/{underway.pk}/finish/", _finish_form(underway, unticked=open_steps))
    assert "confirm here that they were done or did not apply" in page.content.decode()
    assert WorkOrder.objects.get(pk=underway.pk).state == State.UNDERWAY

    confirmed = _finish_form(underway, unticked=open_steps, confirm_unticked="on")
    page = client.post(f"/workorders/{underway.pk}/finish/", confirmed, follow=True).content.decode()
    underway.refresh_from_db()
    assert underway.state == State.FINISHED
    assert underway.unticked_at_finish == [
        f"Step {n}: {text}" for n, text in enumerate(underway.step_list, start=1) if n not in (lockout + 1, release + 1)
    ]
    assert underway.isolation_unticked_at_finish == [] and underway.isolation_confirmed_at_finish == ""
    assert len(open_steps) > 1
    assert f"Finished with {len(open_steps)} checklist lines not ticked; technician confirmed" in page
    assert f"{len(open_steps)} unticked lines confirmed as done or not applicable are on the record." in page


def test_a_line_whose_tick_was_taken_back_after_the_page_loaded_is_not_confirmed_unseen(underway, users):
    _point(underway)
    ticked_in_sequence(underway, users["technician"], through=len(underway.step_list) - 2)
    seen = [line.text for line in selectors.unticked_lines(underway)]  # only the last step
    services.checklist_tick_set(underway, STEP, 0, False, users["engineer"])  # meanwhile, on another tablet
    with pytest.raises(services.Refused, match=r"not ticked: step 1 \("):
        services.work_order_finish(underway, users["technician"], 1.0, "", _all_readings(underway, 0.6),
                                   confirmed_unticked=seen)
    underway.refresh_from_db()
    assert underway.state == State.UNDERWAY and underway.unticked_at_finish == []


def test_with_every_line_ticked_finishing_needs_no_confirmation(underway, users, client):
    _point(underway)
    ticked_in_sequence(underway, users["technician"])
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{underway.pk}/finish/").content.decode()
    assert "Every isolation point and step is ticked." in page and "I confirm" not in page
    response = client.post(f"/workorders/{underway.pk}/finish/", _finish_form(underway))
    assert response.status_code == 302
    underway.refresh_from_db()
    assert underway.state == State.FINISHED and underway.unticked_at_finish == []
    assert not any(line.startswith("Not ticked") for line in selectors.sheet(underway, "https://x/").confirmations)


def test_the_finish_page_of_an_order_not_underway_sends_back_to_the_order(draft, users, client):
    client.force_login(users["technician"])
    response = client.get(f"/workorders/{draft.pk}/finish/", follow=True)
    assert "is draft: there is nothing to finish" in response.content.decode()


# --- the Record buttons and the stylesheet ------------------------------------------------------------------


def test_the_hidden_attribute_wins_over_the_stylesheet_display_rules():
    # site.css gives buttons display:inline-block, which would otherwise beat the hidden attribute the
    # checklist script sets on the Record buttons (HTML Living Standard: [hidden] is only display:none
    # in the user agent's sheet, which author rules override).
    from pathlib import Path

    css = (Path(__file__).parent.parent / "observatory_ops/static/observatory_ops/site.css").read_text()
    assert re.search(r"\[hidden\]\s*\{\s*display\s*:\s*none\s*!important\s*;?\s*\}", css)


def test_without_javascript_every_line_has_its_record_button(underway, users, client):
    client.force_login(users["technician"])
    page = client.get(underway.get_absolute_url()).content.decode()
    buttons = re.findall(r'<button type="submit" class="noprint"[^>]*>Record</button>', page)
    assert len(buttons) == len(underway.step_list) + 1 and not any("hidden" in b for b in buttons)


def test_the_isolation_points_say_which_step_locks_them_and_that_the_steps_under_power_come_first(
    underway, users, client
):
    """A review ticked the order's page top to bottom: the isolation points, listed above the steps, first; then the
    steps under power before the lockout were refused (a move under power with the locks on). The points now say at
    which step they are locked, and that the steps before it come first."""
    lockout = services.isolated_steps(underway.step_list)[0]
    assert lockout >= 2  # the order's steps under power: out of robotic control and parking, at least
    client.force_login(users["technician"])
    page = client.get(underway.get_absolute_url()).content.decode()
    assert (f"Locked at step {lockout + 1}, the lockout, after steps 1 to {lockout} under power: tick those first, "
            "since a step under power that may move the telescope is refused once a lock is ticked.") in page
