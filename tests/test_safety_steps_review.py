"""A safety reviewer's reading of the printed work orders: what the steps say at the end of the work.

1. A hoist inspection may tag the hoist out of service at its pendant and its isolator: the release that follows
   removes the locks and tags, but leaves that out-of-service tag in place (OSHA 29 CFR 1910.147(e) for the release;
   the tag's staying, common practice, no published source).
2. The axis brakes share one air supply: its coming back releases every brake, so an order restores it once, in the
   words for every axis (``catalogue.BRAKE_AIR_BACK``), whichever brakes it works on and whether or not the air valve
   is registered as an isolation point (the pneumatic caution; ISO 4414 for the air's control, the rest common
   practice, no published source).
3. The test back in service runs under power: watched from outside the telescope's swept volume (and the dome's path,
   or the area under a load), and the observatory goes back to robotic and remote control only when it has passed,
   with the remote operators told.
4. An ad hoc order on a telescope that can move takes the observatory out of robotic and remote control and parks it
   when nothing under power is written, and hands it back at the end, as a planned order does.
5. The mirror cover's check: the primary is covered (or the cover closed) under work above it, and the cover closed
   before the telescope goes back in service.
6. to 8. The recoat planner's orders: the cell's weight on the table before any bolt is loosened and nobody under it;
   the witness samples' reflectance written where the product keeps it; the reinstall in its own words; the star
   check with the enclosure opened and everyone outside the swept volume.
Common practice, no published source, throughout; local codes, the manufacturer's instructions and licensed practice
take precedence, as every order says.
"""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import Mirror
from observatory_ops.registry.catalogue import (
    BRAKE_AIR_BACK,
    HAND_BACK,
    KINDS,
    RELEASE,
    RESTORE,
    RETURNS_TO_SERVICE,
    is_brake_air_step,
    is_release_step,
    is_tag_out_step,
    release_step,
)
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import services
from observatory_ops.workorders.models import IsolationPoint

pytestmark = pytest.mark.django_db

START = dt.date(2026, 1, 1)
TAG_STAYS = "leave in place the out-of-service tag on anything that failed its inspection"
EARLIER_BACK_IN_SERVICE = "Restore the subsystem to service and test it under observation."


def _from_due(*subsystems, users):
    return services.work_order_from_due([p for s in subsystems for p in s.plans.all()], users["engineer"])


def _air_steps(steps: list[str]) -> list[str]:
    return [step for step in steps if "restore the air" in step.lower() or "restore the brake air" in step.lower()]


@pytest.fixture
def mains(telescope):
    return IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")


# --- 1. the hoist's out-of-service tag stays ----------------------------------------------------------------------


def test_a_hoist_inspection_releases_the_locks_but_leaves_the_out_of_service_tag(telescope, mains, users):
    hoist = subsystem_create(telescope, "hoist", "Dome hoist", counting_from=START)
    steps = _from_due(hoist, users=users).step_list
    tag_out = next(i for i, step in enumerate(steps) if is_tag_out_step(step))
    (release,) = [i for i, step in enumerate(steps) if is_release_step(step)]
    assert tag_out < release
    assert TAG_STAYS in steps[release] and "clear of the load's path and the area under it" in steps[release]
    assert services.isolated_steps(steps)[1].stop == release  # still read as the release


def test_only_orders_with_a_tag_out_step_say_the_tag_stays_and_every_wording_is_recognised(
    telescope, site, mains, users
):
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    assert TAG_STAYS not in " ".join(_from_due(drive, users=users).step_list)
    # An ad hoc order written by hand that tags out what fails gets the same release.
    order = services.work_order_ad_hoc(
        site, [drive], "Check the drive coupling", users["engineer"], powered="Park the telescope.",
        steps="Check the coupling.\nIf the coupling is cracked, tag the drive out of service at its isolator.",
    )
    (release,) = [step for step in order.step_list if is_release_step(step)]
    assert release == release_step(["telescope"], tagged_out=True) and TAG_STAYS in release
    # Plans and orders stored before keep the release they had: still recognised.
    assert RELEASE == release_step(["telescope"]) and is_release_step(RELEASE)
    assert not is_tag_out_step(KINDS["primary_mirror"].plans[1].after_isolation[1])  # the recoat's tag is no test's


# --- 2. one air-restore step for the shared brake air ---------------------------------------------------------------


def test_both_axis_brakes_on_an_order_get_one_air_step_in_the_words_for_every_axis(telescope, mains, users):
    IsolationPoint.objects.create(telescope=telescope, energy="air", label="Brake air supply valve")
    brakes = [subsystem_create(telescope, "brake", f"Axis {n} brake", counting_from=START) for n in (1, 2)]
    steps = _from_due(*brakes, users=users).step_list
    assert _air_steps(steps) == [BRAKE_AIR_BACK]
    release = next(i for i, step in enumerate(steps) if is_release_step(step))
    assert steps[release + 1] == BRAKE_AIR_BACK and "each axis balanced or restrained" in BRAKE_AIR_BACK


@pytest.mark.parametrize("on_the_order", [1, 2])
def test_air_brakes_without_an_air_point_still_get_the_step_for_every_axis(telescope, mains, users, on_the_order):
    brakes = [subsystem_create(telescope, "brake", f"Axis {n} brake", counting_from=START) for n in (1, 2)]
    steps = _from_due(*brakes[:on_the_order], users=users).step_list
    assert _air_steps(steps) == [BRAKE_AIR_BACK]


def test_a_brake_plan_stored_with_an_earlier_air_wording_prints_one_air_step(telescope, mains, users):
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    subsystem_create(telescope, "brake", "Axis 2 brake", counting_from=START)
    plan = brake.plans.get()
    earlier = ("With everyone outside the swept volume and the axis balanced or restrained, restore the air slowly and "
               "check that the brake releases and holds.")
    plan.steps_restore = f"{earlier}\n{EARLIER_BACK_IN_SERVICE}"
    plan.save()
    assert is_brake_air_step(earlier) and is_brake_air_step("Restore the air slowly and check that the brake releases "
                                                            "and holds.")
    steps = _from_due(brake, users=users).step_list
    assert _air_steps(steps) == [BRAKE_AIR_BACK]
    assert steps[-2:] == [EARLIER_BACK_IN_SERVICE, HAND_BACK]  # the plan keeps its own words


# --- 3. the test back in service and the hand back ------------------------------------------------------------------


@pytest.mark.parametrize("code, clear", [
    ("axis1_drive", "outside the telescope's swept volume."),
    ("enclosure", "clear of the path of the dome and its shutter (or of the roll-off roof)."),
    ("hoist", "clear of the load's path and the area under it;"),
])
def test_the_test_back_in_service_is_watched_from_a_safe_place_then_the_observatory_handed_back(
    telescope, mains, users, code, clear
):
    part = subsystem_create(telescope, code, code, counting_from=START)
    steps = _from_due(part, users=users).step_list
    back = next(step for step in steps if step in RETURNS_TO_SERVICE)
    assert "under power" in back and "whoever watches the test too" in back and clear in back
    assert "outside the telescope's swept volume" in back
    assert steps[-1] == HAND_BACK and steps.count(HAND_BACK) == 1
    assert "tests of the telescope and the enclosure on this order have passed" in HAND_BACK
    assert "tagged out of service stays out of service" in HAND_BACK and "tell the remote operators" in HAND_BACK


def test_an_order_over_several_plans_hands_back_once_after_every_test(telescope, mains, users):
    parts = [subsystem_create(telescope, code, code, counting_from=START)
             for code in ("axis1_drive", "encoder", "cooling_fans", "computers")]
    steps = _from_due(*parts, users=users).step_list
    assert steps[-1] == HAND_BACK and steps.count(HAND_BACK) == 1
    assert any("read-head signal level along the full travel" in step for step in steps[:-1])


def test_earlier_wordings_of_the_return_to_service_are_still_placed_as_it_and_restore_steps():
    assert EARLIER_BACK_IN_SERVICE in RETURNS_TO_SERVICE and EARLIER_BACK_IN_SERVICE in RESTORE
    assert HAND_BACK in RESTORE


# --- 4. ad hoc orders on a telescope that can move ---------------------------------------------------------------


def test_an_ad_hoc_fault_order_with_nothing_under_power_takes_the_observatory_out_and_hands_it_back(
    telescope, site, mains, users
):
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    order = services.work_order_ad_hoc(site, [drive], "Drive trips", users["engineer"],
                                       steps="Find why the drive trips.")
    steps = order.step_list
    assert steps[0] == "Take the observatory out of robotic and remote control and park the telescope."
    assert steps[1] == services.LOCKOUT_STEP and steps[-1] == HAND_BACK
    # Nothing that cannot move: nothing added.
    box = subsystem_create(telescope, "other", "Eyepiece box", counting_from=START, no_hazards_found=True)
    plain = services.work_order_ad_hoc(site, [box], "Sort", users["engineer"], steps="Sort them.")
    assert plain.step_list == ["Sort them."]
    # Steps under power written by hand stay as written; one taking the observatory out still gets the hand back.
    written = services.work_order_ad_hoc(
        site, [drive], "Drive trips", users["engineer"], steps="Find why.",
        powered="Take the observatory out of robotic and remote control and close the enclosure.",
    )
    assert written.step_list[0].endswith("close the enclosure.") and written.step_list[-1] == HAND_BACK


# --- 5. the mirror cover's check -------------------------------------------------------------------------------


def test_the_mirror_cover_check_protects_the_open_primary_and_closes_the_cover_at_the_end(telescope, mains, users):
    (plan,) = KINDS["mirror_cover"].plans
    assert not any(step.endswith("Leave the cover open.") for step in plan.steps)
    cover = subsystem_create(telescope, "mirror_cover", "Mirror cover", counting_from=START)
    steps = _from_due(cover, users=users).step_list
    lockout = steps.index(services.LOCKOUT_STEP)
    protect = next(i for i, s in enumerate(steps) if "protective cover over the primary" in s)
    hinges = next(i for i, s in enumerate(steps) if s.startswith("Check each hinge"))
    uncover = next(i for i, s in enumerate(steps) if "lift the cover off" in s)
    release = next(i for i, s in enumerate(steps) if is_release_step(s))
    closed = next(i for i, s in enumerate(steps) if "close the mirror cover" in s and "reports closed" in s)
    assert lockout < protect < hinges < uncover < release < closed < steps.index(HAND_BACK)
    assert "the primary mirror's protective cover" in plan.tools


# --- 6. to 8. the recoat planner's orders ------------------------------------------------------------------------


@pytest.fixture
def recoat(telescope, mains, users):
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    plan = mirror_services.recoat_plan_create(mirror, dt.date(2026, 8, 3), list(RECOAT_PHASES), 3.0, users["engineer"])
    return {o.recoat_phase: o.step_list for o in plan.work_orders.all()}


def test_the_removal_takes_the_cells_weight_before_unbolting_and_nobody_goes_under_it(recoat):
    unbolt = next(step for step in recoat["removal"] if "unbolt the cell" in step)
    assert unbolt.index("carries the cell's whole weight before any cell bolt is loosened") < unbolt.index("unbolt")
    assert "nobody stands or reaches under the cell" in unbolt


def test_the_witness_samples_reflectance_goes_in_the_findings_and_the_coatings_note(recoat):
    coat = next(step for step in recoat["coating"] if "witness sample" in step)
    assert "in this order's findings" in coat and "not a measurement of the mirror" in coat
    logged = next(step for step in recoat["coating"] if step.startswith("Log the new coating"))
    # One place to write it first, copied into the coating's note (a walk-through read two places in two steps).
    assert "copy the witness samples' reflectance from this order's findings into its note" in logged


def test_the_reinstall_bolts_the_cell_in_its_own_words_with_the_table_carrying_it(recoat):
    bolt = next(step for step in recoat["reinstall"] if step.startswith("Raise the cell"))
    assert "mirror-removal procedure" not in bolt and "mirror-reinstall procedure" in bolt
    assert "nobody stands or reaches under the cell" in bolt and "torque" in bolt


def test_the_realignment_opens_the_enclosure_with_everyone_clear_before_the_star_check(recoat):
    steps = recoat["realignment"]
    opened = next(i for i, s in enumerate(steps) if "open the enclosure" in s)
    star = next(i for i, s in enumerate(steps) if "on a star" in s)
    assert steps.index(RELEASE) < opened < star
    for step in (steps[opened], steps[star]):
        assert "outside the" in step and "swept volume" in step and "dome" in step
    assert "Return the observatory to robotic and remote control" in steps[-1] and "remote operators" in steps[-1]
