"""Each lock comes off by the person who put it on (OSHA 29 CFR 1910.147(e)(3); a group lockout, (f)(3)): the tick of an
isolation point or of the lockout is taken back only by whoever recorded it, and the removal of the locks is ticked only
by someone who recorded the order's lockout or one of its points, and taken back only by whoever ticked it. An engineer
may, where the one who put the lock on cannot be reached, under the site's procedure for a lock left on ((e)(3)), and is
named on the tick.

An auditor's review: a second technician took back another crew's lock ticks one by one, which let a second crew's
brake air through, and ticked a lock removal on an order they had no part in. The order is that of
tests/test_workorders.py (an axis drive of T1, one AC isolation point)."""
from __future__ import annotations

import pytest
from conftest import mains_isolator, ticked_in_sequence
from django.contrib.auth.models import Group, User
from test_workorders import PLANNED, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.models import WorkOrder

pytestmark = pytest.mark.django_db


@pytest.fixture
def locked_out(order, telescope, users):  # noqa: F811
    """The drive order underway, its points and lockout ticked by the technician, its release not."""
    mains_isolator(telescope)
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    underway = WorkOrder.objects.get(pk=order.pk)
    lockout, locked = services.isolated_steps(underway.step_list)
    ticked_in_sequence(underway, users["technician"], through=lockout)
    return underway, lockout, locked.stop


@pytest.fixture
def second_technician(db):
    other = User.objects.create_user("tech2", password="pw-tech2-123456")
    other.groups.add(Group.objects.get(name="technician"))
    return other


def test_only_whoever_recorded_a_lock_takes_its_tick_back(locked_out, second_technician, users):
    underway, lockout, _release = locked_out
    point = next(p for p in selectors.checklist(underway).points if p.ticked)
    for kind, key in (("step", lockout), ("point", point.key)):
        with pytest.raises(services.Refused, match="was recorded by technician: only they take its tick back"):
            services.checklist_tick_set(underway, kind, key, False, second_technician)
    assert selectors.checklist(underway).points[0].ticked  # refused: nothing stored
    services.checklist_tick_set(underway, "step", lockout, False, users["technician"])  # their own: taken back


def test_the_locks_come_off_by_those_who_put_them_on(locked_out, second_technician, users):
    underway, lockout, release = locked_out
    for step in range(lockout + 1, release):
        services.checklist_tick_set(underway, "step", step, True, users["technician"])
    with pytest.raises(services.Refused, match="they were put on by technician: one of them ticks it"):
        services.checklist_tick_set(underway, "step", release, True, second_technician)
    services.checklist_tick_set(underway, "step", release, True, users["technician"])


def test_the_removal_of_the_locks_is_taken_back_only_by_whoever_ticked_it(locked_out, second_technician, users):
    """The last notes: a second technician took back the removal's tick and then could not tick it again, which
    stalled the order until its holder or an engineer came."""
    underway, lockout, release = locked_out
    for step in range(lockout + 1, release + 1):
        services.checklist_tick_set(underway, "step", step, True, users["technician"])
    with pytest.raises(services.Refused, match="was recorded by technician, who took the locks off: only they take"):
        services.checklist_tick_set(underway, "step", release, False, second_technician)
    assert selectors.latest_ticks(underway)[("step", release)].ticked  # refused: nothing stored
    services.checklist_tick_set(underway, "step", release, False, users["engineer"],
                                in_place_of="ticked by mistake; technician away, told by phone")  # the engineer may
    services.checklist_tick_set(underway, "step", release, True, users["technician"])
    services.checklist_tick_set(underway, "step", release, False, users["technician"])  # their own


def test_an_engineer_may_under_the_site_s_procedure_and_is_named(locked_out, users):
    underway, lockout, _release = locked_out
    tick = services.checklist_tick_set(underway, "step", lockout, False, users["engineer"],
                                       in_place_of="technician gone home; told by phone")
    assert tick.recorded_by == users["engineer"]
    assert selectors.checklist(underway).steps[lockout].note.startswith("tick taken back by engineer")


def test_every_tick_and_take_back_is_on_the_page_and_the_finished_paper(locked_out, users, client):
    """An auditor's review found the trail (a tick taken back, by whom) only in the staff's admin, in UTC: the page
    lists it, and the finished paper prints it."""
    import io

    from pypdf import PdfReader

    underway, lockout, _release = locked_out
    services.checklist_tick_set(underway, "step", lockout, False, users["technician"])
    services.checklist_tick_set(underway, "step", lockout, True, users["technician"])
    trail = selectors.tick_trail(underway)
    assert [row.recorded for row in trail][-2:] == ["tick taken back", "ticked"]
    assert trail[-1].line == f"Step {lockout + 1}" and trail[-1].who == "technician"
    client.force_login(users["viewer"])
    page = client.get(underway.get_absolute_url()).content.decode()
    assert f"Every tick and tick taken back, as recorded ({len(trail)})" in page and "tick taken back" in page
    WorkOrder.objects.filter(pk=underway.pk).update(state="finished")
    printed = PdfReader(io.BytesIO(client.get(f"/workorders/{underway.pk}/pdf/").content))
    text = " ".join(" ".join(p.extract_text() for p in printed.pages).split())
    assert "Every tick, as recorded" in text and "tick taken back" in text


def test_the_finish_does_not_take_off_locks_someone_else_put_on(locked_out, second_technician, users):
    """A diff review finished the order as a technician with no lock on it, its lock removal unticked and answered
    "isolated": the other's locks were then recorded as off, and other crews' steps no longer held."""
    from test_workorders import _finish_confirmations

    underway, lockout, release = locked_out
    for step in range(lockout + 1, release):
        services.checklist_tick_set(underway, "step", step, True, users["technician"])
    confirmed = _finish_confirmations(underway)

    def finish(by):
        services.work_order_finish(WorkOrder.objects.get(pk=underway.pk), by, 1.0, "done",
                                   {r.pk: 0.6 for r in underway.required_readings.all()},
                                   confirmed_unticked=confirmed["unticked"] + confirmed["isolation_unticked"],
                                   isolation_answer=confirmed["isolation_answer"])

    with pytest.raises(services.Refused, match=r"the locks on this order were put on by technician, and the removal "
                                                rf"of the locks \(step {release + 1}\) is not ticked"):
        finish(second_technician)
    assert WorkOrder.objects.get(pk=underway.pk).state == "underway"
    # A diff review finished as engineer with the technician's locks on and no why asked: the engineer ticks the
    # removal in the holder's place first, with why, kept on that tick.
    with pytest.raises(services.Refused, match="ticks it in their place, saying why, then finishes it"):
        finish(users["engineer"])
    services.checklist_tick_set(underway, "step", release, True, users["technician"])
    finish(second_technician)  # the locks are recorded as off by whoever put them on: anyone on the crew finishes
    assert WorkOrder.objects.get(pk=underway.pk).state == "finished"


def test_an_engineer_in_the_holders_place_says_why_and_it_is_kept(locked_out, users, client):
    """An auditor's review: the engineer's override asked for nothing and recorded nothing of why. OSHA 29 CFR
    1910.147(e)(3) asks that the holder is not at the facility, that reasonable efforts were made to reach them, and
    that they are told before they are back at work: the engineer says so, on the tick, the page and the paper."""
    underway, lockout, _release = locked_out
    with pytest.raises(services.Refused, match="is another's tick on a lock's line: as the site engineer you may"):
        services.checklist_tick_set(underway, "step", lockout, False, users["engineer"], in_place_of="  ")
    assert selectors.checklist(underway).steps[lockout].ticked  # refused: nothing stored
    client.force_login(users["engineer"])
    page = client.get(underway.get_absolute_url()).content.decode()
    # The lockout step and the one point, both the technician's, and the removal of the technician's locks.
    assert page.count('name="in_place_of"') == 3
    client.force_login(users["technician"])
    assert 'name="in_place_of"' not in client.get(underway.get_absolute_url()).content.decode()  # their own locks
    client.force_login(users["engineer"])
    why = "Ines left the site at 18:00, phone off; called twice; told at the gate tomorrow before she starts"
    answer = client.post(f"/workorders/{underway.pk}/tick/", {
        "kind": "step", "key": str(lockout), "text": underway.step_list[lockout], "in_place_of": why},
        headers={"Accept": "application/json"})
    assert answer.status_code == 200, answer.content
    tick = underway.ticks.order_by("pk").last()
    assert tick.in_place_of_holder == why and tick.recorded_by == users["engineer"] and not tick.ticked
    assert answer.json()["note"].endswith(f"in place of the lock's holder: {why}")
    assert selectors.tick_trail(underway)[-1].recorded == f"tick taken back, in place of the lock's holder: {why}"
