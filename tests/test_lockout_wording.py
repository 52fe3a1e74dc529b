"""The words of the lockout step, and the orders stored with an earlier wording of it.

After the locks and tags are on, OSHA 29 CFR 1910.147(d)(5) asks for all potentially hazardous stored or residual
energy to be relieved, disconnected, restrained or otherwise made safe: not pressure alone, but also the springs of a
spring-applied brake (the catalogue's spring brake; the stored-mechanical caution) and the weight of a raised or
out-of-balance part. Orders stored before the step said so carry its earlier words in their steps, and are still
found by them (``cautions.is_lockout_step``): once issued, they are started, their lockout is ticked in sequence or
answered for at finish, and their page and paper print the words they were issued with. A draft goes out with the
present words: issuing it rewords its lockout step.

Orders are those of tests/test_workorders.py (an axis drive on a telescope with one AC isolation point, "Mount
isolator").
"""
from __future__ import annotations

import html
import re

import pytest
from conftest import ticked_in_sequence
from test_lockout_steps import _edit
from test_workorder_finish import _message, _post
from test_workorder_finish_record import _pdf
from test_workorders import _all_readings, _unticked, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.registry.catalogue import RELEASE
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import (
    EARLIER_LOCKOUT_STEPS,
    ISOLATION_UNTICKED_SHORT,
    LOCKOUT_STEP,
    is_lockout_step,
)
from observatory_ops.workorders.models import State, WorkOrder

#: The lockout step as orders made before it named stored energy of every kind carry it.
EARLIER = (
    "Isolate, lock and tag every energy source listed under 'Energy isolation points'; release stored "
    "pressure; try to start the drives to prove they are dead before touching anything."
)
#: The lockout step as orders made before it said to leave the brakes applied carry it.
SPRINGS_NAMED = (
    "Isolate, lock and tag every energy source listed under 'Energy isolation points'; relieve or restrain stored "
    "energy (pressure, loaded springs, raised or out-of-balance parts); try to start the drives to prove they are "
    "dead before touching anything."
)

#: The lockout step as orders made before it said to lower raised parts before bleeding the pressure carry it.
BLEED_FIRST = (
    "Isolate, lock and tag every energy source listed under 'Energy isolation points'. Make stored energy safe: "
    "bleed any stored pressure to zero and lower or block raised parts, but leave every brake that holds an axis "
    "applied (springs are restrained only at the brake, axis pinned first). Try to start the drives to prove they "
    "are dead, then return the controls to off, before touching anything."
)


def test_the_lockout_step_makes_stored_energy_safe_without_releasing_a_brake_and_leaves_the_controls_at_off():
    """OSHA 29 CFR 1910.147(d)(5): stored energy relieved, disconnected or restrained after the locks are on; (d)(6):
    the isolation verified before work. A safety review read "relieve or restrain ... loaded springs" on a spring-brake
    order, ahead of the steps that need the brake applied, as "release the brake that holds the axis": the step now
    says to leave every such brake applied (its springs are restrained only at the brake, the axis pinned first), and
    the try-start ends with the controls back at off. It stays one checklist line."""
    assert LOCKOUT_STEP.startswith("Isolate, lock and tag every energy source listed under 'Energy isolation points'")
    # Lowered first: bleeding the pressure that holds a raised part up drops it (a safety re-check).
    assert ("first lower raised parts onto their stops or block them, then bleed any stored pressure to zero"
            in LOCKOUT_STEP)
    assert "leave every brake that holds an axis applied" in LOCKOUT_STEP and "axis pinned first" in LOCKOUT_STEP
    assert "relieve or restrain" not in LOCKOUT_STEP and "release" not in LOCKOUT_STEP
    assert LOCKOUT_STEP.endswith(
        "Try to start the drives to prove they are dead, then return the controls to off, before touching anything."
    )
    assert "\n" not in LOCKOUT_STEP and len(LOCKOUT_STEP) < 450
    assert EARLIER_LOCKOUT_STEPS == (EARLIER, SPRINGS_NAMED, BLEED_FIRST)


def test_the_present_and_the_earlier_wording_are_the_lockout_step_and_no_other_step_is():
    assert is_lockout_step(LOCKOUT_STEP) and is_lockout_step(EARLIER) and is_lockout_step(f"  {EARLIER}\r")
    assert not is_lockout_step(RELEASE) and not is_lockout_step(LOCKOUT_STEP[:-1]) and not is_lockout_step("")
    steps = ["Park the telescope at its service position.", EARLIER, "Check the motor.", RELEASE, "Test it."]
    assert services.isolated_steps(steps) == (1, range(2, 3))
    assert not services.lockout_missing(["electrical"], steps)


def test_a_new_order_carries_the_present_wording(order):  # noqa: F811
    assert LOCKOUT_STEP in order.step_list and EARLIER not in order.step_list


def _in_earlier_words(work_order: WorkOrder) -> WorkOrder:
    """``work_order`` as a database from before the rewording holds it: its lockout step in the earlier words."""
    WorkOrder.objects.filter(pk=work_order.pk).update(steps=work_order.steps.replace(LOCKOUT_STEP, EARLIER))
    work_order.refresh_from_db()
    assert EARLIER in work_order.step_list and LOCKOUT_STEP not in work_order.step_list
    return work_order


@pytest.fixture
def stored(order, users):  # noqa: F811
    """An order issued (and printed) before the rewording: it keeps the words it went out with."""
    services.work_order_move(order, "issue", users["engineer"])
    return _in_earlier_words(order)


def _started(work_order: WorkOrder, users) -> WorkOrder:
    """Started by a technician (this file's stored orders are issued already)."""
    services.work_order_move(work_order, "start", users["technician"])
    work_order.refresh_from_db()
    return work_order


def test_an_order_issued_with_the_earlier_wording_is_edited_and_started(stored, users, client):
    assert selectors.lockout_step_warning(stored) == ""  # no "the lockout step is missing" on its page
    client.force_login(users["engineer"])
    saved = _edit(client, stored, stored.step_list)  # its steps saved as they are: the lockout step is there
    assert "The lockout step is missing" not in saved.content.decode()
    assert WorkOrder.objects.get(pk=stored.pk).step_list == stored.step_list
    _started(stored, users)
    assert stored.state == State.UNDERWAY and EARLIER in stored.step_list  # the words it was printed with


def test_a_draft_made_before_the_rewording_is_issued_with_the_present_words(order, users):  # noqa: F811
    draft = _in_earlier_words(order)
    others = [line for line in draft.step_list if line != EARLIER]
    services.work_order_move(draft, "issue", users["engineer"])
    draft.refresh_from_db()
    assert LOCKOUT_STEP in draft.step_list and EARLIER not in draft.step_list
    assert [line for line in draft.step_list if line != LOCKOUT_STEP] == others  # every other step as it was
    assert draft.history.first().steps == draft.steps  # the audit trail holds the words it went out with


def test_its_lockout_is_ticked_in_sequence_and_its_paper_prints_the_ticks_beside_its_own_words(
    stored, users, client
):
    _started(stored, users)
    lockout = stored.step_list.index(EARLIER)
    technician = users["technician"]
    with pytest.raises(services.Refused, match=rf"tick the lockout \(step {lockout + 1}\) and isolation point"):
        services.checklist_tick_set(stored, "step", lockout + 1, True, technician)
    with pytest.raises(services.Refused, match=rf"step {lockout + 1} is the lockout.*'Mount isolator' first"):
        services.checklist_tick_set(stored, "step", lockout, True, technician)
    ticked_in_sequence(stored, technician)
    with pytest.raises(services.Refused, match=rf"the tick on step {lockout + 1} stays"):
        services.checklist_tick_set(stored, "step", lockout, False, technician)
    services.work_order_finish(stored, technician, 1.0, "", _all_readings(stored, 0.6))  # nothing left unticked
    stored.refresh_from_db()
    assert stored.isolation_unticked_at_finish == [] and stored.unticked_at_finish == []
    client.force_login(users["viewer"])
    paper = _pdf(client, stored)
    assert f"{lockout + 1}. Lockout: {EARLIER} ticked by technician, " in paper and LOCKOUT_STEP not in paper


def test_its_lockout_nobody_ticked_is_asked_apart_at_finish_and_kept_on_the_record(stored, users, client):
    _started(stored, users)
    lockout = stored.step_list.index(EARLIER)
    client.force_login(users["technician"])
    form = client.get(f"/workorders/{stored.pk}/finish/").content.decode()
    asked_apart = html.unescape(form.split('<ul class="unticked isolation">')[1].split("</ul>")[0])
    assert EARLIER in asked_apart
    with pytest.raises(services.Refused, match="the energy isolation is not ticked"):  # the other box is not enough
        services.work_order_finish(stored, users["technician"], 1.0, "ok", _all_readings(stored, 0.6),
                                   confirmed_unticked=_unticked(stored))
    why = "Worked from the paper and ticked the lockout there."
    response = client.post(f"/workorders/{stored.pk}/finish/", _post(stored, findings=why))
    assert response.status_code == 302, _message(response)
    stored.refresh_from_db()
    assert f"Step {lockout + 1}: {EARLIER}" in stored.isolation_unticked_at_finish
    assert EARLIER not in " ".join(stored.unticked_at_finish)
    paper = _pdf(client, stored)
    assert f"{lockout + 1}. Lockout: {EARLIER} not ticked; at finishing technician confirmed: " in paper
    assert ISOLATION_UNTICKED_SHORT["isolated"] in paper
    page = " ".join(re.sub(r"<[^>]+>", " ", html.unescape(client.get(stored.get_absolute_url()).content.decode()))
                    .split())
    assert EARLIER in page and LOCKOUT_STEP not in page
