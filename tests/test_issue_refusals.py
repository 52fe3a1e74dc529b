"""What stops a work order being issued or started as it stands: a lift its figures show to be overloaded or
rigged too flat, stored lifting inputs that are not valid, an energy its work calls for isolating with no isolation
point registered, and (for issuing) no planned date.

Energy control procedures are developed and documented for each piece of equipment before work (OSHA 29 CFR
1910.147(c)(4)(i)); holding the order until the register names the point is our own rule.

Sling leg tension T = W / (n sin a), a the leg angle from the horizontal (ASME B30.9 and rigging handbooks: load
factor 1/sin a, 2.000 at 30 degrees; flatter angles are not used). The mirror mass is pi/4 D^2 t times the
borosilicate density 2.23 g/cm3 (CRC Handbook of Chemistry and Physics), computed by hand below.
"""
from __future__ import annotations

import datetime as dt
import math

import pytest
from django.contrib.messages import get_messages

from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import ISOLATION_POINTS_MISSING_HELD
from observatory_ops.workorders.models import IsolationPoint, State, WorkOrder

START = dt.date(2026, 1, 1)
PLANNED = dt.date(2026, 6, 16)

# A 500 mm x 50 mm solid borosilicate blank: pi/4 x 50^2 x 5 cm3 x 2.23 g/cm3 = 21.893 kg; in a 30 kg cell.
MIRROR = {"diameter_mm": 500, "thickness_mm": 50, "material": "borosilicate", "fixture_kg": 30, "legs": 2}
LOAD_KG = math.pi / 4 * 50**2 * 5 * 2.23 / 1000 + 30


def _tension_kg(angle_deg: float) -> float:
    """T = W / (n sin a) on two legs (ASME B30.9)."""
    return LOAD_KG / (2 * math.sin(math.radians(angle_deg)))


@pytest.fixture
def lift_order(site, telescope, users):
    """A dated draft order to lift the primary in its cell, its lifting figures not yet entered."""
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    order = services.work_order_ad_hoc(site, [primary], "Take out the primary", users["engineer"],
                                       steps="Lower the cell onto the lifting table.")
    order.planned_date = PLANNED
    order.save()
    return order


def _state(order) -> str:
    return WorkOrder.objects.get(pk=order.pk).state


def _page(client, order) -> str:
    return " ".join(client.get(order.get_absolute_url()).content.decode().split())


def test_a_leg_tension_above_the_working_load_limit_stops_issuing_and_names_the_figures(lift_order, users):
    figures = services.lift_set(lift_order, {**MIRROR, "angle_deg": 60, "wll_kg": 20})
    assert figures.leg_tension_kg == pytest.approx(_tension_kg(60), rel=1e-3)  # 29.96 kg, load factor 1.155
    assert figures.over_limit and not figures.too_flat
    with pytest.raises(services.Refused) as refused:
        services.work_order_move(lift_order, "issue", users["engineer"])
    message = str(refused.value)
    assert "a leg tension of 30 kg, above the working load limit of 20 kg entered per leg" in message
    assert "an engineer corrects the lifting figures (the lift page)" in message
    assert _state(lift_order) == State.DRAFT


def test_a_sling_angle_below_30_degrees_stops_issuing_though_the_slings_are_rated_for_it(lift_order, users):
    services.lift_set(lift_order, {**MIRROR, "angle_deg": 20, "wll_kg": 1000})
    figures = selectors.lift(lift_order)
    assert figures.load_factor == pytest.approx(1 / math.sin(math.radians(20)))  # 2.92 (ASME B30.9: 1/sin a)
    assert figures.too_flat and not figures.over_limit
    with pytest.raises(services.Refused, match=r"a sling angle of 20 degrees from horizontal \(load factor 2\.92\), "
                                               r"below the 30 degrees"):
        services.work_order_move(lift_order, "issue", users["engineer"])
    assert _state(lift_order) == State.DRAFT


def test_at_30_degrees_and_within_the_limit_the_order_is_issued(lift_order, users):
    # Load factor 2.000 at 30 degrees (ASME B30.9): each leg carries the whole load, 51.9 kg, under a 60 kg limit.
    figures = services.lift_set(lift_order, {**MIRROR, "angle_deg": 30, "wll_kg": 60})
    assert figures.load_factor == pytest.approx(2.0) and figures.leg_tension_kg == pytest.approx(LOAD_KG, rel=1e-3)
    assert selectors.lift_refusal(lift_order) == ""
    services.work_order_move(lift_order, "issue", users["engineer"])
    assert _state(lift_order) == State.ISSUED


def test_the_example_of_the_review_names_both_figures_and_the_page_offers_neither_issue_nor_start(
    lift_order, users, client
):
    """50 kg per leg at 10 degrees: load factor 1/sin 10 = 5.76 (ASME B30.9)."""
    services.lift_set(lift_order, {**MIRROR, "angle_deg": 10, "wll_kg": 50})
    tension = _tension_kg(10)  # 149.4 kg
    client.force_login(users["engineer"])
    page = _page(client, lift_order)
    assert "Issue to the technicians</button>" not in page
    assert f"a leg tension of {tension:.0f} kg, above the working load limit of 50 kg entered per leg" in page
    assert "a sling angle of 10 degrees from horizontal (load factor 5.76)" in page
    assert "Not offered: Issue to the technicians." in page
    response = client.post(f"/workorders/{lift_order.pk}/move/issue/", follow=True)
    assert "Not done:" in " ".join(response.content.decode().split()) and _state(lift_order) == State.DRAFT


def test_an_issued_order_whose_lift_is_made_unsafe_is_not_started_until_it_is_corrected(lift_order, users, client):
    services.work_order_move(lift_order, "issue", users["engineer"])
    services.lift_set(WorkOrder.objects.get(pk=lift_order.pk), {**MIRROR, "angle_deg": 45, "wll_kg": 10})
    order = WorkOrder.objects.get(pk=lift_order.pk)
    client.force_login(users["technician"])
    page = _page(client, order)
    assert "Start work</button>" not in page and "Not offered: Start work." in page
    with pytest.raises(services.Refused, match="above the working load limit of 10 kg"):
        services.work_order_move(order, "start", users["technician"])
    assert _state(order) == State.ISSUED
    services.lift_set(order, {**MIRROR, "angle_deg": 45, "wll_kg": 100})  # the engineer's correction
    assert "Start work</button>" in _page(client, order)
    services.work_order_move(WorkOrder.objects.get(pk=order.pk), "start", users["technician"])
    assert _state(order) == State.UNDERWAY


@pytest.mark.parametrize("inputs, problem", [
    ({**MIRROR, "diameter_mm": -500}, "diameter must be positive"),
    ({**MIRROR, "sling_colour": "red"}, "sling_colour"),  # a field the figures do not take
])
def test_stored_lifting_inputs_that_are_not_valid_stop_issuing(lift_order, users, client, inputs, problem):
    WorkOrder.objects.filter(pk=lift_order.pk).update(lift_inputs=inputs)  # as an old or hand-edited record may be
    order = WorkOrder.objects.get(pk=lift_order.pk)
    with pytest.raises(services.Refused, match="stored lifting inputs that are not valid") as refused:
        services.work_order_move(order, "issue", users["engineer"])
    assert problem in str(refused.value) and _state(order) == State.DRAFT
    client.force_login(users["engineer"])
    page = _page(client, order)
    assert "The stored lifting inputs are not valid" in page and "Issue to the technicians</button>" not in page


def test_an_order_without_a_planned_date_is_not_issued_and_the_page_says_to_set_it(lift_order, users, client):
    WorkOrder.objects.filter(pk=lift_order.pk).update(planned_date=None)
    order = WorkOrder.objects.get(pk=lift_order.pk)
    with pytest.raises(services.Refused) as refused:
        services.work_order_move(order, "issue", users["engineer"])
    assert str(refused.value) == (
        "set the planned date (Edit) before issuing: the calendar export and the weekly batch go by it"
    )
    assert _state(order) == State.DRAFT
    client.force_login(users["engineer"])
    page = _page(client, order)
    assert "Issue to the technicians</button>" not in page and "Set the planned date (Edit) before issuing" in page
    order.planned_date = PLANNED
    order.save()
    services.work_order_move(order, "issue", users["engineer"])
    assert _state(order) == State.ISSUED


def test_an_issued_order_keeps_its_planned_date(lift_order, users, client):
    services.work_order_move(lift_order, "issue", users["engineer"])
    order = WorkOrder.objects.get(pk=lift_order.pk)
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/edit/", {
        "title": order.title, "order_type": order.order_type, "priority": order.priority, "planned_date": "",
        "assignee": "", "estimated_hours": "1", "steps": order.steps, "tools": "",
    })
    assert response.status_code == 200 and "An issued order keeps its planned date" in response.content.decode()
    assert WorkOrder.objects.get(pk=order.pk).planned_date == PLANNED


def test_work_on_energy_with_no_isolation_point_registered_is_neither_issued_nor_started(site, telescope, users,
                                                                                          client):
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    order = services.work_order_from_due(list(drive.plans.all()), users["engineer"], PLANNED)
    assert "electrical" in order.hazards and selectors.isolation_gaps(order)
    held = selectors.moves_held(order)
    assert held["issue"] == held["start"] == [ISOLATION_POINTS_MISSING_HELD.format(
        missing="no AC mains isolation point is registered for T1")]
    with pytest.raises(services.Refused, match="no isolation point registered"):
        services.work_order_move(order, "issue", users["engineer"])
    client.force_login(users["engineer"])
    page = " ".join(client.get(order.get_absolute_url()).content.decode().split())
    assert "Issue to the technicians</button>" not in page
    assert ("Not offered: Issue to the technicians. Its work calls for isolating energy that has no isolation point "
            "registered (no AC mains isolation point is registered for T1; the warnings under") in page
    assert "No AC mains isolation point is registered for T1" in page  # the warning it points to
    assert _state(order) == State.DRAFT

    # Drafted from the due list, the engineer is not told to "then issue it" but why it cannot be issued yet.
    client.post("/workorders/from-due/", {"plans": [p.pk for p in drive.plans.all()]})
    said = [str(m) for m in get_messages(client.get("/workorders/").wsgi_request)]
    drafted = " ".join(" ".join(str(m) for m in said).split())
    assert "then issue it" not in drafted and "It cannot be issued yet: its work calls for isolating energy" in drafted

    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    services.work_order_move(WorkOrder.objects.get(pk=order.pk), "issue", users["engineer"])
    services.work_order_move(WorkOrder.objects.get(pk=order.pk), "start", users["technician"])
    assert _state(order) == State.UNDERWAY
