"""What the catalogue's default plans ask of a technician, checked against the rest of the plan.

A printed work order lists a plan's steps, tools, readings (one row per quantity, a box for the value) and
the cautions of its hazards (``workorders.cautions``). These checks read the catalogue: a step that asks for a
figure has a readings row for it or says to note it in the findings; a plan that uses CO2 snow or a cryogen
brings a gas monitor (its caution asks for an oxygen or CO2 monitor in a closed dome); work with hands at the
telescope carries the moving-telescope caution, and work from a platform or ladder the work-at-height one.
Each kind also names what a technician measures on it, so the reading form can offer that first; a kind on which
nothing is usually measured is one of a short list, and the form says so.
Which parts belong to a telescope, what is measured on each kind, and the wording checked, are common practice, no
published source.
"""
from __future__ import annotations

import importlib
import re

import pytest

from observatory_ops.logbook.quantities import PLAUSIBLE_RANGE, QUANTITIES, usual_for_kind
from observatory_ops.registry.catalogue import BEFORE_ISOLATION, KINDS, RELEASE, RESTORE
from observatory_ops.workorders.cautions import HAZARDS
from observatory_ops.workorders.models import RequiredReading
from observatory_ops.workorders.services import LOCKOUT_STEP, steps_in_groups

PLANS = [(kind, plan) for kind in KINDS.values() for plan in kind.plans]

#: A step that asks for a figure: "record" or "measure" as a verb ("the last service record" is a noun).
_ASKS_FOR_A_FIGURE = re.compile(r"\b(?:record|measure)(?<!service record)s?\b", re.IGNORECASE)
#: "Record" puts a figure in the work order's readings; a figure measured for the findings says so.
_RECORDS = re.compile(r"\brecord(?<!service record)s?\b", re.IGNORECASE)
_IN_THE_FINDINGS = "in the findings"
#: Parts of a telescope that a step can put hands on (the dome and its drives are the enclosure's own kind).
_TELESCOPE_PART = re.compile(
    r"\b(mirror|primary|secondary|cell|axis|motor|coupling|roller|disc|encoder|read head|brake|truss|spider|"
    r"focus|focuser|tip-tilt|petal|hinge|cable wrap)",
    re.IGNORECASE,
)
_FROM_A_PLATFORM = re.compile(r"\b(work platform|ladder|scaffold)", re.IGNORECASE)
_USES_A_CRYOGEN = re.compile(r"\b(CO2|nitrogen|cryogen)", re.IGNORECASE)


def _id(value) -> str:
    return value.name if hasattr(value, "name") else value.code


def _quantities(plan) -> list[str]:
    """The quantities a work order made from the plan asks for: its readings and its reading triggers'."""
    return [q for q, _ in plan.readings] + [t[2] for t in plan.triggers if t[0] == "reading"]


def _label_words(quantity: str) -> set[str]:
    """The words of a quantity's label that a step asking for it would use ("Fan current" -> current)."""
    return {word for word in QUANTITIES[quantity][0].lower().split() if len(word) >= 5 and word != "after"}


def _names(step: str, quantity: str) -> bool:
    return any(word in step.lower() for word in _label_words(quantity))


def _hazards(kind, plan) -> set[str]:
    """The hazards, and so the cautions, of a work order made from the plan: the kind's and the task's."""
    return {*kind.hazards, *plan.hazards}


def _hands_at_the_telescope(kind) -> bool:
    """Some plan of the kind names a part of the telescope in the work done with the energy locked out."""
    return any(
        _TELESCOPE_PART.search(text)
        for plan in kind.plans
        for text in (kind.label, plan.name, plan.task, *plan.after_isolation)
    )


# --- readings ---------------------------------------------------------------------------------------------


def test_the_step_finder_tells_a_request_for_a_figure_from_the_service_record():
    assert _ASKS_FOR_A_FIGURE.search("Measure each DC rail under load")
    assert _ASKS_FOR_A_FIGURE.search("record the longest settle time")
    assert _ASKS_FOR_A_FIGURE.search("records both sets")
    assert not _ASKS_FOR_A_FIGURE.search("Read the last service record and open faults for this subsystem.")
    assert not _ASKS_FOR_A_FIGURE.search("Read the service records")
    assert _RECORDS.search("measure its current; record the currents")
    assert not _RECORDS.search("Measure the pad wear and note it in the findings")


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_every_figure_a_step_asks_for_has_a_readings_row_or_goes_in_the_findings(kind, plan):
    quantities = _quantities(plan)
    for step in plan.steps:
        if not _ASKS_FOR_A_FIGURE.search(step) or (_IN_THE_FINDINGS in step and not _RECORDS.search(step)):
            continue
        assert any(_names(step, q) for q in quantities), (
            f"{plan.name}: this step asks for a figure the work order has no row for: {step!r}"
        )


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_every_reading_is_a_known_quantity_that_a_step_asks_for(kind, plan):
    quantities = _quantities(plan)
    assert len(quantities) == len(set(quantities)), "a work order keeps one row per quantity"
    for quantity in quantities:
        assert quantity in QUANTITIES and quantity in PLAUSIBLE_RANGE, quantity
        asked = [step for step in plan.steps if _ASKS_FOR_A_FIGURE.search(step) and _names(step, quantity)]
        assert asked, f"{plan.name}: no step asks for the {QUANTITIES[quantity][0].lower()}"


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_every_limit_fits_the_work_order_and_gives_no_figure_without_a_source(kind, plan):
    longest = RequiredReading._meta.get_field("limit_text").max_length
    for quantity, limit in plan.readings:
        assert len(limit) <= longest, (quantity, limit)
        # No default limit has a published source yet: words ("the maker's figure") or nothing, never a number.
        assert not re.search(r"\d", limit), (quantity, limit)


def test_the_plans_the_reviewer_named_now_print_a_row_for_each_figure():
    def rows(code: str) -> set[str]:
        return {q for plan in KINDS[code].plans for q in _quantities(plan)}

    assert {"supply_voltage_v", "ripple_mv"} <= rows("dc_supplies")
    assert "encoder_signal_pct" in rows("encoder")
    assert {"brake_pressure_bar", "brake_release_s"} <= rows("brake")  # pad wear: no quantity, in the findings
    assert any("pad wear" in step and _IN_THE_FINDINGS in step for step in KINDS["brake"].plans[0].steps)


# --- what is measured on each kind (the reading form offers it first) ----------------------------------------

#: Kinds on which nothing is usually measured: limits and interlocks are tested (they stop or they do not), cable
#: wraps and trusses looked at and torque-marked, a hoist's hook, rope and brake looked at and tested unloaded against
#: its maker's limits, and "other" is anything.
_NOTHING_MEASURED = {"limits", "cable_routing", "truss", "hoist", "other"}


@pytest.mark.parametrize("kind", KINDS.values(), ids=_id)
def test_every_kind_names_what_is_measured_on_it_or_is_one_where_nothing_is(kind):
    assert set(kind.quantities) <= set(QUANTITIES) & set(PLAUSIBLE_RANGE), kind.quantities
    assert len(kind.quantities) == len(set(kind.quantities))
    # Written once: a quantity the kind's plans already ask for or watch is not named again.
    assert not set(kind.quantities) & {q for plan in kind.plans for q in _quantities(plan)}
    assert bool(usual_for_kind(kind.code)) == (kind.code not in _NOTHING_MEASURED), kind.code


def test_the_kinds_the_reviewer_named_have_what_a_technician_measures_on_them():
    assert usual_for_kind("cooling_fans") == {"fan_current_a", "temperature_c"}  # bearings wear: current drifts
    assert usual_for_kind("computers") == {"temperature_c"}  # disks' and processors' temperature
    assert usual_for_kind("enclosure") == {"motor_current_a", "open_close_time_s"}  # drive current, shutter time
    assert usual_for_kind("primary_mirror") == {"reflectance"}  # from its plan's readings, as before


def test_the_quantities_added_for_the_kinds_have_their_units():
    assert {code: QUANTITIES[code][1] for code in
            ("open_close_time_s", "rcd_trip_time_ms", "focus_backlash_mm", "clearance_mm")} == {
        "open_close_time_s": "s", "rcd_trip_time_ms": "ms", "focus_backlash_mm": "mm", "clearance_mm": "mm",
    }


# --- gas monitor ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_a_plan_using_co2_snow_or_a_cryogen_brings_a_gas_monitor(kind, plan):
    text = " ".join((plan.name, plan.task, *plan.steps, *plan.tools, *plan.parts))
    if "cryogen" in _hazards(kind, plan) or _USES_A_CRYOGEN.search(text):
        assert "cryogen" in _hazards(kind, plan), plan.name
        assert any("gas monitor" in tool.lower() for tool in plan.tools), plan.name


# --- hazards ----------------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_hazard_codes_are_the_caution_librarys(kind, plan):
    assert set(_hazards(kind, plan)) <= set(HAZARDS)


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_work_with_hands_at_the_telescope_carries_the_moving_telescope_caution(kind, plan):
    if _hands_at_the_telescope(kind):
        assert "moving_machinery" in _hazards(kind, plan), f"{kind.code}: {plan.name}"


def test_the_telescope_part_finder_finds_the_mirror_cell_fans_and_not_the_power_rooms():
    assert _hands_at_the_telescope(KINDS["cooling_fans"])  # the reviewer's case: fans in the mirror cell
    assert "moving_machinery" in KINDS["cooling_fans"].hazards  # so an ad hoc order on them carries it too
    for code in ("ac_power", "dc_supplies", "computers"):
        assert not _hands_at_the_telescope(KINDS[code]), code


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_work_from_a_platform_or_ladder_carries_the_work_at_height_caution(kind, plan):
    if any(_FROM_A_PLATFORM.search(step) for step in plan.steps):
        assert "height" in _hazards(kind, plan), f"{kind.code}: {plan.name}"


# --- plans stored before the rewording -------------------------------------------------------------------

#: Plans made before the steps were reworded keep the earlier words; a work order must still do these under
#: power, before the lockout step. Steps as the catalogue wrote them before the rewording.
_STORED_EARLIER = {
    "dc_supplies": [
        "Read the last service record and open faults for this subsystem.",
        "Take the observatory out of robotic and remote control and close the dome.",
        "Park the telescope at its service position.",
        "Measure each DC rail under load and record its voltage and ripple. This is work on live equipment: only "
        "a qualified person, under the site's rules for energised work.",
        "Inspect the supplies' terminations, fans and filters for heat marks, dust and looseness; photograph "
        "anything unusual.",
    ],
    "cooling_fans": [
        "Read the last service record and open faults for this subsystem.",
        "Take the observatory out of robotic and remote control and close the dome.",
        "Park the telescope at its service position.",
        "With the fans running, listen to each for bearing noise and measure its current; record the currents.",
        "Replace any fan that is noisy or whose current has drifted from its rating.",
    ],
}


@pytest.mark.parametrize("code", _STORED_EARLIER)
def test_a_plan_stored_with_the_earlier_words_keeps_its_live_test_under_power_when_split_into_groups(code):
    """The upgrade that gives stored plans their three groups (planning migration 0007) recognises the earlier
    words, so the live test stays before the lockout step."""
    split_lines = importlib.import_module("observatory_ops.planning.migrations.0007_plan_step_groups").split_lines
    steps = _STORED_EARLIER[code]
    powered, work, restore = split_lines(steps, BEFORE_ISOLATION, RESTORE)
    assert (powered, work, restore) == (steps[:4], steps[4:], [])
    made = steps_in_groups(list(KINDS[code].hazards), powered, work, restore)
    assert made == [*steps[:4], LOCKOUT_STEP, steps[4], RELEASE]


def test_the_upgrade_splits_the_earlier_restore_wording_from_its_release_clause():
    split_lines = importlib.import_module("observatory_ops.planning.migrations.0007_plan_step_groups").split_lines
    stored = [
        "Park the telescope at its service position.", LOCKOUT_STEP, "Check pad wear.",
        "When the work is done and everyone is clear, remove the locks and tags as the site's lockout procedure "
        "says, restore the air slowly and check that the brake releases and holds.",
    ]
    assert split_lines(stored, BEFORE_ISOLATION, RESTORE) == (
        ["Park the telescope at its service position."], ["Check pad wear."],
        ["Restore the air slowly and check that the brake releases and holds."],
    )


def test_the_upgrade_adds_what_the_catalogue_gained_to_stored_subsystems_and_plans(telescope):
    """Planning migration 0008: a subsystem stored before gets its kind's new hazards, a catalogue plan its new
    reading rows; nothing is removed."""
    import datetime as dt

    from django.apps import apps

    from observatory_ops.registry.services import subsystem_create

    upgrade = importlib.import_module("observatory_ops.planning.migrations.0008_catalogue_additions_for_stored_records")
    fans = subsystem_create(telescope, "cooling_fans", "Cell fans", counting_from=dt.date(2026, 1, 1))
    supplies = subsystem_create(telescope, "dc_supplies", "DC supplies", counting_from=dt.date(2026, 1, 1))
    fans.hazards = ["electrical", "chemical"]  # as stored before, with one the engineer added
    fans.save()
    plan = supplies.plans.get(readings__isnull=False, name=KINDS["dc_supplies"].plans[0].name)
    plan.readings = [{"quantity": "ripple_mv", "limit": "as set by the site"}]
    plan.save()
    upgrade.add_catalogue_hazards_and_readings(apps, None)
    fans.refresh_from_db()
    plan.refresh_from_db()
    assert set(fans.hazards) == {"electrical", "chemical", *KINDS["cooling_fans"].hazards}
    assert plan.readings[0] == {"quantity": "ripple_mv", "limit": "as set by the site"}  # kept as the site set it
    assert {r["quantity"] for r in plan.readings} == {q for q, _ in KINDS["dc_supplies"].plans[0].readings}


# --- tools: what the steps use is on the list ---------------------------------------------------------------

#: What a step says -> what the plan's tools must then name. Common practice, no published source, except the
#: voltage tester proved on a known source immediately before and after the test (OSHA 29 CFR 1910.333(b)(2)(iv)(B),
#: from memory; the electrical caution asks for the same).
_TOOL_FOR_STEP = (
    (r"\bRCD tester\b", "RCD tester"),
    (r"absence of voltage", "proved on a known live source just before and just after use"),
    (r"\btorque\b", "torque wrench"),
    (r"\bclearances?\b|feeler gauges", "feeler gauges"),
    (r"\bmeasure[^.;]*\bcurrent", "clamp meter"),
    (r"\bmeasure the voltage\b", "multimeter"),
    (r"\bripple\b", "oscilloscope"),
    (r"tuning software", "tuning software"),
    (r"\bCO2 snow\b", "CO2 snow gun"),
    (r"\breflectance\b", "reflectometer"),
    (r"\btime the brake release\b", "stopwatch"),
    (r"supply pressure", "pressure gauge"),
    (r"\bbacklash\b", "dial indicator"),
    (r"\bsolvent\b", "safety data sheet"),
    (r"release screws", "release screws"),
    (r"alignment laser", "alignment laser"),
)


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_every_tool_a_step_uses_is_on_the_plans_tools(kind, plan):
    tools = " ".join(plan.tools).lower()
    for pattern, tool in _TOOL_FOR_STEP:
        for step in plan.steps:
            if re.search(pattern, step, re.IGNORECASE):
                assert tool.lower() in tools, f"{plan.name}: {step!r} uses a {tool} the tools do not list"


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_no_tool_holds_a_comma_as_the_work_order_page_lists_them_with_commas(kind, plan):
    assert not [tool for tool in plan.tools if "," in tool], plan.name


def test_the_plans_the_reviewer_named_now_list_their_tools():
    ac_power = KINDS["ac_power"].plans[0]
    assert "RCD tester" in ac_power.tools
    assert any("voltage tester" in tool and "before and just after" in tool for tool in ac_power.tools)
    assert "torque wrench" in KINDS["truss"].plans[0].tools


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_locked_out_work_on_terminals_tests_for_absence_of_voltage_first(kind, plan):
    # The electrical caution (OSHA 29 CFR 1910.147; NFPA 70E): test before touching any conductor.
    touched = [i for i, step in enumerate(plan.after_isolation) if re.search(r"\btermina(l|tion)s?\b", step)]
    if touched:
        tested = [i for i, step in enumerate(plan.after_isolation) if "absence of voltage" in step]
        assert tested and tested[0] <= touched[0], plan.name


# --- brakes: air-operated, or spring-applied and electrically released -------------------------------------


def test_the_air_brake_keeps_its_code_and_its_label_says_how_it_applies_and_releases():
    # A safety re-check: "air-operated" did not say that the springs apply it, which the lockout step (bleed the air,
    # leave the brakes applied) takes for granted; an air-applied brake would release with its air bled.
    air = KINDS["brake"]  # the code stored subsystems and the benchmark use
    assert air.label == "Brake, spring-applied, air-released"
    assert "pneumatic" in air.hazards


def test_a_spring_applied_electrically_released_brake_is_a_kind_of_its_own_with_no_air_in_it():
    spring = KINDS["spring_brake"]
    assert spring.label == "Brake, spring-applied, electrically released"
    assert spring.label.startswith("Brake") and KINDS["brake"].label.startswith("Brake")  # side by side in the list
    # Its drive's supply releases it; its springs stay loaded with the power off (OSHA 29 CFR 1910.147(d)(5)).
    assert set(spring.hazards) == {"electrical", "stored_mechanical", "moving_machinery"}
    (plan,) = spring.plans
    text = " ".join((plan.name, plan.task, *plan.steps, *plan.tools, *plan.parts)).lower()
    for air_word in ("pneumatic", "compressed", "pressure", "air supply", "restore the air"):
        assert air_word not in text, air_word
    assert {q for q, _ in plan.readings} == {"clearance_mm", "supply_voltage_v"}  # air gap; coil voltage released
    locked = " ".join(plan.after_isolation)
    assert "restrain or relieve the spring force" in locked and "pinned or blocked" in locked
    assert usual_for_kind("spring_brake") == {"clearance_mm", "supply_voltage_v", "brake_release_s"}


def test_a_spring_brake_order_carries_the_spring_caution_and_asks_for_an_electrical_point_not_an_air_one(
    telescope, users
):
    import datetime as dt

    from observatory_ops.registry.services import subsystem_create
    from observatory_ops.workorders import selectors, services
    from observatory_ops.workorders.models import IsolationPoint

    brake = subsystem_create(telescope, "spring_brake", "Axis 1 brake", counting_from=dt.date(2026, 1, 1))
    order = services.work_order_from_due(list(brake.plans.all()), users["engineer"])
    assert {"electrical", "stored_mechanical", "moving_machinery"} <= set(order.hazards)
    assert "pneumatic" not in order.hazards and LOCKOUT_STEP in order.step_list
    # A spring is restrained at the brake, not locked at a supply point: only the electrical supply needs a point.
    assert selectors.isolation_gaps(order) == [
        f"No AC mains isolation point is registered for {telescope.name}. Have an engineer add it to the register "
        "before work; if the work is already underway, find and lock the supply before going on."
    ]
    IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    assert selectors.isolation_gaps(order) == []
    printed = selectors.sheet(order, "https://ops.example/workorders/1/")
    assert HAZARDS["stored_mechanical"] in {c.title for c in printed.cautions}
    assert "local codes" in printed.precedence_statement.lower()


# --- the enclosure: a dome or a roll-off roof ---------------------------------------------------------------


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_no_step_assumes_the_enclosure_is_a_dome(kind, plan):
    # A roll-off roof has no shutter to close and no dome to turn (common practice, no published source): a step
    # may name a dome only beside the enclosure it is one case of.
    for text in (plan.name, plan.task, *plan.steps):
        if re.search(r"\b(dome|shutter)\b", text, re.IGNORECASE):
            assert re.search(r"\b(enclosure|roof)", text, re.IGNORECASE), text
        # "The enclosure" is the dome or roof in these steps: an electrical box is a board or a panel.
        assert "enclosures" not in text.lower(), text


def test_the_recoat_removal_prepares_in_the_catalogues_words_so_an_order_writes_them_once():
    from observatory_ops.mirrors.services import _PHASE_WORK

    assert "Take the observatory out of robotic and remote control and close the enclosure." in (
        _PHASE_WORK["removal"].before
    )
    assert _PHASE_WORK["removal"].before[0] in BEFORE_ISOLATION
