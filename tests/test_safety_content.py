"""What a safety officer's review of the work orders asked of the hazard, caution and step content.

A. Work on the AC distribution boards isolates the supply that feeds them, upstream of the telescope's isolators
   (which leave the boards' incoming side live): a point of its own, warned of when none is registered. The
   residual-current device test is live work for a qualified person.
B. Hydraulic pressure and a raised load are a hazard of their own, stored energy that is isolated. A subsystem of the
   kind "Other" carries a hazard or an engineer's "no hazards found"; an order whose subsystems' hazards nobody has
   recorded, or that lacks hazards they now carry, never says that the work needs no isolation, and one with
   nothing recorded is neither issued nor started.
C. An air-operated brake is applied by springs (stored mechanical energy); its pads are replaced with the axis
   pinned; in an order over two brakes each brake is tested, and its air is restored and tested before anything
   goes back in service.
D. Every energy the lockout locks prints its caution.
E. Moving an axis during locked-out work proves the isolation again; the try-start ends with the controls at off.
F. The chemical caution covers flammable solvents and the hydrogen from stripping aluminium.
G. A recoat drafted from the due list pins the axes, tags the telescope out of service and carries the note on
   stopping part way, in the recoat planner's words; the planner's removal takes the cell's weight before unbolting.

The controls are those of OSHA 29 CFR 1910.147 (lockout/tagout: (d)(5) stored energy, (d)(6) verification), NFPA 70E
(energised work), ISO 4413 (hydraulics) and OSHA 29 CFR 1910.106 (flammable liquids); where the wording goes beyond
them it is common practice, no published source. Local codes, the maker's instructions and licensed practice take
precedence, as every order says.
"""
from __future__ import annotations

import datetime as dt
import html
import importlib

import pytest
from django.apps import apps
from django.core.exceptions import ValidationError
from test_workorder_pdf import body_text

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors.models import CoatingEvent, Mirror
from observatory_ops.mirrors.services import _PHASE_WORK, recoat_plan_create
from observatory_ops.registry.catalogue import BRAKE_AIR_BACK, KINDS, PIN_AXES, RELEASE, out_of_balance_tag
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import (
    CAUTIONS,
    DANGER_TO_LIFE,
    HAZARDS,
    ISOLATION_HAZARDS,
    ISOLATION_UNKNOWN_NOT_RECORDED,
    ISOLATION_UNKNOWN_NOT_UP_TO_DATE,
    LOCKOUT_STEP,
    NO_ISOLATION_NEEDED,
    NO_LIFT_FIGURES_NOTE,
    PRECEDENCE_STATEMENT,
    WORK_STOPPED_PART_WAY,
    isolation_statement,
)
from observatory_ops.workorders.models import IsolationPoint, WorkOrder

START = dt.date(2026, 1, 1)
URL = "https://ops.example/workorders/1/"
ENERGISED = "This is work on live equipment: only a qualified person, under the site's rules for energised work."


def _made(*subsystems, users) -> WorkOrder:
    return services.work_order_from_due([p for s in subsystems for p in s.plans.all()], users["engineer"])


def _titles(order: WorkOrder) -> set[str]:
    return {caution.title for caution in selectors.sheet(order, URL).cautions}


# --- A. the AC distribution -----------------------------------------------------------------------------------


@pytest.fixture
def boards(telescope):
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    return subsystem_create(telescope, "ac_power", "AC distribution", counting_from=START)


def test_ac_distribution_work_warns_until_the_boards_own_upstream_supply_is_registered(boards, telescope, users):
    """The mount isolator is downstream of the boards: with it alone locked, their incoming side stays live."""
    order = _made(boards, users=users)
    assert selectors.isolation_gaps(order) == [
        "No isolation point is registered for T1: AC distribution, which is fed from upstream of the telescope's "
        "isolation points: they leave its incoming side live. Have an engineer add its point, for this "
        "subsystem, to the register before work; if the work is already underway, find and lock its supply before "
        "going on."
    ]
    feeder = IsolationPoint.objects.create(telescope=telescope, subsystem=boards, energy="ac",
                                           label="Observatory feeder breaker", location="main switchroom")
    assert selectors.isolation_gaps(order) == []
    assert feeder in selectors.isolation_points(order)
    assert feeder.description in selectors.sheet(order, URL).isolation_points


def test_the_board_work_tests_the_incoming_side_and_the_rcd_test_is_live_work_for_a_qualified_person(boards, users):
    steps = _made(boards, users=users).step_list
    rcd = next(step for step in steps if "RCD tester" in step)
    assert rcd.endswith(ENERGISED) and steps.index(rcd) < steps.index(LOCKOUT_STEP)  # live: before the lockout
    boards_open = next(step for step in steps if "open the boards" in step)
    assert "locked off upstream of them (their own isolation point" in boards_open
    assert "incoming terminals as well as their outgoing ones" in boards_open
    # The same words as the other live tests of the catalogue (DC rails, a spring brake's coil).
    for code in ("dc_supplies", "spring_brake"):
        assert any(ENERGISED in step for step in KINDS[code].plans[0].before_isolation), code


def test_a_dome_still_warns_that_it_has_a_supply_of_its_own(telescope, site, users):
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    dome = subsystem_create(telescope, "enclosure", "Dome", counting_from=START)
    gaps = selectors.isolation_gaps(_made(dome, users=users))
    assert gaps == [
        "No isolation point is registered for T1: Dome, which has a supply of its own: the telescope's points do not "
        "make its drives safe. Have an engineer add its point, for this subsystem, to the register before work; if "
        "the work is already underway, find and lock its supply before going on."
    ]


# --- B. hydraulic pressure, and hazards nobody has recorded ---------------------------------------------------


def test_hydraulic_pressure_and_a_raised_load_are_stored_energy_with_a_caution_of_their_own():
    caution = CAUTIONS["hydraulic"]
    assert caution.title == HAZARDS["hydraulic"] == "Stored hydraulic pressure and raised loads"
    assert caution.severity == DANGER_TO_LIFE  # a platform coming down crushes
    assert "hydraulic" in ISOLATION_HAZARDS
    text = caution.text
    for said in ("lower it onto its mechanical stops or block it with rated props", "never rely on the hydraulics",
                 "lock out the pump", "confirm zero on a gauge or test point on that part", "an accumulator",
                 "Never loosen a fitting under pressure", "needs a hospital at once"):
        assert said in text, said
    assert "ISO 4413" in caution.standard and "1910.147" in caution.standard
    assert "hydraulic pressure, a raised load" in NO_ISOLATION_NEEDED


def test_a_hydraulic_lift_is_locked_out_at_its_own_hydraulic_point_and_prints_its_caution(telescope, site, users):
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    lift = subsystem_create(telescope, "other", "Hydraulic service lift", counting_from=START,
                            hazards=["hydraulic", "electrical", "height"])
    order = services.work_order_ad_hoc(site, [lift], "Service the lift", users["engineer"],
                                       powered="Lower the platform onto its stops.", steps="Change the filter.")
    assert LOCKOUT_STEP in order.step_list
    assert selectors.isolation_gaps(order) == [
        "No hydraulic isolation point is registered for T1. Have an engineer add it to the register before work; if "
        "the work is already underway, find and lock the supply before going on."
    ]
    valve = IsolationPoint.objects.create(telescope=telescope, subsystem=lift, energy="hydraulic",
                                          label="Lift pump isolator and lowering valve")
    assert selectors.isolation_gaps(order) == [] and valve in selectors.isolation_points(order)
    assert valve.description == "T1: Hydraulic service lift: hydraulic pressure: Lift pump isolator and lowering valve"
    assert HAZARDS["hydraulic"] in _titles(order)
    assert selectors.sheet(order, URL).precedence_statement == PRECEDENCE_STATEMENT


def test_a_subsystem_of_kind_other_carries_a_hazard_or_an_engineers_no_hazards_found(telescope):
    with pytest.raises(ValidationError) as refused:
        subsystem_create(telescope, "other", "LN2 dewar", counting_from=START)
    said = refused.value.message_dict["hazards"][0]
    assert said.startswith("The kind 'Other' brings no hazards of its own, so nobody has recorded this subsystem's")
    assert "tick 'No hazards found'" in said
    assert not Subsystem.objects.filter(name="LN2 dewar").exists()
    dewar = subsystem_create(telescope, "other", "LN2 dewar", counting_from=START, hazards=["cryogen"])
    assert dewar.hazards == ["cryogen"] and dewar.hazards_recorded
    rack = subsystem_create(telescope, "other", "Eyepiece rack", counting_from=START, no_hazards_found=True)
    assert rack.hazards == [] and rack.hazards_recorded
    with pytest.raises(ValidationError) as both:
        subsystem_create(telescope, "other", "Heater", counting_from=START, hazards=["electrical"],
                         no_hazards_found=True)
    assert both.value.message_dict["no_hazards_found"] == [
        "'No hazards found' is ticked, but it has hazards: Hazardous electrical energy. Untick one or the other."
    ]


def test_the_admin_refuses_an_other_subsystem_with_no_hazards_and_keeps_the_engineers_none(
    engineer_in_admin, telescope
):
    form = {"telescope": telescope.pk, "kind": "other", "name": "Hydraulic lift", "serial_number": "", "notes": ""}
    page = engineer_in_admin.post("/admin/registry/subsystem/add/", form).content.decode()
    assert "brings no hazards of its own, so nobody has recorded this subsystem&#x27;s hazards" in page
    assert not Subsystem.objects.filter(name="Hydraulic lift").exists()
    engineer_in_admin.post("/admin/registry/subsystem/add/", {**form, "hazards": ["hydraulic", "electrical"]})
    assert Subsystem.objects.get(name="Hydraulic lift").hazards == ["electrical", "hydraulic"]
    engineer_in_admin.post("/admin/registry/subsystem/add/", {**form, "name": "Rack", "no_hazards_found": "on"})
    assert Subsystem.objects.get(name="Rack").no_hazards_found
    # A kind with hazards of its own gets them when added with none ticked, as before.
    engineer_in_admin.post("/admin/registry/subsystem/add/", {**form, "kind": "brake", "name": "Brake"})
    assert Subsystem.objects.get(name="Brake").hazards == list(KINDS["brake"].hazards)


@pytest.fixture
def unrecorded(telescope):
    """A subsystem of the kind "Other" stored before its hazards had to be recorded: neither a hazard nor a none."""
    return Subsystem.objects.create(telescope=telescope, kind="other", name="LN2 fill line")


def test_an_order_whose_hazards_nobody_recorded_says_so_and_is_neither_issued_nor_started(
    unrecorded, site, users, client
):
    order = services.work_order_ad_hoc(site, [unrecorded], "Refill the dewar", users["engineer"],
                                       steps="Refill it.", planned_date=START)
    assert selectors.hazards_unrecorded(order) == [unrecorded]
    title, body, todo = selectors.hazards_notice(order, [])
    assert title == "Hazards not recorded: this work must not start"
    assert body.startswith("Nobody has recorded the hazards of T1: LN2 fill line: neither a hazard nor")
    assert "cannot be issued or started" in todo
    statement = selectors.order_isolation_statement(order)
    assert statement == ISOLATION_UNKNOWN_NOT_RECORDED.format(subsystems="T1: LN2 fill line")
    assert "must not start until an engineer has recorded them" in statement
    assert selectors.sheet(order, URL).isolation_statement == statement
    assert selectors.sheet(order, URL).hazards_notice[-1].startswith("Do not start the work from this sheet")
    held = selectors.moves_held(order)["issue"]
    assert held == ["nobody has recorded the hazards of T1: LN2 fill line: an engineer records them on the subsystem "
                    "in the admin, or records that there are none, before it is issued or started"]
    with pytest.raises(services.Refused, match="nobody has recorded the hazards of T1: LN2 fill line"):
        services.work_order_move(order, "issue", users["engineer"])
    client.force_login(users["engineer"])
    page = client.get(order.get_absolute_url()).content.decode()
    assert "Hazards not recorded: this work must not start" in page
    # Under "Energy isolation", on the page and on paper: never that the work needs none.
    assert html.escape(statement) in page and html.escape(NO_ISOLATION_NEEDED) not in page
    paper = " ".join(body_text(client.get(f"/workorders/{order.pk}/pdf/").content).split())
    assert " ".join(statement.split()) in paper and " ".join(NO_ISOLATION_NEEDED.split()) not in paper

    # Recorded as the engineer finds them: the order lacks them now, and still never says it needs no isolation.
    unrecorded.hazards = ["cryogen"]
    unrecorded.save()
    assert selectors.hazards_unrecorded(order) == [] and "issue" not in selectors.moves_held(order)
    assert selectors.hazards_missing(order) == ["cryogen"]
    assert selectors.order_isolation_statement(order) == ISOLATION_UNKNOWN_NOT_UP_TO_DATE
    services.work_order_hazards_update(order, users["engineer"])
    order.refresh_from_db()
    assert selectors.order_isolation_statement(order) == NO_ISOLATION_NEEDED  # cryogen is isolated by no lockout
    assert HAZARDS["cryogen"] in _titles(order)


def test_the_isolation_statement_prints_a_subsystem_name_with_markup_characters_as_written(telescope, site, users,
                                                                                            client):
    """A bad-input review: the statement names subsystems, and reportlab read "Fans & <filters>" as markup, printing
    "Fans &" (the name's "<filters>" lost) under "Energy isolation"."""
    odd = Subsystem.objects.create(telescope=telescope, kind="other", name='Fans & <filters> "x"')
    order = services.work_order_ad_hoc(site, [odd], "Refill the dewar", users["engineer"], steps="Refill it.",
                                       planned_date=START)
    client.force_login(users["engineer"])
    paper = " ".join(body_text(client.get(f"/workorders/{order.pk}/pdf/").content).split())
    assert 'T1: Fans & <filters> "x"' in paper


def test_an_engineers_no_hazards_found_lets_the_order_go_with_the_no_isolation_statement(unrecorded, site, users):
    order = services.work_order_ad_hoc(site, [unrecorded], "Label the line", users["engineer"],
                                       steps="Label it.", planned_date=START)
    unrecorded.no_hazards_found = True
    unrecorded.save()
    assert selectors.hazards_notice(order, []) == () and selectors.moves_held(order) == {}
    assert selectors.order_isolation_statement(order) == NO_ISOLATION_NEEDED
    services.work_order_move(order, "issue", users["engineer"])


def test_the_isolation_statement_is_said_by_one_function_and_never_claims_no_isolation_while_in_doubt():
    assert isolation_statement(["electrical"]) == ""  # the points are listed instead
    assert isolation_statement(["electrical"], missing=["height"], unrecorded=["T1: Lift"]) == ""
    assert isolation_statement(["height"]) == NO_ISOLATION_NEEDED
    assert isolation_statement([]) == NO_ISOLATION_NEEDED  # every subsystem recorded: none found
    assert isolation_statement(["height"], missing=["laser"]) == ISOLATION_UNKNOWN_NOT_UP_TO_DATE
    assert isolation_statement([], unrecorded=["T1: Lift", "T1: Dewar"]) == (
        "Nobody has recorded the hazards of T1: Lift and T1: Dewar, so this work order cannot say whether the work "
        "needs energy isolation. The work must not start until an engineer has recorded them, or recorded that there "
        "are none."
    )


# --- C. the air-operated brake ---------------------------------------------------------------------------------


def test_an_air_brake_is_applied_by_springs_and_carries_their_caution(telescope, users):
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    assert brake.hazards == ["pneumatic", "stored_mechanical", "moving_machinery"]
    order = _made(brake, users=users)
    assert {HAZARDS["pneumatic"], HAZARDS["stored_mechanical"]} <= _titles(order)
    springs = CAUTIONS["stored_mechanical"].text
    assert "released by air or by a coil" in springs and "the air vented" in springs


def test_the_brake_plan_replaces_its_pads_with_the_axis_pinned_and_the_springs_restrained():
    (plan,) = KINDS["brake"].plans
    pads = next(step for step in plan.after_isolation if "new pad set" in step)
    assert pads.index("pin or block the axis") < pads.index("restrain the springs") < pads.index("keep the axis pinned")
    assert "Brake pad set" in plan.parts
    assert {"the brake maker's spring-restraining tool", "axis locking pin or block"} <= set(plan.tools)


def test_an_order_over_two_brakes_tests_each_brake_and_restores_the_air_before_anything_goes_back_in_service(
    telescope, users
):
    """The two brakes share their air: it comes back once, in the words for every axis, right after the release (no
    air isolation point is registered here, and the work on the brakes vents it all the same); then each brake and the
    drive are tested back in service."""
    first = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    second = subsystem_create(telescope, "brake", "Axis 2 brake", counting_from=START)
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    steps = _made(drive, first, second, users=users).step_list
    label = "Check brake pads, air pressure and holding"
    for brake in ("Axis 1 brake", "Axis 2 brake"):
        powered_test = f"[{brake}: {label}] With everyone outside the swept volume, read the brake supply pressure"
        assert sum(powered_test in s for s in steps) == 1, brake
    # About the whole telescope: once for all three.
    for shared in ("Take the observatory out of robotic and remote control and close the enclosure.",
                   "Park the telescope at its service position."):
        assert steps.count(shared) == 1, shared
    (air,) = [i for i, s in enumerate(steps) if "restore the air" in s or "restore the brake air" in s]
    assert steps[air] == BRAKE_AIR_BACK and steps.index(RELEASE) + 1 == air
    back = [i for i, s in enumerate(steps) if s.endswith("Restore the subsystem to service and test it under power, "
                                                         "with everyone, whoever watches the test too, outside the "
                                                         "telescope's swept volume.")]
    assert len(back) == 3 and air < min(back)


def test_stored_air_brakes_gain_the_springs_hazard_and_their_orders_say_what_they_lack(telescope, users):
    """Registry migration 0012: only adding, as planning migration 0008 did; an order made before keeps its text and
    hazards, and says it lacks the new one until an engineer brings it up to date."""
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    Subsystem.objects.filter(pk=brake.pk).update(hazards=["pneumatic", "moving_machinery"])  # as stored before
    order = _made(Subsystem.objects.get(pk=brake.pk), users=users)
    steps = order.steps
    upgrade = importlib.import_module("observatory_ops.registry.migrations.0012_subsystem_no_hazards_found")
    upgrade.air_brakes_carry_their_springs(apps, None)
    brake.refresh_from_db()
    assert brake.hazards == ["pneumatic", "stored_mechanical", "moving_machinery"]
    assert brake.history.first().history_change_reason == "air brake: springs hazard from the catalogue"
    order.refresh_from_db()
    assert order.steps == steps and "stored_mechanical" not in order.hazards
    assert selectors.hazards_missing(order) == ["stored_mechanical"]


# --- D. every energy the lockout touches prints its caution -----------------------------------------------------


@pytest.mark.parametrize("kind", ["axis1_drive", "truss"])
def test_a_lockout_that_closes_the_brake_air_prints_the_pneumatic_caution(kind, telescope, users):
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    air = IsolationPoint.objects.create(telescope=telescope, energy="air", label="brake air supply valve")
    order = _made(subsystem_create(telescope, kind, kind, counting_from=START), users=users)
    assert "pneumatic" not in order.hazards and air in selectors.isolation_points(order)
    assert {HAZARDS["pneumatic"], HAZARDS["electrical"]} <= _titles(order)
    assert {c.title for c in selectors.cautions(order)} == _titles(order)  # the page shows what the paper prints


def test_work_with_nothing_to_lock_out_prints_no_energy_caution_from_the_register(telescope, site, users):
    IsolationPoint.objects.create(telescope=telescope, energy="air", label="brake air supply valve")
    rack = subsystem_create(telescope, "other", "Rack", counting_from=START, no_hazards_found=True)
    order = services.work_order_ad_hoc(site, [rack], "Tidy", users["engineer"], steps="Tidy it.")
    assert selectors.cautions(order) == []


# --- E. moving an axis during locked-out work --------------------------------------------------------------------


@pytest.mark.parametrize("code", ["drive_rollers", "encoder", "enclosure"])
def test_an_axis_or_enclosure_moved_part_way_is_locked_and_proved_dead_again(code):
    (plan,) = KINDS[code].plans
    move = next(step for step in plan.after_isolation if "must move" in step)
    assert move.endswith("then isolate, lock and tag again and prove the isolation again (try to start the drives, "
                         "then return the controls to off) before touching anything.")


# --- F. chemicals ------------------------------------------------------------------------------------------------


def test_the_chemical_caution_covers_flammable_solvents_in_a_closed_enclosure_and_hydrogen_from_stripping():
    caution = CAUTIONS["chemical"]
    assert caution.title == "Chemicals: corrosive, irritant or flammable"
    text = caution.text
    for said in ("Solvents and solvent wipes (for encoders, rollers and optics) are flammable",
                 "inside a closed dome or enclosure", "keep the space ventilated",
                 "keep sparks, flames and hot surfaces away", "Bring only the small quantity the job needs",
                 "Stripping aluminium in an acid or alkali bath gives off hydrogen"):
        assert said in text, said
    assert "1910.106" in caution.standard and "GHS" in caution.standard
    for code in ("encoder", "drive_rollers"):  # the solvent wipes' plans carry it
        assert "chemical" in KINDS[code].plans[0].hazards


# --- G. a recoat in one order, and the planner's removal --------------------------------------------------------


def test_a_recoat_from_the_due_list_pins_the_axes_tags_the_telescope_and_carries_the_note_on_stopping(
    telescope, users
):
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    order = services.work_order_from_due([primary.plans.get(name="Recoat primary")], users["engineer"])
    steps = order.step_list
    tag = out_of_balance_tag("the mirror is back, the balance restored and this order finished")
    lockout, pinned, tagged = steps.index(LOCKOUT_STEP), steps.index(PIN_AXES), steps.index(tag)
    removed = next(i for i, s in enumerate(steps) if s.startswith("Remove, strip and recoat"))
    rebalanced = next(i for i, s in enumerate(steps) if s.startswith("Restore the axis balance"))
    assert lockout < pinned < tagged < removed < rebalanced < steps.index(RELEASE)
    # A pinned or braked axis looks balanced: a safety re-check had the brakes release and the axis swing at the
    # first moves.
    assert "never take a pinned or braked axis as balanced" in steps[rebalanced]
    # No mirror record here: the lift has no figures, and the note says so (a registered mirror's would wait for them).
    assert selectors.standing_notes(order) == (WORK_STOPPED_PART_WAY, NO_LIFT_FIGURES_NOTE)
    assert {"axis locking pins", "out-of-service tags"} <= set(order.tool_list)
    # The planner's removal says the same in the same words, written once in the catalogue.
    assert _PHASE_WORK["removal"].locked[0] is PIN_AXES
    assert out_of_balance_tag("the reinstall order is finished") in _PHASE_WORK["removal"].after


def test_other_orders_on_a_mirror_carry_no_note_on_stopping(telescope, users):
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    clean = services.work_order_from_due([primary.plans.get(name="Inspect and CO2-snow clean primary")],
                                         users["engineer"])
    assert selectors.standing_notes(clean) == ()


def test_the_planners_removal_takes_the_cells_weight_on_the_table_before_unbolting(telescope, users):
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=dt.date(2025, 8, 1), metal="al")
    plan = recoat_plan_create(mirror, dt.date(2026, 8, 1), list(RECOAT_PHASES), 3.5, users["engineer"])
    removal = plan.work_orders.get(recoat_phase="removal")
    unbolt = next(step for step in removal.step_list if "unbolt the cell" in step)
    assert unbolt.startswith("Raise the lifting table (or take up the hoist) until it carries the cell's whole weight "
                             "before any cell bolt is loosened.")
    assert "nobody stands or reaches under the cell" in unbolt  # as the suspended-load caution says
    assert unbolt.index("before any cell bolt is loosened") < unbolt.index("unbolt the cell") < unbolt.index("Lower it")


def test_a_coating_plant_order_never_says_its_work_needs_no_isolation():
    # A safety re-check: the planner's strip-and-coat order said "This work needs no energy isolation" under its own
    # caution of the plant's lethal voltages.
    from observatory_ops.workorders.cautions import ISOLATED_BY_ITS_OWN_PROCEDURE, isolation_statement

    said = isolation_statement(["vacuum_plant", "chemical"])
    assert said == ISOLATED_BY_ITS_OWN_PROCEDURE["vacuum_plant"] and "locked out and proved dead" in said
    assert isolation_statement(["chemical"]) == NO_ISOLATION_NEEDED
