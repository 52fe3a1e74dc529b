"""What the catalogue's default plans ask of a technician, checked against the rest of the plan.

A printed work order lists a plan's steps, tools, readings (one row per quantity, a box for the value) and
the cautions of its hazards (``workorders.cautions``). These checks read the catalogue: a step that asks for a
figure has a readings row for it or says to note it in the findings; a plan that uses CO2 snow or a cryogen
brings a gas monitor (its caution asks for an oxygen or CO2 monitor in a closed dome); work with hands at the
telescope carries the moving-telescope caution, and work from a platform or ladder the work-at-height one.
Which parts belong to a telescope, and the wording checked, are common practice, no published source.
"""
from __future__ import annotations

import importlib
import re

import pytest

from observatory_ops.logbook.quantities import PLAUSIBLE_RANGE, QUANTITIES
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
