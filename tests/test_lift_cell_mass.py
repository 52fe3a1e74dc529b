"""A mirror's cell mass is "not entered" until somebody enters it. While it is not, a lift of the mirror in its cell
shows figures for the mirror alone and says so (the lift page, the work order's page and its paper), and the work is
not started: slings, shackles or a lifting table chosen for the mirror alone would be too light for the mirror in its
cell. An entered 0 (a mirror lifted without its cell) is a figure like any other.

Hand figures: the mirror of tests/test_recoat_phases.py (500 mm borosilicate, 50 mm thick, 120 mm hole) weighs
pi/4 x (50^2 - 12^2) cm2 x 5 cm x 2.23 g/cm3 = 20.63 kg (density: CRC Handbook of Chemistry and Physics); each of two
sling legs at 60 degrees from the horizontal carries T = W / (n sin a) (ASME B30.9; load factor 1.155 at 60 degrees).
"""
from __future__ import annotations

import datetime as dt
import html
import importlib
import math
import re

import pytest
from conftest import mains_isolator
from django.apps import apps
from django.contrib.messages import get_messages
from test_recoat_phases import MIRROR_KG, SLING_WLL_KG, _printed, slings_rated
from test_start_holds import _admin_post
from test_workorders import drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.calc.lifting import lift_figures
from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import CoatingEvent, Mirror
from observatory_ops.registry.models import Subsystem
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import (
    LIFT_CELL_ON_LIFT_PAGE,
    LIFT_CELL_ON_MIRROR,
    LIFT_NO_CELL,
    LIFT_NO_CELL_REFUSED,
    LIFT_NO_LIMIT_REFUSED,
    LIFT_REFUSED,
    LIFT_TOO_FLAT,
)
from observatory_ops.workorders.models import State, WorkOrder

#: An invented cell for the 500 mm mirror.
CELL_KG = 30.0
NOT_ENTERED = "Cell / fixture mass not entered: the figures are the mirror alone"


def _tension_kg(load_kg: float, legs: int = 2, angle_deg: float = 60) -> float:
    """T = W / (n sin a), a from the horizontal (ASME B30.9)."""
    return load_kg / (legs * math.sin(math.radians(angle_deg)))


def _fresh(work_order) -> WorkOrder:
    return WorkOrder.objects.select_related("site", "telescope").get(pk=work_order.pk)


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def _recoat(telescope, users, **cell) -> dict[str, WorkOrder]:
    """The four recoat orders of the 500 mm primary, its mirror record made with ``cell`` (none: left empty), on a
    telescope with its mains isolation point."""
    mains_isolator(telescope)
    primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name="Primary")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", **cell)
    CoatingEvent.objects.create(mirror=mirror, coated_on=dt.date(2025, 8, 1), metal="al")
    plan = mirror_services.recoat_plan_create(mirror, dt.date(2026, 8, 1), list(RECOAT_PHASES), 3.5, users["engineer"])
    return dict(zip(("removal", "coating", "reinstall", "realignment"), plan.work_orders.order_by("planned_date"),
                    strict=True))


@pytest.fixture
def uncelled(telescope, users):
    """The recoat orders of a mirror whose cell mass was left empty."""
    return _recoat(telescope, users)


def _record() -> str:
    """The admin page of the mirror's record, where its cell mass is entered."""
    return f"/admin/mirrors/mirror/{Mirror.objects.get().pk}/change/"


# --- the figures -----------------------------------------------------------------------------------------------------


def test_the_load_in_its_cell_is_mirror_plus_cell_and_not_entered_it_is_the_mirror_alone():
    celled = lift_figures(500, 50, "borosilicate", hole_mm=120, fixture_kg=CELL_KG, wll_kg=SLING_WLL_KG)
    assert celled.mirror_kg == pytest.approx(20.63, abs=0.01)  # CRC density, by hand above
    assert celled.total_kg == pytest.approx(MIRROR_KG + CELL_KG, rel=1e-6)
    assert celled.leg_tension_kg == pytest.approx(_tension_kg(MIRROR_KG + CELL_KG), rel=1e-6)  # 29.23 kg
    assert not celled.fixture_not_entered and celled.warnings == ()

    alone = lift_figures(500, 50, "borosilicate", hole_mm=120, wll_kg=SLING_WLL_KG)
    assert alone.fixture_kg is None and alone.fixture_not_entered
    assert alone.total_kg == pytest.approx(MIRROR_KG, rel=1e-6)
    assert alone.leg_tension_kg == pytest.approx(_tension_kg(MIRROR_KG), rel=1e-6)  # 11.91 kg, not 29.23
    assert alone.warnings == (
        f"{NOT_ENTERED}, less than the load of the mirror in its cell.",
    )


def test_a_cell_mass_of_zero_is_entered_and_warns_of_nothing():
    figures = lift_figures(500, 50, "borosilicate", hole_mm=120, fixture_kg=0, wll_kg=SLING_WLL_KG)
    assert figures.fixture_kg == 0 and not figures.fixture_not_entered and figures.warnings == ()
    assert ("Cell / fixture mass", "0 kg, entered (nothing lifted with the mirror)") in selectors.lift_rows(figures)


def test_a_mirror_recorded_without_a_cell_mass_has_none_entered(uncelled, users, client):
    mirror = Mirror.objects.get()
    assert mirror.cell_mass_kg is None and mirror.lift_inputs["fixture_kg"] is None
    client.force_login(users["viewer"])
    assert "cell mass not entered." in _text(client.get(mirror.get_absolute_url()))


# --- the order of a mirror whose cell mass is not entered --------------------------------------------------------


def test_the_removal_says_on_its_page_and_paper_that_the_figures_are_the_mirror_alone(uncelled, users, client):
    removal = uncelled["removal"]
    figures = selectors.lift(removal)
    assert figures.fixture_not_entered and figures.total_kg == pytest.approx(MIRROR_KG, rel=1e-6)
    rows = dict(selectors.lift_rows(figures))
    assert rows["Cell / fixture mass"] == "not entered"
    assert rows["Total suspended load"].endswith(", the mirror alone")

    client.force_login(users["engineer"])
    page = client.get(removal.get_absolute_url())
    assert NOT_ENTERED in _text(page)
    assert f'<a href="{_record()}">Enter the cell mass on the mirror\'s record</a>' in page.content.decode()
    printed = _printed(removal)
    assert NOT_ENTERED in printed and "Cell / fixture mass not entered" in printed


def test_it_is_issued_but_its_start_is_refused_with_where_to_enter_the_cell_mass(uncelled, users, client):
    removal = slings_rated([uncelled["removal"]])[0]  # the working load limit entered: only the cell is missing
    services.work_order_move(removal, "issue", users["engineer"])  # the paper may go out before
    refusal = LIFT_NO_CELL_REFUSED.format(
        number=removal.number, where=LIFT_CELL_ON_MIRROR.format(url=_record())
    )
    with pytest.raises(services.Refused) as refused:
        services.work_order_move(_fresh(removal), "start", users["technician"])
    assert str(refused.value) == refusal
    assert f"on the mirror's record in the admin ({_record()})" in refusal
    assert _fresh(removal).state == State.ISSUED and _fresh(removal).started_at is None

    client.force_login(users["technician"])
    page = client.get(removal.get_absolute_url())
    assert 'value="start"' not in page.content.decode()
    assert f"Not offered: Start work. {refusal[:1].upper()}{refusal[1:]}." in _text(page)


def test_with_neither_the_limit_nor_the_cell_entered_the_start_names_both_with_where_to_enter_them(uncelled):
    removal = uncelled["removal"]
    where = LIFT_CELL_ON_MIRROR.format(url=_record())
    assert selectors.lift_refusal(removal, "start") == (
        f"{LIFT_NO_LIMIT_REFUSED.format(number=removal.number)}; and "
        f"{LIFT_NO_CELL_REFUSED.format(number=removal.number, where=where)}"
    )
    assert selectors.lift_refusal(removal, "issue") == ""


def test_with_a_flat_angle_the_missing_cell_is_named_among_the_problems(uncelled):
    """Load factor 1/sin 20 = 2.92, flatter than the 30 degrees of rigging practice (ASME B30.9 table)."""
    removal = uncelled["removal"]
    services.lift_set(removal, {**removal.lift_inputs, "angle_deg": 20, "wll_kg": SLING_WLL_KG})
    start = selectors.lift_refusal(_fresh(removal), "start")
    where = LIFT_CELL_ON_MIRROR.format(url=_record())
    flat = LIFT_TOO_FLAT.format(angle=20, factor=1 / math.sin(math.radians(20)), shallow=30)
    missing = LIFT_NO_CELL.format(where=where)
    assert start == LIFT_REFUSED.format(number=removal.number, problems=f"{flat} and {missing}")
    assert missing not in selectors.lift_refusal(_fresh(removal), "issue")


def test_entered_in_the_admin_the_cell_reaches_the_order_the_work_starts_and_keeps_it(
    uncelled, users, admin_client
):
    removal = slings_rated([uncelled["removal"]])[0]
    services.work_order_move(removal, "issue", users["engineer"])
    assert _admin_post(admin_client, _record(), cell_mass_kg=CELL_KG).status_code == 302
    figures = selectors.lift(_fresh(removal))
    assert figures.fixture_kg == CELL_KG and figures.warnings == ()
    assert figures.leg_tension_kg == pytest.approx(_tension_kg(MIRROR_KG + CELL_KG), rel=1e-6)  # 29.23 kg
    assert selectors.lift_refusal(_fresh(removal), "start") == ""
    services.work_order_move(_fresh(removal), "start", users["technician"])
    assert _fresh(removal).state == State.UNDERWAY
    assert _fresh(removal).lift_inputs["fixture_kg"] == CELL_KG  # the figures the lift started with are its record

    assert _admin_post(admin_client, _record(), cell_mass_kg=45).status_code == 302  # a later correction
    assert selectors.lift(_fresh(removal)).fixture_kg == CELL_KG


def test_the_strip_and_coat_order_lifts_the_mirror_out_of_its_cell_with_zero_entered(uncelled):
    coating = uncelled["coating"]
    figures = selectors.lift(coating)
    assert figures.fixture_kg == 0 and figures.total_kg == pytest.approx(MIRROR_KG, rel=1e-6)
    assert dict(selectors.lift_rows(figures))["Cell / fixture mass"] == "0 kg, entered (nothing lifted with the mirror)"
    assert "cell" not in selectors.lift_refusal(coating, "start")


def test_a_mirror_lifted_without_its_cell_enters_zero_and_its_removal_starts(telescope, users):
    removal = slings_rated([_recoat(telescope, users, cell_mass_kg=0)["removal"]])[0]
    figures = selectors.lift(removal)
    assert figures.fixture_kg == 0 and not figures.fixture_not_entered
    assert figures.leg_tension_kg == pytest.approx(_tension_kg(MIRROR_KG), rel=1e-6)
    services.work_order_move(removal, "issue", users["engineer"])
    services.work_order_move(_fresh(removal), "start", users["technician"])
    assert _fresh(removal).state == State.UNDERWAY


# --- the lift page ---------------------------------------------------------------------------------------------------


def test_the_lift_page_says_so_and_an_empty_cell_field_stays_not_entered(uncelled, users, client):
    removal = uncelled["removal"]
    client.force_login(users["engineer"])
    page = client.get(f"/workorders/{removal.pk}/lift/")
    assert NOT_ENTERED in _text(page)
    assert f'href="{_record()}"' in page.content.decode()
    inputs = {name: "" if value is None else value for name, value in removal.lift_inputs.items()}
    response = client.post(f"/workorders/{removal.pk}/lift/", {**inputs, "wll_kg": SLING_WLL_KG})
    where = LIFT_CELL_ON_MIRROR.format(url=_record())
    assert " ".join(str(m) for m in get_messages(response.wsgi_request)) == (
        "Lifting figures saved; the suspended-load caution is on the work order. It may be issued, but they stop the "
        f"work being started: {LIFT_NO_CELL_REFUSED.format(number=removal.number, where=where)}."
    )
    assert "fixture_kg" not in _fresh(removal).lift_inputs and selectors.lift(_fresh(removal)).fixture_not_entered


def test_a_lift_of_no_registered_mirror_has_its_cell_entered_on_the_lift_page(order, users, client):  # noqa: F811
    client.force_login(users["engineer"])
    client.post(f"/workorders/{order.pk}/lift/", {
        "diameter_mm": "700", "thickness_mm": "70", "hole_mm": "0", "material": "borosilicate",
        "lightweighting_fraction": "0", "fixture_kg": "", "legs": "2", "angle_deg": "60", "wll_kg": "500"})
    assert selectors.lift_refusal(_fresh(order), "start") == LIFT_NO_CELL_REFUSED.format(
        number=order.number, where=LIFT_CELL_ON_LIFT_PAGE
    )
    client.post(f"/workorders/{order.pk}/lift/", {
        "diameter_mm": "700", "thickness_mm": "70", "hole_mm": "0", "material": "borosilicate",
        "lightweighting_fraction": "0", "fixture_kg": "60", "legs": "2", "angle_deg": "60", "wll_kg": "500"})
    assert selectors.lift_refusal(_fresh(order), "start") == ""


# --- stored records ------------------------------------------------------------------------------------------------


def test_a_stored_zero_becomes_not_entered_on_mirrors_and_on_orders_still_to_start(telescope, users):
    """mirrors.0007 and workorders.0014, run on records as the old default left them."""
    recoat = _recoat(telescope, users, cell_mass_kg=0)
    WorkOrder.objects.filter(pk=recoat["reinstall"].pk).update(state=State.UNDERWAY)
    mirrors_0007 = importlib.import_module("observatory_ops.mirrors.migrations.0007_cell_mass_not_entered")
    workorders_0014 = importlib.import_module("observatory_ops.workorders.migrations.0014_lift_cell_mass_not_entered")
    mirrors_0007.zero_to_not_entered(apps, None)
    workorders_0014.zero_cell_to_not_entered(apps, None)

    mirror = Mirror.objects.get()
    assert mirror.cell_mass_kg is None
    assert mirror.history.filter(history_change_reason="cell mass 0 was the default: now not entered").exists()
    removal = _fresh(recoat["removal"])
    assert removal.lift_inputs["fixture_kg"] is None and selectors.lift(removal).fixture_not_entered
    assert removal.history.filter(
        history_change_reason="cell mass 0 was the mirror's default: now not entered"
    ).exists()
    assert _fresh(recoat["coating"]).lift_inputs["fixture_kg"] == 0  # lifted out of its cell: 0 is meant
    assert _fresh(recoat["reinstall"]).lift_inputs["fixture_kg"] == 0  # underway: its record stays as it was


def test_a_stored_cell_mass_is_kept(telescope, users):
    recoat = _recoat(telescope, users, cell_mass_kg=CELL_KG)
    importlib.import_module("observatory_ops.mirrors.migrations.0007_cell_mass_not_entered").zero_to_not_entered(
        apps, None
    )
    importlib.import_module(
        "observatory_ops.workorders.migrations.0014_lift_cell_mass_not_entered"
    ).zero_cell_to_not_entered(apps, None)
    assert Mirror.objects.get().cell_mass_kg == CELL_KG
    assert _fresh(recoat["removal"]).lift_inputs["fixture_kg"] == CELL_KG
