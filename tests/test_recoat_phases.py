"""The draft work orders of a primary-mirror recoat, read as the technician reads them: the printed steps,
cautions, tools and lifting figures of each phase (removal, strip and coat, reinstall, realignment).

Telescope handling here (pinning an out-of-balance tube, lowering a cell from below onto a lifting table)
is common practice, no published source; lockout follows OSHA 29 CFR 1910.147, stored energy (a spring brake's
springs) its (d)(5); slings OSHA 29 CFR 1910.184.
"""
from __future__ import annotations

import datetime as dt
import html
import io
import math
import re

import pytest
from conftest import mains_isolator
from pypdf import PdfReader

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors import services
from observatory_ops.mirrors.models import CoatingEvent, Mirror
from observatory_ops.registry.catalogue import KINDS, RELEASE
from observatory_ops.registry.models import Subsystem
from observatory_ops.workorders import pdf, selectors
from observatory_ops.workorders import services as workorder_services
from observatory_ops.workorders.cautions import HAZARDS, WORK_STOPPED_PART_WAY
from observatory_ops.workorders.models import State, WorkOrder
from observatory_ops.workorders.services import LOCKOUT_STEP

URL = "https://ops.vestal-ridge.example/workorders/1/"


def _recoat(telescope, users) -> dict[str, WorkOrder]:
    """The four recoat orders of a 500 mm borosilicate primary (120 mm hole, 50 mm thick) in a 30 kg cell, by phase,
    made with the telescope's register as it stands, with its mains isolation point."""
    mains_isolator(telescope)
    primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name="Primary")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=dt.date(2025, 8, 1), metal="al")
    plan = services.recoat_plan_create(mirror, dt.date(2026, 8, 1), list(RECOAT_PHASES), 3.5, users["engineer"])
    removal, coating, reinstall, realignment = plan.work_orders.order_by("planned_date")
    return {"removal": removal, "coating": coating, "reinstall": reinstall, "realignment": realignment}


@pytest.fixture
def orders(telescope, users):
    """The recoat orders (``_recoat``) on a telescope with no brake registered."""
    return _recoat(telescope, users)


#: A working load limit per sling leg, as the engineer enters it before the work starts: a lifting order starts only
#: with one (ASME B30.9: the legs' rated capacity compared with their tension). 500 kg is far above these lifts' legs.
SLING_WLL_KG = 500


def slings_rated(orders):
    """The orders, each lifting one with ``SLING_WLL_KG`` entered on its lift page (``services.lift_set``)."""
    for order in orders:
        if order.lift_inputs:
            workorder_services.lift_set(order, {**order.lift_inputs, "wll_kg": SLING_WLL_KG})
    return orders


def _first(steps: list[str], *words: str) -> int:
    """Index of the first step holding all the words (case-insensitive)."""
    return next(i for i, s in enumerate(steps) if all(w.lower() in s.lower() for w in words))


def _printed(order) -> str:
    document = pdf.render_sheet(selectors.sheet(order, URL))
    return " ".join(" ".join(page.extract_text().split()) for page in PdfReader(io.BytesIO(document)).pages)


# Hand computation, density from the CRC Handbook of Chemistry and Physics (borosilicate 2.23 g/cm3):
# pi / 4 x (50^2 - 12^2) cm2 x 5 cm = 9252.9 cm3, x 2.23 g/cm3 = 20.63 kg.
MIRROR_KG = math.pi / 4 * (50**2 - 12**2) * 5 * 2.23 / 1000


def test_removal_leaves_the_telescope_pinned_locked_out_and_out_of_service(orders):
    """Release from lockout only when the work is complete (OSHA 29 CFR 1910.147(e)); the telescope is not
    complete until the reinstall, so the removal ends with the axes pinned, the telescope tagged out of
    service and out of robotic control, and drive power back only under the lockout procedure with the pins
    in (common practice, no published source)."""
    steps = selectors.sheet(orders["removal"], URL).steps
    lockout = steps.index(LOCKOUT_STEP)
    pinned = _first(steps, "lock both axes", "pins")
    lowered = _first(steps, "lower it", "lifting table")
    assert lockout < pinned < lowered
    balance = _first(steps, "out of balance", "balance weights")
    assert "keep both axes pinned" in steps[balance] and balance > lowered
    ending = steps[balance + 1 :]
    assert ending, "the removal must end with the telescope left safe, not with the locks off"
    kept = ending[_first(ending, "do not take the locks off", "axes pinned")]
    assert "long-term lock" in kept and "until the reinstall" in kept  # OSHA 29 CFR 1910.147(f)(4)
    tag = ending[_first(ending, "out of service")]
    assert "robotic and remote control" in tag and "until the reinstall" in tag
    power = ending[_first(ending, "power back before the reinstall")]
    assert "only as the site's lockout procedure says, with both axes still pinned" in power
    # Nothing hands the telescope back: no step removes the locks, tags or pins during the removal.
    assert not any("remove the locks" in s or "remove the pins" in s for s in steps)
    assert not any(s.startswith("Under power") for s in steps)


def test_reinstall_starts_where_the_removal_left_off_and_balances_before_any_powered_move(orders):
    """Balance restored with the drives locked out before an axis moves under power (common practice, no
    published source); the locks come off as the site's procedure says (OSHA 29 CFR 1910.147(e))."""
    steps = selectors.sheet(orders["reinstall"], URL).steps
    first = steps[0]
    assert "as the removal left it" in first and "pinned" in first and "out of service" in first
    assert "Do not move an axis under power" in first
    assert not any("horizontal" in s for s in steps)
    lockout = steps.index(LOCKOUT_STEP)
    mirror_in = _first(steps, "into the cell")
    cell_in = _first(steps, "raise the cell", "lifting table")
    balance = _first(steps, "restore the axis balance", "drives still locked out")
    released = _first(steps, "only when both axes are balanced", "remove the pins, the locks", "long-term locks")
    assert lockout < mirror_in < cell_in < balance < released
    first_moves = _first(steps, "first moves under power")
    assert released < first_moves
    assert "out of robotic and remote control until the realignment" in steps[first_moves + 1]
    # The realignment gives the telescope back to robotic control only at its very end.
    realign = selectors.sheet(orders["realignment"], URL).steps
    assert "Return the observatory to robotic and remote control" in realign[-1]


def test_realignment_removes_the_locks_once_before_its_powered_collimation_check(orders):
    """Release from lockout when the locked-out work is complete (OSHA 29 CFR 1910.147(e)): the realignment
    collimates with the drives locked out, then removes the locks with the catalogue's own release step (the
    one every order uses), and only then checks the collimation on a star under power."""
    steps = selectors.sheet(orders["realignment"], URL).steps
    lockout = steps.index(LOCKOUT_STEP)
    collimate = _first(steps, "collimate with the alignment laser")
    released = steps.index(RELEASE)
    star = _first(steps, "under power", "on a star")
    assert lockout < collimate < released < star
    assert sum("remove the locks" in s for s in steps) == 1


@pytest.mark.parametrize("phase", ["removal", "reinstall"])
def test_the_phases_that_may_pause_over_days_off_say_how_to_leave_the_work_as_a_note_not_a_step(orders, phase, users,
                                                                                                  client):
    """Continuity of lockout at shift or personnel changes: OSHA 29 CFR 1910.147(f)(4). A load is never left
    suspended (common practice, no published source). It holds only if the work stops, so it is a standing note above
    the steps, on the page and on paper, and no step to tick after the lockout whether the work stopped or not."""
    sheet = selectors.sheet(orders[phase], URL)
    assert sheet.standing_notes == (WORK_STOPPED_PART_WAY,)
    assert not any("If the work stops" in step for step in sheet.steps)
    assert sheet.steps[sheet.steps.index(LOCKOUT_STEP) + 1].startswith(("Lock both axes", "Lift the mirror"))
    note = WORK_STOPPED_PART_WAY
    assert "never left hanging" in note and "both axes pinned" in note
    assert "long-term locks" in note and "several shifts" in note
    printed = _printed(orders[phase])
    assert f"Throughout this work: {note}" in printed
    assert printed.index("Throughout this work") < printed.index(LOCKOUT_STEP)  # above the steps, with no box
    client.force_login(users["technician"])
    page = " ".join(html.unescape(client.get(orders[phase].get_absolute_url()).content.decode()).split())
    assert f"<strong>Throughout this work:</strong> {note}" in page
    assert page.index("Throughout this work") < page.index('id="steps"')


def test_the_other_phases_and_finished_orders_carry_no_such_note(orders, users):
    for phase in ("coating", "realignment"):
        assert selectors.standing_notes(orders[phase]) == ()
    slings_rated(orders.values())
    removal = orders["removal"]
    workorder_services.work_order_move(removal, "issue", users["engineer"])
    workorder_services.work_order_move(removal, "start", users["technician"])
    assert selectors.standing_notes(WorkOrder.objects.get(pk=removal.pk)) == (WORK_STOPPED_PART_WAY,)
    WorkOrder.objects.filter(pk=removal.pk).update(state=State.FINISHED)  # the record, printed afterwards
    assert selectors.standing_notes(WorkOrder.objects.get(pk=removal.pk)) == ()


def test_coating_order_carries_the_vacuum_plant_the_lift_and_named_chemicals(orders):
    coating = orders["coating"]
    # The catalogue's own "Recoat primary" plan names the coating plant hazard; the order uses the same code.
    recoat = next(p for p in KINDS["primary_mirror"].plans if p.name == "Recoat primary")
    assert "vacuum_plant" in recoat.hazards and "vacuum_plant" in coating.hazards
    sheet = selectors.sheet(coating, URL)
    titles = {c.title for c in sheet.cautions}
    assert {HAZARDS["vacuum_plant"], HAZARDS["suspended_load"], HAZARDS["chemical"]} <= titles
    # Slings: OSHA 29 CFR 1910.184, printed beside the suspended-load caution.
    assert any("1910.184" in c.standard for c in sheet.cautions)
    steps = sheet.steps
    chemicals = steps[_first(steps, "names of the stripping chemicals")]
    assert "safety data sheets" in chemicals and "cannot know" in chemicals
    assert not any("agreed chemicals" in s for s in steps)
    assert "outside coating plant" in steps[0] and "own procedures" in steps[0]
    assert "tank" in steps[_first(steps, "lift the mirror", "rated slings")]
    assert "coating chamber" in steps[_first(steps, "lift the mirror", "rated slings")]
    assert any("Safety data sheets" in t for t in sheet.tools)
    # Lifted out of its cell: the figures are for the mirror alone (hand computation above), and say so.
    figures = selectors.lift(coating)
    assert figures.fixture_kg == 0 and figures.total_kg == pytest.approx(MIRROR_KG, rel=1e-3)
    assert "for the mirror alone" in steps[_first(steps, "lift the mirror", "rated slings")]


def test_removal_lowers_the_cell_from_a_zenith_pointing_tube_with_lifting_gear_listed(orders):
    removal = orders["removal"]
    sheet = selectors.sheet(removal, URL)
    steps = sheet.steps
    assert not any("horizontal" in s for s in steps)
    park = steps[_first(steps, "zenith")]
    assert steps.index(park) < steps.index(LOCKOUT_STEP) and "from below" in park
    assert any(t.startswith("Lifting table") for t in sheet.tools)
    assert any("slings" in t and "shackles" in t for t in sheet.tools)
    # The order keeps its figures for mirror plus the 30 kg cell (hand computation above) ...
    figures = selectors.lift(removal)
    assert figures.total_kg == pytest.approx(MIRROR_KG + 30, rel=1e-3)
    # ... and the mirror-only lift says the figures are for mirror and cell and that its load is less.
    crate = steps[_first(steps, "transport crate")]
    assert "mirror and its cell together" in crate and "smaller load" in crate
    reinstall = selectors.sheet(orders["reinstall"], URL).steps
    assert "mirror and its cell together" in reinstall[_first(reinstall, "into the cell")]


@pytest.mark.parametrize("phase", ["removal", "coating", "reinstall", "realignment"])
def test_every_printed_recoat_order_lists_its_tools(orders, phase):
    """The printed sheet (pypdf text of the PDF) lists the tools instead of "No tools listed"."""
    text = _printed(orders[phase])
    assert "No tools listed" not in text
    assert orders[phase].tool_list[0].split()[0] in text


def test_lifting_phases_print_the_lift_figures_and_the_precedence_statement(orders):
    """Local codes, the maker's instructions and licensed practice take precedence (project rule)."""
    for phase in ("removal", "coating", "reinstall"):
        text = _printed(orders[phase])
        assert "Total suspended load" in text and "take precedence" in text


# --- the axis brakes, as the telescope's register has them ------------------------------------------------------
# Applied by springs, a brake holds its axis with its air vented or its power isolated, whatever the balance; the
# check releases one brake at a time under the site's procedure (common practice, no published source; the site's
# balancing procedure and the mount maker's instructions come first). Its springs stay loaded with every supply off
# (OSHA 29 CFR 1910.147(d)(5): stored energy relieved, disconnected or restrained).

#: The reinstall's balance check for spring-applied, air-released brakes, word for word as every recoat order carried
#: it before the check was worded for the brakes registered: a telescope with air brakes still gets exactly this.
AIR_BALANCE_CHECK = (
    "Check the balance one axis at a time, as the site's balancing procedure and the mount maker's instructions "
    "say. The brakes are applied by springs and released by air, so with the air vented they hold an axis whatever "
    "its balance: never take a pinned or braked axis as balanced. For each axis: keep the drives locked out and "
    "disabled, everyone outside the swept volume, and the axis held or restrained as the procedure says, with its "
    "pin in; release that axis's brake only as the procedure says (its air restored under the site's lockout "
    "procedure, or the maker's manual release); draw the pin only when ready, and let the restraint out slowly to "
    "see whether the axis turns under gravity. Then pin it and apply its brake again (vent its air and lock it out "
    "again) before checking the other axis, and correct the balance until neither axis turns."
)

#: Brake kinds registered on the telescope -> (hazards of the brakes on the removal and the reinstall, words of the
#: balance check). The air brake's wording is ``AIR_BALANCE_CHECK``.
BRAKES = {
    # Both kinds are applied by springs, which stay loaded with the air vented or the power off.
    "air": (("brake", "brake"), {"pneumatic", "stored_mechanical"}, ("applied by springs and released by air",)),
    "electric": (
        ("spring_brake", "spring_brake"), {"stored_mechanical"},
        ("applied by springs and released electrically, so with their power isolated they hold an axis",
         "(its brake power restored under the site's lockout procedure, or the maker's manual release)",
         "apply its brake again (isolate its power and lock it out again)"),
    ),
    "both": (
        ("brake", "spring_brake"), {"pneumatic", "stored_mechanical"},
        ("some released by air and some electrically", "its air or its brake power, whichever releases it",
         "vent its air or isolate its power, whichever released it, and lock it out again"),
    ),
    "none": (
        (), set(),
        ("No axis brake is registered for this telescope: follow the mount's own brake arrangement as its maker's "
         "instructions describe it", "by the means the mount's brake arrangement gives, under the site's lockout "
         "procedure, or the maker's manual release"),
    ),
}


def _braked(telescope, kinds) -> None:
    for axis, kind in enumerate(kinds, start=1):
        Subsystem.objects.create(telescope=telescope, kind=kind, name=f"Axis {axis} brake")


@pytest.mark.parametrize("brakes", BRAKES)
def test_the_removal_and_reinstall_carry_the_hazards_of_the_brakes_registered_and_word_the_check_for_them(
    telescope, users, brakes
):
    kinds, hazards, words = BRAKES[brakes]
    _braked(telescope, kinds)
    made = _recoat(telescope, users)
    # The realignment adjusts the cell with the drives locked out: its lockout holds the brakes as the others' do.
    for phase in ("removal", "reinstall", "realignment"):
        carried = set(made[phase].hazards)
        # The lockout isolates the drives (OSHA 29 CFR 1910.147); the brakes' energies only where they are registered.
        assert "electrical" in carried and carried & {"pneumatic", "stored_mechanical"} == hazards, phase
        titles = {caution.title for caution in selectors.sheet(made[phase], URL).cautions}
        assert {HAZARDS[h] for h in hazards} <= titles, phase
    # At the coating plant the mirror is away from the telescope: its brakes are nothing of that work.
    assert not set(made["coating"].hazards) & {"pneumatic", "stored_mechanical"}
    steps = made["reinstall"].step_list
    check = steps[_first(steps, "check the balance one axis at a time")]
    for said in (*words, "as the site's balancing procedure and the mount maker's instructions say",
                 "never take a pinned or braked axis as balanced", "drives locked out and disabled",
                 "release that axis's brake only as the procedure says", "pin it and apply its brake again"):
        assert said in check, said
    assert steps[steps.index(check) + 1].startswith("Only when both axes are balanced")  # last before the release
    if "pneumatic" not in hazards:  # no air to restore or vent on a telescope with none registered
        for phase in ("removal", "reinstall"):
            assert not any(re.search(r"\bair\b", step) for step in made[phase].step_list), phase


def test_a_telescope_with_air_brakes_gets_the_balance_check_unchanged_and_a_retired_spring_brake_counts_for_nothing(
    telescope, users
):
    _braked(telescope, ("brake", "brake"))
    Subsystem.objects.create(telescope=telescope, kind="spring_brake", name="Old axis 1 brake",
                             retired_on=dt.date(2025, 1, 10))
    made = _recoat(telescope, users)
    assert AIR_BALANCE_CHECK in made["reinstall"].step_list
    assert not any("released electrically" in step for step in made["reinstall"].step_list)


def test_spring_brakes_put_the_stored_energy_caution_on_the_printed_reinstall(telescope, users):
    """The printed sheet (pypdf text of the PDF) carries the spring caution and its standard, OSHA 29 CFR
    1910.147(d)(5), with the check worded for brakes released electrically."""
    _braked(telescope, ("spring_brake", "spring_brake"))
    printed = _printed(_recoat(telescope, users)["reinstall"])
    assert HAZARDS["stored_mechanical"] in printed and "1910.147(d)(5)" in printed
    assert "isolate its power and lock it out again" in printed
    assert HAZARDS["pneumatic"] not in printed


def test_the_paper_says_the_points_are_locked_at_the_lockout_step_after_the_steps_under_power(orders):
    """A paper review: "lock out and tag each before the work starts" stood above a removal's slew to the zenith done
    under power first, as the page orders it (locked at the lockout step, after the steps before it)."""
    removal = orders["removal"]
    at = _first(removal.step_list, "isolate, lock and tag") + 1
    printed = " ".join(_printed(removal).split())
    assert f"lock out and tag each at step {at}, the lockout" in printed
    assert f"Do steps 1 to {at - 1} first, under power; once a lock is on, do no step under power" in printed
    assert "lock out and tag each before the work starts" not in printed


def test_the_paper_leaves_a_line_for_who_locked_out_released_and_handed_back_and_when(orders):
    """A paper review: entered later from paper, ticks carry the time they were entered; the lockout, the removal of
    the locks and the hand-back get a line for initials, date and time on paper of work still to do."""
    printed = _printed(orders["removal"])
    assert "Lockout: " in printed and printed.count("Initials ____________ Date ____________ Time ____________") == 1
    realignment = _printed(orders["realignment"])
    assert "Handed back by ____________ Date ____________ Time ____________ Remote operators told: yes / no" \
        in realignment
