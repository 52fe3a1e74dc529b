"""Who may countersign a finished work order: the two safeguards a review found a way round.

These are our own rules, not a published standard's:

- An order finished with its energy isolation answered for as not done or not needed (``cautions.ISOLATION_REVIEW``)
  is put to the site engineer, as README.md and the question page say: countersigning it needs the engineer role or
  above (``lifecycle.role_needed``); a technician is refused, saying why and who may. Other orders keep the
  technician's countersign.
- Countersigning is a second person's check: nobody who had a hand in the work countersigns it, whether they
  finished it, were on its crew, or ticked a line of its checklist or took a tick back
  (``selectors.second_person_refusal``), for the finisher may leave them off the crew; the refusal says who may.
  Starting the order alone is no hand in the work: the engineer who starts an order a technician works can still
  countersign it, or an order whose isolation answer is put to the engineer could have nobody left to. The two-person
  rule is common practice, no published source.

Each case goes through the service and through the page's button (POST /workorders/<pk>/move/countersign/ with
``asked=confirmed``, as the demo tour does); a refusal leaves the stored order as it was, and someone with no hand in
the work still countersigns. Orders are those of tests/test_workorders.py (an axis drive with one isolation point).
Names of people are invented.
"""
from __future__ import annotations

import pytest
from django.contrib.auth.models import Group, User
from django.db import connection
from django.test.utils import CaptureQueriesContext
from test_workorder_finish import _message
from test_workorders import ISOLATED, _all_readings, _confirmed, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import NOT_ISOLATED, NOT_NEEDED
from observatory_ops.workorders.models import State, WorkOrder

pytestmark = pytest.mark.django_db

BUTTON = ">Countersign (second person)</button>"
HELD = "Not offered: Countersign (second person). "


@pytest.fixture
def people(users):
    """The users of conftest, and two more technicians: Ilse Marrow and Tomas Vell."""
    technicians = Group.objects.get_or_create(name="technician")[0]
    made = dict(users)
    for username, first, last in (("imarrow", "Ilse", "Marrow"), ("tvell", "Tomas", "Vell")):
        made[username] = User.objects.create_user(username, first_name=first, last_name=last)
        made[username].groups.add(technicians)
    return made


def _start(work_order, people, by: str = "technician") -> WorkOrder:
    services.work_order_move(work_order, "issue", people["engineer"])
    services.work_order_move(work_order, "start", people[by])
    work_order.refresh_from_db()
    return work_order


def _finish(work_order, people, by: str = "technician", answer: str = ISOLATED) -> WorkOrder:
    """Finished by ``by``, nobody else on the crew, the unticked isolation answered with ``answer``."""
    services.work_order_finish(work_order, people[by], 2.0, "Drive checked; covers left on, nothing energised.",
                               _all_readings(work_order, 0.7), **{**_confirmed(work_order), "isolation_answer": answer})
    work_order.refresh_from_db()
    return work_order


def _stored(work_order) -> tuple:
    """The order as stored, and the length of its history: a refusal changes neither."""
    row = WorkOrder.objects.filter(pk=work_order.pk).values().get()
    return row, work_order.history.count()


def _countersign_by_button(client, work_order, user):
    client.force_login(user)
    return client.post(f"/workorders/{work_order.pk}/move/countersign/", {"asked": "confirmed"})


def _page(client, work_order, user) -> str:
    client.force_login(user)
    return client.get(work_order.get_absolute_url()).content.decode()


def _refused_both_ways(client, work_order, user, message: str) -> None:
    """Refused through the service and through the button, in the same words, the stored order left as it was."""
    before = _stored(work_order)
    with pytest.raises(services.Refused) as refused:
        services.work_order_move(work_order, "countersign", user)
    assert message in str(refused.value)
    assert _stored(work_order) == before
    response = _countersign_by_button(client, work_order, user)
    assert response.status_code == 302 and _message(response) == f"Not done: {refused.value}."
    assert _stored(work_order) == before


# --- 1. an isolation answer put to the engineer -------------------------------------------------------------------


@pytest.mark.parametrize("answer", [NOT_ISOLATED, NOT_NEEDED])
def test_a_technician_may_not_countersign_an_isolation_answer_put_to_the_engineer(order, people, client, answer):  # noqa: F811
    _finish(_start(order, people), people, answer=answer)
    # Ilse Marrow had no hand in the work: only her role stands in the way, and the refusal says why and who may.
    _refused_both_ways(client, order, people["imarrow"],
                       "its energy isolation answered for as \"the energy was NOT isolated\"" if answer == NOT_ISOLATED
                       else "its energy isolation answered for as \"the work needed no isolation\"")
    with pytest.raises(services.Refused, match=r"put to the site engineer, so only someone with the engineer role or "
                                               r"above countersigns it$"):
        services.work_order_move(order, "countersign", people["imarrow"])
    page = _page(client, order, people["imarrow"])
    assert BUTTON not in page and f"{HELD}{order.number} was finished with its energy isolation" in page


def test_the_question_page_is_not_put_to_a_technician_who_may_not_countersign(order, people, client):  # noqa: F811
    _finish(_start(order, people), people, answer=NOT_NEEDED)
    client.force_login(people["imarrow"])
    response = client.post(f"/workorders/{order.pk}/move/countersign/", {"go": "countersign"})
    assert response.status_code == 302 and "engineer role or above" in _message(response)
    assert WorkOrder.objects.get(pk=order.pk).state == State.FINISHED


@pytest.mark.parametrize("answer", [NOT_ISOLATED, NOT_NEEDED])
@pytest.mark.parametrize("way", ["service", "button"])
def test_the_engineer_countersigns_an_isolation_answer_put_to_them(order, people, client, answer, way):  # noqa: F811
    _finish(_start(order, people), people, answer=answer)
    assert BUTTON in _page(client, order, people["engineer"])
    if way == "service":
        services.work_order_move(order, "countersign", people["engineer"])
    else:
        assert _countersign_by_button(client, order, people["engineer"]).status_code == 302
    stored = WorkOrder.objects.get(pk=order.pk)
    assert stored.state == State.COUNTERSIGNED and stored.countersigned_by == people["engineer"]


@pytest.mark.parametrize("way", ["service", "button"])
def test_a_technician_still_countersigns_an_order_whose_isolation_was_done(order, people, client, way):  # noqa: F811
    _finish(_start(order, people), people, answer=ISOLATED)
    page = _page(client, order, people["imarrow"])
    assert BUTTON in page and HELD not in page
    if way == "service":
        services.work_order_move(order, "countersign", people["imarrow"])
    else:
        assert _countersign_by_button(client, order, people["imarrow"]).status_code == 302
    assert WorkOrder.objects.get(pk=order.pk).countersigned_by == people["imarrow"]


# --- 2. a second person: nobody who had a hand in the work ----------------------------------------------------


def test_the_engineer_who_only_started_the_work_countersigns_an_isolation_answer_put_to_them(order, people):  # noqa: F811
    """The small site's way: the engineer starts the order, the technician works and finishes it answering for an
    isolation nobody ticked; the engineer, the one person allowed, is not barred for having pressed Start."""
    _start(order, people, by="engineer")
    _finish(order, people, by="technician", answer=NOT_NEEDED)
    assert selectors.second_person_refusal(order, people["engineer"]) == ""
    services.work_order_move(order, "countersign", people["engineer"])
    assert WorkOrder.objects.get(pk=order.pk).countersigned_by == people["engineer"]


def test_a_refusal_says_who_may_countersign(order, people):  # noqa: F811
    _start(order, people)
    services.checklist_tick_set(order, "step", 0, True, people["engineer"])
    _finish(order, people, by="technician", answer=NOT_NEEDED)
    with pytest.raises(services.Refused, match=(
            "you ticked its lines. Someone else with the engineer role or above who had no hand in the work "
            "countersigns it")):
        services.work_order_move(order, "countersign", people["engineer"])


def test_one_who_ticked_its_lines_may_not_countersign_it_though_left_off_the_crew(order, people, client):  # noqa: F811
    _start(order, people)
    services.checklist_tick_set(order, "step", 0, True, people["imarrow"])
    _finish(order, people)
    _refused_both_ways(client, order, people["imarrow"], "a second person must countersign: you ticked its lines")
    page = _page(client, order, people["imarrow"])
    assert BUTTON not in page and f"{HELD}A second person must countersign: you ticked its lines." in page


def test_one_who_took_a_tick_back_may_not_countersign_it_either(order, people, client):  # noqa: F811
    _start(order, people)
    services.checklist_tick_set(order, "step", 0, True, people["technician"])
    services.checklist_tick_set(order, "step", 0, False, people["imarrow"])
    _finish(order, people)
    _refused_both_ways(client, order, people["imarrow"],
                       "a second person must countersign: you took back a tick of its lines")


def test_every_hand_in_the_work_is_named(order, people):  # noqa: F811
    _start(order, people)
    services.checklist_tick_set(order, "step", 0, True, people["technician"])
    _finish(order, people)
    assert selectors.second_person_refusal(order, people["technician"]) == (
        "you finished this work order yourself; and you ticked its lines")


@pytest.mark.parametrize("who", ["engineer", "tvell"])
@pytest.mark.parametrize("way", ["service", "button"])
def test_someone_with_no_hand_in_the_work_still_countersigns_it(order, people, client, who, way):  # noqa: F811
    _start(order, people, by="technician")
    services.checklist_tick_set(order, "step", 0, True, people["imarrow"])
    _finish(order, people, by="imarrow")
    assert selectors.second_person_refusal(order, people[who]) == ""
    assert BUTTON in _page(client, order, people[who])
    if way == "service":
        services.work_order_move(order, "countersign", people[who])
    else:
        assert _countersign_by_button(client, order, people[who]).status_code == 302
    stored = WorkOrder.objects.get(pk=order.pk)
    assert stored.state == State.COUNTERSIGNED and stored.countersigned_by == people[who]


def test_the_rule_reads_a_fixed_number_of_queries_however_many_ticks(order, people):  # noqa: F811
    _start(order, people)

    def queries() -> int:
        order.refresh_from_db()
        with CaptureQueriesContext(connection) as captured:
            selectors.second_person_refusal(order, people["imarrow"])
        return len(captured)

    services.checklist_tick_set(order, "step", 0, True, people["imarrow"])
    one_tick = queries()
    for ticked in (False, True, False, True):
        services.checklist_tick_set(order, "step", 0, ticked, people["imarrow"])
    services.checklist_tick_set(order, "step", 1, True, people["imarrow"])
    assert queries() == one_tick <= 4
