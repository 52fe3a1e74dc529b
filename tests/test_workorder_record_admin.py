"""A finished, countersigned or withdrawn work order is part of the record, tried as the administrator would in the
Django admin: its page shows it read only, rows included, and says why and how it is corrected (a finished order's
service records are corrected by a new record that points back, logbook.models.ServiceRecord.corrects); a post to it
saves nothing and says so; its history offers no revert; and no revert moves an order's state, which moves only by
its lifecycle, on its page (workorders/lifecycle.py)."""
from __future__ import annotations

import pytest
from django.core.exceptions import ValidationError
from test_start_holds import _admin_post, _fresh, _Posted, _text, underway  # noqa: F401  (underway: a fixture)
from test_workorders import _confirmed, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.logbook.models import Reading
from observatory_ops.workorders import services
from observatory_ops.workorders.models import Part, PartUse, RequiredReading, State, WorkOrder, WorkOrderItem
from tests.conftest import parts_as_planned

RECORD_NOTE = (
    "its record stays as it was, its findings, hours, readings and parts used included. Finished work orders are part "
    'of the record: correct them with a new service record ("correct" beside its service record on the subsystem '
    "page), which points back to the one it replaces."
)


@pytest.fixture
def administrator(administrator_in_admin):
    """The administrator in the admin (conftest.py)."""
    return administrator_in_admin


@pytest.fixture
def with_part(order):  # noqa: F811
    """The axis-drive order with a part planned, before it is issued."""
    part = Part.objects.create(site=order.site, name="Drive belt", quantity_on_hand=4)
    services.part_add(order, part, 2)
    return order


def _finish(work_order, users) -> WorkOrder:
    services.work_order_finish(
        work_order, users["technician"], 1.5, "Belt worn, replaced.",
        {r.pk: 0.6 for r in work_order.required_readings.all()}, parts_as_planned(work_order),
        **_confirmed(work_order),
    )
    return _fresh(work_order)


def _stored(work_order) -> dict:
    """Everything the admin page could change of the order and its rows, and its change history."""
    return {
        "order": WorkOrder.objects.filter(pk=work_order.pk).values().get(),
        "items": list(WorkOrderItem.objects.filter(work_order=work_order).values()),
        "readings": list(RequiredReading.objects.filter(work_order=work_order).values()),
        "logbook": list(Reading.objects.values()),
        "parts": list(PartUse.objects.filter(work_order=work_order).values()),
        "versions": work_order.history.count(),
    }


#: The hidden inputs of Django's view-only page: the form's token, the rows' ids and the inline forms' counts.
_HIDDEN = ("csrfmiddlewaretoken", "-id", "-work_order", "_FORMS")


def _change_url(work_order) -> str:
    return f"/admin/workorders/workorder/{work_order.pk}/change/"


def test_a_finished_orders_admin_page_is_read_only_and_says_why(with_part, users, administrator):
    services.work_order_move(with_part, "issue", users["engineer"])
    services.work_order_move(with_part, "start", users["technician"])
    finished = _finish(with_part, users)
    response = administrator.get(_change_url(finished))
    page = response.content.decode()
    assert response.status_code == 200
    assert f"{finished.number} is finished, awaiting countersignature: {RECORD_NOTE}" in _text(response)
    # Nothing to type into or tick: no field, no row, no new row, no save. (Django keeps its hidden bookkeeping: the
    # rows' ids and the inline forms' counts.)
    fields = _Posted(page).data
    assert [name for name in fields if not name.endswith(_HIDDEN)] == []
    assert 'name="_save"' not in page
    assert {prefix: fields[f"{prefix}-MAX_NUM_FORMS"] for prefix in ("items", "required_readings", "part_uses")} == {
        "items": ["0"], "required_readings": ["0"], "part_uses": ["0"]}  # Django's script offers no new row


def test_a_post_to_a_finished_order_changes_nothing_and_says_why(with_part, users, administrator):
    """The administrator opened the page while the work was underway; the technician finished it meanwhile; the
    administrator then saves new findings, another quantity of the part used, another limit for a reading, and takes
    a subsystem off the order."""
    services.work_order_move(with_part, "issue", users["engineer"])
    services.work_order_move(with_part, "start", users["technician"])
    opened = _Posted(administrator.get(_change_url(with_part)).content.decode()).data
    assert {"findings", "part_uses-0-quantity_used", "required_readings-0-limit_text"} <= set(opened)
    finished = _finish(with_part, users)
    before = _stored(finished)
    opened.update({
        "findings": ["Nothing found."], "actual_hours": ["9"], "part_uses-0-quantity_used": ["0"],
        "required_readings-0-limit_text": ["at most 5"], "items-0-DELETE": ["on"],
    })
    response = administrator.post(_change_url(finished), opened, follow=True)
    assert response.status_code == 200
    assert f"Nothing saved: {finished.number} is finished, awaiting countersignature: {RECORD_NOTE}" in _text(response)
    assert _stored(finished) == before
    assert (before["order"]["findings"], before["order"]["actual_hours"]) == ("Belt worn, replaced.", 1.5)


def test_a_countersigned_order_is_kept_as_the_finished_one(with_part, users, administrator):
    services.work_order_move(with_part, "issue", users["engineer"])
    services.work_order_move(with_part, "start", users["technician"])
    finished = _finish(with_part, users)
    services.work_order_move(finished, "countersign", users["engineer"])
    before = _stored(finished)
    response = administrator.post(_change_url(finished), {"findings": "Nothing found."}, follow=True)
    assert f"Nothing saved: {finished.number} is countersigned: {RECORD_NOTE}" in _text(response)
    assert _stored(finished) == before


def test_a_withdrawn_order_is_kept_as_it_was_and_the_page_says_to_make_a_new_one(order, users, administrator):  # noqa: F811
    services.work_order_move(order, "withdraw", users["engineer"], reason="Drive replaced under warranty.")
    withdrawn = _fresh(order)
    before = _stored(withdrawn)
    response = administrator.post(_change_url(withdrawn), {"title": "Something else"}, follow=True)
    assert (
        f"Nothing saved: {withdrawn.number} is withdrawn: its record stays as it was, its findings, hours, readings "
        "and parts used included. Withdrawn work orders are part of the record: for the work, make a new work order."
    ) in _text(response)
    assert _stored(withdrawn) == before


def test_a_withdrawn_order_is_not_deleted(order, users, administrator):  # noqa: F811
    """A finished one is held by its service records (logbook.models.ServiceRecord.work_order); a withdrawn one has
    none, and is kept all the same, with its ticks."""
    services.work_order_move(order, "withdraw", users["engineer"], reason="Drive replaced under warranty.")
    delete = f"/admin/workorders/workorder/{order.pk}/delete/"
    assert f"{order.number} is withdrawn: its record stays as it was" in _text(administrator.get(delete))
    administrator.post(delete, {"post": "yes"})
    assert WorkOrder.objects.filter(pk=order.pk).exists()


def test_an_order_underway_is_not_deleted(order, users, administrator):  # noqa: F811
    """A diff review deleted an order underway with its lockout ticked, past the withdrawal's refusal: its locks went
    from the record with its ticks, and another crew no longer waited for them."""
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    delete = f"/admin/workorders/workorder/{order.pk}/delete/"
    assert f"{order.number} {order.title}: it is underway, its crew at work. Withdraw it on its page instead" in _text(
        administrator.get(delete))
    administrator.post(delete, {"post": "yes"})
    assert WorkOrder.objects.filter(pk=order.pk).exists()


# --- the history's revert ------------------------------------------------------------------------------------------


def _history_url(work_order, version) -> str:
    return f"/admin/workorders/workorder/{work_order.pk}/history/{version.history_id}/"


def test_reverting_an_issued_order_to_its_draft_is_refused(order, users, administrator):  # noqa: F811
    """Issuing checked the order (its planned date, its lockout step, its hazards) and dated it; a revert to the draft
    would take it back from the technicians without any of it. Only the lifecycle moves it, on its page."""
    services.work_order_move(order, "issue", users["engineer"])
    issued = _fresh(order)
    draft = issued.history.order_by("history_id").first()
    assert draft.state == State.DRAFT
    before = _stored(issued)
    response = _admin_post(administrator, _history_url(issued, draft))
    assert response.status_code == 200
    assert (
        f"{issued.number} is issued: its state is not changed here (to draft). From issued it moves on only by the "
        "lifecycle, on its page: 'Start work', 'Withdraw'."
    ) in _text(response)
    assert _stored(issued) == before


def test_reverting_a_draft_to_an_earlier_draft_still_brings_its_words_back(order, users, administrator):  # noqa: F811
    """What the lifecycle does not govern is reverted as before: the title an engineer changed."""
    first = order.history.order_by("history_id").first()
    order.title = "Drive service, typed wrong"
    order.save()
    response = _admin_post(administrator, _history_url(order, first))
    assert response.status_code == 302
    assert (_fresh(order).title, _fresh(order).state) == (first.title, State.DRAFT)


def test_a_finished_orders_history_offers_no_revert_and_refuses_one_posted(with_part, users, administrator):
    services.work_order_move(with_part, "issue", users["engineer"])
    services.work_order_move(with_part, "start", users["technician"])
    underway_version = _fresh(with_part).history.order_by("-history_id").first()
    assert underway_version.state == State.UNDERWAY
    finished = _finish(with_part, users)
    before = _stored(finished)
    url = _history_url(finished, underway_version)
    page = administrator.get(url)
    assert 'value="Revert"' not in page.content.decode()
    assert f"{finished.number} is finished, awaiting countersignature: {RECORD_NOTE}" in _text(page)
    response = _admin_post(administrator, url)
    assert response.status_code == 200
    refused = _text(response)
    assert (
        f"{finished.number} is finished, awaiting countersignature: its record stays as it was, its state, actual "
        "hours, findings, "
    ) in refused
    assert "included. Finished work orders are part of the record" in refused
    assert _stored(finished) == before


def test_the_model_refuses_any_change_of_a_finished_order_whoever_builds_the_form(underway, users):  # noqa: F811
    finished = _finish(underway, users)
    finished.findings = "Nothing found."
    with pytest.raises(ValidationError, match="its findings included. Finished work orders are part of the record"):
        finished.full_clean()
