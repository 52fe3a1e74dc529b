"""A service plan's parts on its work orders: quantities written on the plan ("2 x Brake pad set"), reserved
from the site's parts register and added up across plans; parts the register does not hold named on the
order's page and paper, so the technician brings them; a bad quantity refused on the plan, naming the line."""
from __future__ import annotations

import datetime as dt
import html
import io
import re

import pytest
from django.core.exceptions import ValidationError
from pypdf import PdfReader

from observatory_ops.planning.models import ServicePlan, part_lines
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import PARTS_UNREGISTERED
from observatory_ops.workorders.models import Part, State


@pytest.mark.parametrize(
    "text, parts",
    [
        ("Brake pad set", [("Brake pad set", 1.0)]),
        ("2 x Brake pad set\n\n  4x M6 screw  \n1.5 × Grease, litre", [("Brake pad set", 2.0), ("M6 screw", 4.0),
                                                                      ("Grease, litre", 1.5)]),
        ("120 mm fan", [("120 mm fan", 1.0)]),  # a number that is part of the name, with no "x", is the name
        ("", []),
    ],
)
def test_a_plans_parts_read_one_a_line_with_an_optional_count(text, parts):
    assert part_lines(text) == parts


@pytest.mark.parametrize("line", ["-1 x Brake pad set", "2 x", "1.5.2 x Grease", "0 x Spring kit"])
def test_a_line_that_starts_as_a_count_but_is_not_one_is_refused_naming_it(line):
    with pytest.raises(ValueError, match=rf"line 2 \({re.escape(repr(line))}\)"):
        part_lines(f"Brake pad set\n{line}")


def test_a_zero_count_is_refused_on_the_plan_naming_the_line(telescope):
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=dt.date(2026, 1, 1))
    plan = brake.plans.first()
    plan.parts = "Brake pad set\n0 x Spring kit"
    with pytest.raises(ValidationError, match=r"line 2 \('0 x Spring kit'\): the quantity must be more than zero"):
        plan.full_clean()
    assert ServicePlan.objects.get(pk=plan.pk).parts == "Brake pad set"  # the stored plan is as it was


@pytest.fixture
def brakes(telescope, site):
    """Two brakes whose catalogue plans each ask for a brake pad set, one plan asking for two; pads in stock."""
    made = [subsystem_create(telescope, "brake", f"Axis {n} brake", counting_from=dt.date(2026, 1, 1)) for n in (1, 2)]
    plan = made[1].plans.get(parts__icontains="Brake pad set")
    plan.parts = "2 x Brake pad set\nSpring kit"
    plan.save()
    Part.objects.create(site=site, name="brake pad set", quantity_on_hand=6, reorder_point=2)
    return made


def _plans(brakes) -> list[ServicePlan]:
    return [b.plans.get(parts__icontains="Brake pad set") for b in brakes]


def test_an_order_reserves_each_plans_count_added_up_from_the_register(brakes, users):
    order = services.work_order_from_due(_plans(brakes), users["engineer"])
    (use,) = order.part_uses.all()
    assert (use.part.name, use.quantity_planned) == ("brake pad set", 3.0)  # 1 + 2, matched whatever the case


def test_a_part_the_register_lacks_is_named_on_the_page_and_the_paper(brakes, users, client):
    order = services.work_order_from_due(_plans(brakes), users["engineer"])
    assert selectors.parts_unregistered(order) == ["1 x Spring kit"]
    client.force_login(users["technician"])
    page = " ".join(html.unescape(re.sub(r"<[^>]+>", " ", client.get(order.get_absolute_url()).content.decode()))
                    .split())
    assert f"Also needed: {PARTS_UNREGISTERED}" in page and "1 x Spring kit" in page
    document = client.get(f"/workorders/{order.pk}/pdf/").content
    printed = " ".join(" ".join(p.extract_text() for p in PdfReader(io.BytesIO(document)).pages).split())
    assert "Also needed:" in printed and "1 x Spring kit" in printed
    assert printed.index("Parts") < printed.index("1 x Spring kit") < printed.index("Tools")
    assert "3 each" in printed  # the reserved pads, with the register's unit


def test_a_part_planned_beyond_the_stock_on_hand_is_marked_short(brakes, users, client, site):
    Part.objects.filter(name="brake pad set").update(quantity_on_hand=2)
    order = services.work_order_from_due(_plans(brakes), users["engineer"])
    client.force_login(users["technician"])
    page = " ".join(html.unescape(re.sub(r"<[^>]+>", " ", client.get(order.get_absolute_url()).content.decode()))
                    .split())
    assert "2 each (short of the planned 3 each)" in page


def test_a_part_is_named_until_it_is_reserved_on_the_order_or_the_work_is_done(brakes, users, site):
    order = services.work_order_from_due(_plans(brakes), users["engineer"])
    springs = Part.objects.create(site=site, name="Spring kit")
    assert selectors.parts_unregistered(order) == ["1 x Spring kit"]  # in the register now, not on the order
    services.part_add(order, springs, 1)
    assert selectors.parts_unregistered(order) == []
    order.part_uses.filter(part=springs).delete()
    order.state = State.WITHDRAWN
    order.save()
    assert selectors.parts_unregistered(order) == []


def test_an_order_whose_plans_name_no_parts_says_no_parts_listed(telescope, users, client):
    cabinet = subsystem_create(
        telescope, "other", "Eyepiece cabinet", counting_from=dt.date(2026, 1, 1), no_hazards_found=True
    )
    plan = ServicePlan.objects.create(subsystem=cabinet, name="Clean", steps="Clean.",
                                      counting_from=dt.date(2026, 1, 1))
    order = services.work_order_from_due([plan], users["engineer"])
    assert selectors.parts_unregistered(order) == []
    client.force_login(users["technician"])
    page = client.get(order.get_absolute_url()).content.decode()
    assert "No parts listed." in page and "Also needed" not in page
