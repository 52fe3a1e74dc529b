"""Which energy isolation points a work order's lockout step names, and the warnings when one is missing.

A dome's rotation and shutter drives are fed from a supply of their own: locking out the mount does not
make them safe, so an enclosure order needs a point registered for the enclosure itself. Isolating every
energy source of the equipment worked on is OSHA 29 CFR 1910.147 (c)(4)(ii) and (d)(3); that a dome has a
separate supply is common practice, no published source.
"""
from __future__ import annotations

import datetime as dt

import pytest
from django.core.exceptions import ValidationError

from observatory_ops.registry.models import Telescope
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.models import IsolationPoint

START = dt.date(2026, 1, 1)


@pytest.fixture
def dome(telescope):
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    return subsystem_create(telescope, "enclosure", "Dome", counting_from=START)


def _order(subsystem, users):
    return services.work_order_from_due(list(subsystem.plans.all()), users["engineer"])


def test_a_dome_order_without_a_point_of_its_own_is_warned(dome, users):
    gaps = selectors.isolation_gaps(_order(dome, users))
    assert len(gaps) == 1 and "Dome, which has a supply of its own" in gaps[0]


def test_a_point_registered_for_the_dome_is_named_on_its_orders_and_where_it_can_move_only(dome, telescope, users):
    point = IsolationPoint.objects.create(telescope=telescope, subsystem=dome, energy="ac",
                                          label="Dome rotation and shutter isolator", location="dome ring panel")
    order = _order(dome, users)
    assert selectors.isolation_gaps(order) == []
    assert {p.label for p in selectors.isolation_points(order)} == {"Mount isolator", point.label}
    assert point.description.startswith(f"{telescope.name}: Dome: AC mains: Dome rotation and shutter isolator")
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)  # a moving telescope
    assert point in selectors.isolation_points(_order(brake, users))  # the dome can turn during it too
    mains = subsystem_create(telescope, "ac_power", "Mains", counting_from=START)  # nothing moves
    assert point not in selectors.isolation_points(_order(mains, users))


def test_a_telescope_without_a_point_for_the_energy_is_warned(telescope, users):
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)  # compressed air
    gaps = selectors.isolation_gaps(_order(brake, users))
    assert gaps == [f"No compressed-air isolation point is registered for {telescope.name}. Have an engineer add it "
                    "to the register before work; if the work is already underway, find and lock the supply before "
                    "going on."]


def test_a_brakes_own_air_valve_answers_its_compressed_air(telescope, users):
    """A site review registered a brake's own air supply valve: its order listed the valve among its points and,
    a few lines below, said no compressed-air point was registered, and its issue was held. Locking the supply
    of the equipment worked on is what OSHA 29 CFR 1910.147 (d)(3) asks; a point of another subsystem answers
    nothing for it."""
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)  # compressed air
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    other = subsystem_create(telescope, "brake", "Axis 2 brake", counting_from=START)
    IsolationPoint.objects.create(telescope=telescope, subsystem=other, energy="air", label="Axis 2 brake valve")
    assert any("No compressed-air isolation point" in gap for gap in selectors.isolation_gaps(_order(brake, users)))
    valve = IsolationPoint.objects.create(telescope=telescope, subsystem=brake, energy="air",
                                          label="Axis 1 brake air supply valve")
    order = _order(brake, users)
    assert valve in selectors.isolation_points(order)
    assert not any("compressed-air" in gap for gap in selectors.isolation_gaps(order))
    assert "issue" not in selectors.moves_held(order) or all(
        "isolation point" not in why for why in selectors.moves_held(order)["issue"])


def test_one_brakes_own_air_valve_does_not_answer_for_the_other_brakes_air(telescope, users):
    """A diff review: with the Axis 1 brake's valve registered, an order over both brakes listed that valve alone and
    warned of nothing, the Axis 2 brake's air left live. Each subsystem carrying the hazard needs its own point, or
    the telescope one for its whole supply."""
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    first = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    second = subsystem_create(telescope, "brake", "Axis 2 brake", counting_from=START)
    IsolationPoint.objects.create(telescope=telescope, subsystem=first, energy="air", label="Axis 1 brake air valve")
    both = services.work_order_from_due([*first.plans.all(), *second.plans.all()], users["engineer"])
    gaps = [gap for gap in selectors.isolation_gaps(both) if "compressed-air" in gap]
    assert gaps == [f"No compressed-air isolation point is registered for {telescope.name}, nor for Axis 2 brake. "
                    "Have an engineer add one to the register before work; if the work is already underway, find and "
                    "lock the supply before going on."]
    IsolationPoint.objects.create(telescope=telescope, energy="air", label="Compressor outlet valve")
    assert not [gap for gap in selectors.isolation_gaps(both) if "compressed-air" in gap]  # the whole supply


def test_a_point_for_a_subsystem_of_another_telescope_is_refused(dome, site):
    other = Telescope.objects.create(site=site, name="West", aperture_m=0.4, mount="fork")
    with pytest.raises(ValidationError, match="must belong to the point's telescope"):
        IsolationPoint(telescope=other, subsystem=dome, energy="ac", label="Wrong").full_clean()


def test_work_with_nothing_to_isolate_lists_no_points_and_says_why(telescope, site, users, client):
    import io
    import re

    from pypdf import PdfReader

    from observatory_ops.workorders.cautions import NO_ISOLATION_NEEDED

    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    box = subsystem_create(telescope, "other", "Eyepiece box", counting_from=START, no_hazards_found=True)
    order = services.work_order_ad_hoc(site, [box], "Sort the eyepieces", users["engineer"], steps="Sort them.")
    assert order.hazards == [] and selectors.isolation_points(order) == [] and selectors.isolation_gaps(order) == []
    client.force_login(users["viewer"])
    assert NO_ISOLATION_NEEDED in client.get(order.get_absolute_url()).content.decode()
    document = client.get(f"/workorders/{order.pk}/pdf/").content
    text = re.sub(r"\s+", " ", " ".join(page.extract_text() for page in PdfReader(io.BytesIO(document)).pages))
    assert "This work needs no energy isolation" in text and "Mount isolator" not in text


def test_a_sheet_over_two_telescopes_says_which_telescope_each_reading_is_for(site, telescope, users):
    other = Telescope.objects.create(site=site, name="West", aperture_m=0.4, mount="fork")
    brakes = [subsystem_create(t, "brake", "Axis 1 brake", counting_from=START) for t in (telescope, other)]
    order = services.work_order_from_due([p for b in brakes for p in b.plans.all()], users["engineer"])
    printed = selectors.sheet(order, "https://example.invalid/")
    labels = [r.label for r in printed.readings]
    assert len(labels) == len(set(labels)) > 0  # no two rows read alike
    assert any(f"({telescope.name}: Axis 1 brake)" in label for label in labels)
    assert any("(West: Axis 1 brake)" in label for label in labels)


def test_an_ad_hoc_order_takes_the_hazards_its_work_adds(telescope, site, users, client):
    """The reviewer's case: an ad hoc look at an optical surface from a ladder, at a telescope that can move."""
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    box = subsystem_create(telescope, "other", "Eyepiece box", counting_from=START, no_hazards_found=True)
    client.force_login(users["engineer"])
    client.post(f"/sites/{site.slug}/workorders/new/", {
        "title": "Look at the box from the ladder", "order_type": "corrective", "subsystems": [box.pk],
        "hazards": ["height", "moving_machinery"], "steps": "Look.",
    })
    from observatory_ops.workorders.models import WorkOrder

    order = WorkOrder.objects.latest("pk")
    assert order.hazards == ["moving_machinery", "height"]
    assert services.LOCKOUT_STEP in order.step_list


def test_a_second_order_for_an_item_already_on_one_is_made_with_a_warning(telescope, users, client):
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    first = _order(brake, users)
    client.force_login(users["engineer"])
    page = client.post("/workorders/from-due/", {"plans": [p.pk for p in brake.plans.all()]}, follow=True)
    assert f"already on work orders still to do: {first.number} (draft)" in page.content.decode()


def test_an_ad_hoc_orders_page_says_it_was_raised_by_hand_as_its_pdf_does(telescope, site, users, client):
    box = subsystem_create(telescope, "other", "Eyepiece box", counting_from=START, no_hazards_found=True)
    order = services.work_order_ad_hoc(site, [box], "Sort the eyepieces", users["engineer"], steps="Sort them.")
    client.force_login(users["viewer"])
    assert "Raised by hand, not from a due item" in client.get(order.get_absolute_url()).content.decode()


def test_the_page_and_the_paper_read_the_orders_items_once(site, telescope, users, client):
    """Hazards, isolation, its gaps and the work alongside all need the order's items: the page and the paper read
    them once and hand them on (``selectors.order_items``), so printing stays a fixed, small number of queries."""
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    order = services.work_order_from_due(list(brake.plans.all()), users["engineer"])
    client.force_login(users["viewer"])

    def item_reads(address: str) -> int:
        with CaptureQueriesContext(connection) as captured:
            assert client.get(address).status_code == 200
        return sum(q["sql"].startswith('SELECT "workorders_workorderitem"."id"') for q in captured.captured_queries)

    assert item_reads(order.get_absolute_url()) == 1
    assert item_reads(f"/workorders/{order.pk}/pdf/") == 1


def test_a_dc_or_servo_breaker_alone_does_not_answer_electrical_work(telescope, users):
    """A 24 V supply's or the servo amplifiers' breaker leaves the mains side live (the drives' power stage, the
    supplies feeding it): electrical work asks for the telescope's AC mains point, and is held until it is registered.
    Locking the mains for electrical work is OSHA 29 CFR 1910.147 (d)(3), every energy source isolated."""
    IsolationPoint.objects.create(telescope=telescope, energy="dc", label="24 V instrument supply breaker")
    IsolationPoint.objects.create(telescope=telescope, energy="servo", label="Servo amplifier breaker")
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    order = _order(drive, users)
    assert "electrical" in order.hazards
    assert selectors.isolation_gaps(order) == [
        f"No AC mains isolation point is registered for {telescope.name}. Have an engineer add it to the register "
        "before work; if the work is already underway, find and lock the supply before going on."
    ]
    assert "issue" in selectors.moves_held(order)
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    assert selectors.isolation_gaps(order) == []
    # The DC and servo breakers are still locked with it, and still print their cautions.
    assert {p.label for p in selectors.isolation_points(order)} == {
        "24 V instrument supply breaker", "Servo amplifier breaker", "Mount isolator"}
