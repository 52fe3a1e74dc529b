"""Bounds and words of the work-order pages, from a review by use: a part's name that another part has but for
capitals, and the part a drafted order then reserves; quantities of parts with a ceiling; which field a refused part
line gets wrong; the fault page's order type; what the finish form's hours are; a planned date years ahead; a
reflectance a little above 1; and lifting figures out of all proportion.

Each refusal names the field and what is wrong with it, and leaves what is stored as it was. The ceilings (10,000 of
one part, 5 years ahead, a mirror up to 10,000 mm, a reflectance up to 1.5 read as a fraction mistyped) are our own
bounds: common practice, no published source.

Orders are those of tests/test_workorders.py (an axis drive, a lockout, planned for 16 Jun 2026) and
tests/test_workorder_finish.py (a primary mirror's CO2-snow clean, asking for its reflectance).
"""
from __future__ import annotations

import datetime as dt
import re

import pytest
from test_workorder_finish import (  # noqa: F401  (fixtures, used by name)
    _message,
    _nothing_stored,
    _post,
    _started,
    _text,
    cleaning_order,
    mirror,
)
from test_workorder_finish_record import _short_by_two, filters  # noqa: F401
from test_workorders import _all_readings, _confirmed, drive, order  # noqa: F401

from observatory_ops.logbook.quantities import value_problem
from observatory_ops.planning.models import ServicePlan
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Site, Subsystem
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.models import PART_QUANTITY_MAX, Part, PartUse, State, WorkOrder

CO2 = "CO2 cylinder for snow cleaning"


def _other_site() -> Site:
    return Site.objects.create(name="Other Peak", slug="other-peak", latitude_deg=41.0, longitude_deg=-4.0,
                               elevation_m=900, time_zone="Europe/Madrid")


@pytest.fixture
def staff_engineer(users, client):
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    return users["engineer"]


def _admin_part(part: Part, **changes) -> dict:
    """The admin's change form for ``part`` as posted, ``changes`` made."""
    return {"site": part.site_id, "name": part.name, "part_number": part.part_number,
            "quantity_on_hand": part.quantity_on_hand, "reorder_point": part.reorder_point, "unit": part.unit,
            "location": part.location, **changes}


# --- 1. part names that differ only in capitals ------------------------------------------------------------------


@pytest.fixture
def co2_plan(telescope):
    """A plan whose parts line is exactly the CO2 cylinder's name."""
    cabinet = subsystem_create(
        telescope, "other", "Snow cleaning kit", counting_from=dt.date(2026, 1, 1), no_hazards_found=True
    )
    return ServicePlan.objects.create(subsystem=cabinet, name="Clean", steps="Clean.", parts=CO2,
                                      counting_from=dt.date(2026, 1, 1))


def test_renaming_a_part_to_another_parts_name_but_for_capitals_is_refused_in_the_admin(site, staff_engineer, client):
    tissue = Part.objects.create(site=site, name="Lens tissue", quantity_on_hand=5)
    Part.objects.create(site=site, name=CO2, quantity_on_hand=1)
    response = client.post(f"/admin/workorders/part/{tissue.pk}/change/",
                           _admin_part(tissue, name="co2 cylinder for snow cleaning"))
    assert response.status_code == 200
    assert (f'Name: "co2 cylinder for snow cleaning" is the name of another part at this site, "{CO2}", but for '
            "capitals or spaces, and a service plan's parts line could not tell the two apart.") in _text(response)
    tissue.refresh_from_db()
    assert tissue.name == "Lens tissue"


def test_a_name_equal_to_another_but_for_capitals_and_surrounding_spaces_is_refused_at_the_site_only(site):
    Part.objects.create(site=site, name=CO2)
    with pytest.raises(Exception, match="is the name of another part at this site") as refused:
        Part(site=site, name="  co2 CYLINDER for snow cleaning ").full_clean()
    assert list(refused.value.message_dict) == ["name"]
    other = _other_site()
    Part(site=other, name="co2 cylinder for snow cleaning").full_clean()  # another site's register: its own names
    Part(site=site, name="CO2 cylinder, spare valve").full_clean()


def test_an_order_drafted_from_the_due_list_reserves_the_part_named_exactly(site, co2_plan, users):
    """The review's case: part 1 renamed to the lower-case name beside part 3 (stored before the register refused
    it); the plan's line is exactly part 3's name, so part 3 is reserved, whichever comes last in the register."""
    lower = Part.objects.create(site=site, name="co2 cylinder for snow cleaning", quantity_on_hand=4)
    exact = Part.objects.create(site=site, name=CO2, quantity_on_hand=1)
    assert list(Part.objects.filter(site=site))[-1] == lower  # the one a last-match-wins lookup took
    drafted = services.work_order_from_due([co2_plan], users["technician"])
    assert [(use.part_id, use.quantity_planned) for use in drafted.part_uses.all()] == [(exact.pk, 1.0)]
    assert selectors.parts_unregistered(drafted) == []


def test_a_line_that_matches_two_parts_only_but_for_capitals_reserves_neither_and_is_named_on_the_order(
    site, co2_plan, users
):
    """Neither is the line's name exactly: which one is meant is not guessed."""
    co2_plan.parts = "Co2 Cylinder For Snow Cleaning"
    co2_plan.save()
    Part.objects.create(site=site, name="co2 cylinder for snow cleaning")
    Part.objects.create(site=site, name=CO2)
    drafted = services.work_order_from_due([co2_plan], users["technician"])
    assert not drafted.part_uses.exists()
    assert selectors.parts_unregistered(drafted) == ["1 x Co2 Cylinder For Snow Cleaning"]


def test_a_line_matching_one_part_but_for_capitals_still_reserves_it(site, co2_plan, users):
    only = Part.objects.create(site=site, name="co2 cylinder for snow cleaning")
    drafted = services.work_order_from_due([co2_plan], users["technician"])
    assert [use.part_id for use in drafted.part_uses.all()] == [only.pk]


def test_the_wrong_case_variant_reserved_by_hand_leaves_the_plans_part_named_as_still_needed(site, co2_plan, users):
    lower = Part.objects.create(site=site, name="co2 cylinder for snow cleaning")
    exact = Part.objects.create(site=site, name=CO2)
    drafted = services.work_order_from_due([co2_plan], users["technician"])
    drafted.part_uses.all().delete()
    services.part_add(drafted, lower, 1)
    assert selectors.parts_unregistered(drafted) == [f"1 x {CO2}"]
    services.part_add(drafted, exact, 1)
    assert selectors.parts_unregistered(drafted) == []


# --- 2. a ceiling on quantities of parts ---------------------------------------------------------------------------


def test_parts_used_beyond_the_ceiling_are_refused_on_the_finish_form_and_nothing_is_stored(
    order, filters, users, client  # noqa: F811
):
    use = PartUse.objects.get(part=filters)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, **{f"part_{use.pk}": "1e9"}))
    assert response.status_code == 200
    assert "Filter used (each): more than 10,000 of one part is not accepted; check the figure." in _text(response)
    _nothing_stored(order)
    filters.refresh_from_db()
    use.refresh_from_db()
    assert filters.quantity_on_hand == 1 and use.quantity_used is None and use.quantity_short == 0


def test_the_service_refuses_parts_used_beyond_the_ceiling_for_any_caller(order, filters, users):  # noqa: F811
    use = PartUse.objects.get(part=filters)
    with pytest.raises(services.Refused, match="^Filter used: more than 10,000 of one part is not accepted"):
        services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), {use.pk: 1e9},
                                   **_confirmed(order))
    _nothing_stored(order)


def test_the_ceiling_itself_is_accepted(order, filters, users):  # noqa: F811
    use = PartUse.objects.get(part=filters)
    services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6),
                               {use.pk: PART_QUANTITY_MAX}, **_confirmed(order))
    use.refresh_from_db()
    assert use.quantity_used == 10_000 and use.quantity_short == 9_999


def test_a_count_beyond_the_ceiling_is_refused_on_the_parts_page(order, filters, users, client):  # noqa: F811
    use = _short_by_two(order, filters, users)
    client.force_login(users["engineer"])
    response = client.post(f"/sites/{filters.site.slug}/parts/{filters.pk}/count/", {"counted": "1e300"})
    assert response.status_code == 200
    assert "Counted Filter (each): more than 10,000 of one part is not accepted; check the figure." in _text(response)
    filters.refresh_from_db()
    assert filters.quantity_on_hand == 0 and PartUse.objects.get(pk=use.pk).short_counted_at is None
    with pytest.raises(services.Refused, match="^counted Filter: more than 10,000 of one part is not accepted"):
        services.part_count_record(filters, 1e300, users["engineer"])


def test_a_part_added_beyond_the_ceiling_is_refused_naming_the_quantity(order, site, users, client):  # noqa: F811
    part = Part.objects.create(site=site, name="Brake pad set", quantity_on_hand=3)
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/parts/", {"part": part.pk, "quantity": "1e12"})
    assert _message(response) == "Not added: Quantity: more than 10,000 of one part is not accepted; check the figure."
    assert not order.part_uses.exists()
    with pytest.raises(services.Refused, match="^quantity of Brake pad set: more than 10,000 of one part"):
        services.part_add(order, part, 1e12)
    assert not order.part_uses.exists()


@pytest.mark.parametrize("field, label", [("quantity_on_hand", "Quantity on hand"), ("reorder_point", "Reorder point")])
def test_a_stock_figure_beyond_the_ceiling_is_refused_in_the_admin(site, staff_engineer, client, field, label):
    part = Part.objects.create(site=site, name="Brake pad set", quantity_on_hand=3, reorder_point=1)
    response = client.post(f"/admin/workorders/part/{part.pk}/change/", _admin_part(part, **{field: "1e300"}))
    assert response.status_code == 200
    assert f"{label}: more than 10,000 of one part is not accepted; check the figure." in _text(response)
    part.refresh_from_db()
    assert (part.quantity_on_hand, part.reorder_point) == (3, 1)


# --- 3. a refused part line says which field is wrong and why ---------------------------------------------------


@pytest.mark.parametrize("posted, message", [
    ({"quantity": "-2"}, "Not added: Quantity: -2 is not above zero; enter how many are needed."),
    ({"quantity": "0"}, "Not added: Quantity: 0 is not above zero; enter how many are needed."),
    ({"quantity": "two"}, "Not added: Quantity: enter a number, such as 2."),
    ({"quantity": ""}, "Not added: Quantity: enter how many are needed, such as 2."),
    ({"part": "999999"}, "Not added: Part: that is not a part of this site's register; choose one from the list."),
    ({"part": ""}, "Not added: Part: choose one from the list."),
])
def test_a_refused_part_line_names_the_field_and_the_problem(order, site, users, client, posted, message):  # noqa: F811
    part = Part.objects.create(site=site, name="Brake pad set", quantity_on_hand=3)
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/parts/", {"part": part.pk, "quantity": "1", **posted})
    assert _message(response) == message
    assert not order.part_uses.exists()


def test_a_part_of_another_site_is_not_one_of_this_sites_register(order, users, client):  # noqa: F811
    other = _other_site()
    theirs = Part.objects.create(site=other, name="Brake pad set")
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/parts/", {"part": theirs.pk, "quantity": "1"})
    assert _message(response) == (
        "Not added: Part: that is not a part of this site's register; choose one from the list."
    )
    assert not order.part_uses.exists()


def test_both_fields_wrong_are_both_named(order, users, client):  # noqa: F811
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/parts/", {"part": "", "quantity": "-1"})
    assert _message(response) == (
        "Not added: Part: choose one from the list. Quantity: -1 is not above zero; enter how many are needed."
    )


# --- 4. the fault page's order type is corrective ---------------------------------------------------------------


@pytest.fixture
def station(telescope):
    return Subsystem.objects.create(telescope=telescope, kind="other", name="Weather station", no_hazards_found=True)


def test_the_fault_page_starts_at_corrective_listed_first_and_says_what_it_counts_for(site, station, users, client):
    client.force_login(users["technician"])
    response = client.get(f"/sites/{site.slug}/workorders/new/")
    page = response.content.decode()
    select = re.search(r'<select name="order_type"[^>]*>.*?</select>', page, re.S).group(0)
    options = re.findall(r'<option value="(\w+)"( selected)?>', select)
    assert options[0] == ("corrective", " selected") and [value for value, _ in options[1:]] == [
        "preventive", "condition"
    ]
    shown = _text(response)
    assert "New work order (fault, ad hoc)" in shown
    assert "the order type starts at corrective, as for a fault" in shown
    assert ("Corrective for a fault put right: the reliability page counts it as a failure once it is finished."
            in shown)


def test_an_order_drafted_on_the_fault_page_with_its_type_as_offered_is_corrective(site, station, users, client):
    client.force_login(users["technician"])
    page = client.get(f"/sites/{site.slug}/workorders/new/").content.decode()
    offered = re.search(r'<option value="(\w+)" selected>', page)[1]
    client.post(f"/sites/{site.slug}/workorders/new/", {
        "title": "Anemometer stopped", "order_type": offered, "subsystems": [station.pk],
        "steps": "Replace the anemometer.", "planned_date": site_today(site).isoformat(),
    })
    assert WorkOrder.objects.get().order_type == WorkOrder.Type.CORRECTIVE


# --- 5. the finish form's hours are person-hours ----------------------------------------------------------------


def test_the_finish_form_asks_for_person_hours_the_crews_included(order, users, client):  # noqa: F811
    """The reliability page adds the service records' hours up as maintenance hours, what the work cost in people's
    time: with a crew named, its hours count as much as those of the person finishing."""
    _started(order, users)
    client.force_login(users["technician"])
    shown = _text(client.get(f"/workorders/{order.pk}/finish/"))
    assert "Actual hours (person-hours):" in shown
    assert ("Everyone's hours on this work added up, yours and the crew's: two people working 3 hours is 6 "
            "person-hours. They are the maintenance hours the reliability page counts, shared equally among the "
            "service records this order writes.") in shown


# --- 6. a planned date more than 5 years ahead ------------------------------------------------------------------


def _edit(order) -> dict:  # noqa: F811
    return {"title": order.title, "order_type": order.order_type, "priority": order.priority,
            "planned_date": order.planned_date.isoformat(), "assignee": "", "estimated_hours": order.estimated_hours,
            "steps": order.steps, "tools": order.tools}


def test_a_planned_date_years_ahead_is_refused_on_the_edit_page_naming_the_field(order, users, client):  # noqa: F811
    today = site_today(order.site)
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/edit/", {**_edit(order), "planned_date": "2999-01-01"})
    assert response.status_code == 200
    assert (f"Planned date: 01 Jan 2999 is more than 5 years after today at the site ({today:%d %b %Y}): enter the "
            "date the work is planned for.") in _text(response)
    assert WorkOrder.objects.get(pk=order.pk).planned_date == order.planned_date


def test_a_planned_date_years_ahead_is_refused_on_the_fault_page(site, station, users, client):
    client.force_login(users["technician"])
    response = client.post(f"/sites/{site.slug}/workorders/new/", {
        "title": "Anemometer stopped", "order_type": "corrective", "subsystems": [station.pk],
        "steps": "Replace the anemometer.", "planned_date": "2999-01-01",
    })
    assert response.status_code == 200 and "Planned date: 01 Jan 2999 is more than 5 years after" in _text(response)
    assert not WorkOrder.objects.exists()


def test_a_planned_date_five_years_ahead_is_kept(order, users, client):  # noqa: F811
    today = site_today(order.site)
    ahead = today.replace(year=today.year + 5, day=28 if (today.month, today.day) == (2, 29) else today.day)
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/edit/", {**_edit(order), "planned_date": ahead.isoformat()})
    assert response.status_code == 302
    assert WorkOrder.objects.get(pk=order.pk).planned_date == ahead


# --- 7. a reflectance a little above 1 --------------------------------------------------------------------------


@pytest.mark.parametrize("typed", ["1.2", "1.5"])
def test_a_reflectance_a_little_above_1_is_told_a_reflectance_is_at_most_1(
    cleaning_order, mirror, users, client, typed  # noqa: F811
):
    _started(cleaning_order, users)
    client.force_login(users["technician"])
    reflectance = cleaning_order.required_readings.get(quantity="reflectance")
    shown = _text(client.post(f"/workorders/{cleaning_order.pk}/finish/",
                              _post(cleaning_order, **{f"reading_{reflectance.pk}": typed})))
    assert f"a reflectance is at most 1 (a fraction, 0.87 for 87 %), and {typed} is above it." in shown
    assert "% is 0.01" not in shown
    _nothing_stored(cleaning_order)


def test_a_reflectance_typed_as_a_percentage_is_still_told_its_fraction():
    assert value_problem("reflectance", 87) == "a reflectance is a fraction between 0 and 1: 87 % is 0.87"
    assert value_problem("reflectance", 1.2) == (
        "a reflectance is at most 1 (a fraction, 0.87 for 87 %), and 1.2 is above it"
    )
    assert value_problem("reflectance", 0.87) is None
    assert value_problem("reflectance", 1.0) is None


# --- 8. lifting figures in proportion ---------------------------------------------------------------------------

#: A 500 mm borosilicate mirror in a 30 kg cell on two legs at 60 degrees, 1,000 kg slings.
LIFT = {"diameter_mm": "500", "thickness_mm": "50", "hole_mm": "120", "material": "borosilicate",
        "lightweighting_fraction": "0", "fixture_kg": "30", "legs": "2", "angle_deg": "60", "wll_kg": "1000"}


@pytest.mark.parametrize("field, typed, message", [
    ("diameter_mm", "1e308", "Mirror diameter (mm): 1e+308 is out of bounds: enter a value above 0 and at most 10,000 "
                             "(no single telescope mirror is that large: the largest are about 8,400 mm across)."),
    ("diameter_mm", "0", "Mirror diameter (mm): 0 is out of bounds: enter a value above 0 and at most 10,000"),
    ("thickness_mm", "5000", "Edge thickness (mm): 5,000 is out of bounds: enter a value above 0 and at most 2,000"),
    ("hole_mm", "-5", "Central hole (mm): -5 is out of bounds: enter a value at least 0 and at most 10,000"),
    ("lightweighting_fraction", "1", "Lightweighting fraction: 1 is out of bounds: enter a value at least 0 and "
                                     "below 1"),
    ("fixture_kg", "1e9", "Cell / fixture mass (kg): 1e+09 is out of bounds: enter a value at least 0 and at most "
                          "100,000 (more than 100 t is no mirror lift)."),
    ("legs", "40", "Sling legs rigged: enter at most 8; however many are rigged, at most 2 are counted as bearing "
                   "the load."),
    ("angle_deg", "95", "Leg angle from horizontal (deg): 95 is out of bounds: enter a value above 0 and at most 90 "
                        "(90 is a vertical leg)."),
    ("wll_kg", "0", "Working load limit per leg (kg): 0 is out of bounds: enter a value above 0 and at most 100,000"),
    ("diameter_mm", "inf", "Mirror diameter (mm): enter a number."),
    # A review had "central hole (160.0 mm) must be smaller ..." in small letters over the whole form.
    ("diameter_mm", "120", "Central hole (mm): 120 mm must be smaller than the mirror diameter (120 mm)."),
])
def test_lifting_figures_out_of_proportion_are_refused_naming_the_field(
    order, users, client, field, typed, message  # noqa: F811
):
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/lift/", {**LIFT, field: typed})
    assert response.status_code == 200
    shown = _text(response)
    assert message in shown and "must be finite" not in shown
    assert WorkOrder.objects.get(pk=order.pk).lift_inputs is None


def test_lifting_figures_within_the_bounds_are_saved(order, users, client):  # noqa: F811
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/lift/", {**LIFT, "diameter_mm": "10000", "thickness_mm": "900"})
    assert response.status_code == 302
    stored = WorkOrder.objects.get(pk=order.pk)
    assert stored.lift_inputs["diameter_mm"] == 10_000 and stored.state == State.DRAFT
