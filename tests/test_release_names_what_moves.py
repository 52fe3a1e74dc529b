"""What the step that removes the locks asks everyone to be clear of, and the brake air the lockout vented.

1. Removing the locks lets the drives be powered again: on an order over a dome (its rotation, its shutter) or a hoist,
   what then moves is also the dome's or shutter's path, or the load's path and the area under it, besides the
   telescope, whose own points every order locks. The release step names the telescope and what the order's
   subsystems can set moving (``catalogue.release_step_for``, by their kinds; a subsystem of the kind Other by its
   hazards), each once.
   Before the locks come off the work area is checked and everyone is safely positioned or removed: OSHA 29 CFR
   1910.147(e)(2); what moves at an observatory is common practice, no published source.
2. The lockout vents the air where it locks an air isolation point; on a telescope with spring-applied, air-released
   brakes that air releases them when it returns, and an out-of-balance axis can swing (the pneumatic caution, ISO
   4414; common practice, no published source). An order whose lockout vents it (or that works on such a brake, air
   point registered or not) restores it with everyone clear, once for every axis, right after the release and before
   anything goes back in service, in place of each brake plan's own step.

Local codes, the manufacturer's instructions and licensed practice take precedence, as every order says.
"""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest

from observatory_ops.registry.catalogue import (
    BRAKE_AIR_BACK,
    CLEAR_OF,
    HAND_BACK,
    HAND_BACK_AFTER_REALIGNMENT,
    KINDS,
    RELEASE,
    RELEASE_AT_REINSTALL,
    RELEASE_STEPS,
    RESTORES_BRAKE_AIR,
    is_hand_back,
    is_release_step,
    moving_parts,
    release_step,
)
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import services
from observatory_ops.workorders.cautions import PRECEDENCE_STATEMENT
from observatory_ops.workorders.models import IsolationPoint

pytestmark = pytest.mark.django_db

START = dt.date(2026, 1, 1)
LOCKOUT = services.LOCKOUT_STEP
TELESCOPE = "clear of the telescope"
DOME = "clear of the path of the dome and its shutter (or of the roll-off roof)"
LOAD = "clear of the load's path and the area under it"
BACK_IN_SERVICE = (
    "Restore the subsystem to service and test it under power, with everyone, whoever watches the test too, outside "
    "the telescope's swept volume."
)


def _from_due(*subsystems, users):
    return services.work_order_from_due([p for s in subsystems for p in s.plans.all()], users["engineer"])


#: The air brake plan's earlier step, one axis's words (``catalogue.RESTORES_BRAKE_AIR``).
KINDS_BRAKE_ONE_AXIS = (
    "With everyone outside the swept volume and the axis balanced or restrained, restore the air slowly and check that "
    "the brake releases and holds."
)


def _releases(steps: list[str]) -> list[str]:
    return [step for step in steps if is_release_step(step)]


@pytest.fixture
def mains(telescope):
    return IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")


# --- 1. the release names what moves ----------------------------------------------------------------------------


def test_telescope_work_keeps_the_release_it_always_had():
    """Orders stored before this change carry these words: they stay the telescope's release, recognised as before."""
    assert RELEASE == (
        "When the work is done and everyone is clear of the telescope, remove the locks and tags as the site's "
        "lockout procedure says."
    )
    assert release_step(["telescope"]) == RELEASE and is_release_step(f"  {RELEASE}\r")
    telescope_kinds = [code for code, kind in KINDS.items() if kind.moves == "telescope"]
    assert set(KINDS) - set(telescope_kinds) == {"enclosure", "hoist", "other"}


def test_a_dome_order_releases_with_everyone_clear_of_the_telescope_and_of_the_dome_and_shutter_path(
    telescope, mains, users
):
    """The lockout locks the telescope's own points for all work there (the mount isolator here): removing the locks
    powers its drives too, so the release names the telescope as well as the dome, whatever the work was on."""
    dome = subsystem_create(telescope, "enclosure", "Dome", counting_from=START)
    steps = _from_due(dome, users=users).step_list
    (release,) = _releases(steps)
    assert release == (
        "When the work is done and everyone is clear of the telescope and clear of the path of the dome and its "
        "shutter (or of the roll-off roof), remove the locks and tags as the site's lockout procedure says."
    )
    assert "roof" in release  # the enclosure kind serves a roll-off roof too
    # The locked-out work ends at it, as at the telescope's release: the enclosure's own work is inside.
    lockout, locked_out = services.isolated_steps(steps)
    assert steps[lockout] == LOCKOUT and locked_out.stop == steps.index(release)
    assert steps[locked_out.stop + 1:] == [
        "Restore the subsystem to service and test it under power, with everyone, whoever watches the test too, "
        "outside the telescope's swept volume and clear of the path of the dome and its shutter (or of the roll-off "
        "roof).",
        HAND_BACK,
    ]


def test_a_hoist_order_releases_with_everyone_clear_of_the_loads_path_and_the_area_under_it(telescope, mains, users):
    hoist = subsystem_create(telescope, "hoist", "Dome hoist", counting_from=START)
    steps = _from_due(hoist, users=users).step_list
    (release,) = _releases(steps)
    # Its inspection may tag the hoist out of service: the release says that tag stays.
    assert release == (
        "When the work is done and everyone is clear of the telescope and clear of the load's path and the area under "
        "it, remove the locks and tags as the site's lockout procedure says, but leave in place the out-of-service tag "
        "on anything that failed its inspection: it stays out of service until it is repaired and passes."
    )
    # The inspection may have tagged the hoist out of service: it goes back only if it passed.
    (back,) = [step for step in steps if "restore the subsystem to service" in step]
    assert back.startswith("Only if nothing was found beyond the maker's limits") and "leave it tagged out" in back
    assert steps.index(LOCKOUT) < steps.index(release) < steps.index(back)


def test_a_hydraulic_lift_of_the_kind_other_is_named_by_its_hazards(telescope, site, mains, users):
    """A subsystem of the kind Other says nothing by its kind: a load held up (a suspended load, or hydraulic
    pressure) is what moves; with neither, the telescope, as before."""
    lift = subsystem_create(telescope, "other", "Hydraulic service lift", counting_from=START,
                            hazards=["hydraulic", "electrical", "height"])
    order = services.work_order_ad_hoc(site, [lift], "Service the lift", users["engineer"],
                                       powered="Lower the platform onto its stops.", steps="Change the filter.")
    assert _releases(order.step_list) == [release_step(["telescope", "load"])]
    assert moving_parts("other", ["electrical"]) == ("telescope",)
    assert moving_parts("other", ["suspended_load", "moving_machinery"]) == ("load", "telescope")


def test_an_order_over_a_drive_a_dome_and_a_hoist_removes_the_locks_once_naming_each_moving_thing_once(
    telescope, mains, users
):
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    dome = subsystem_create(telescope, "enclosure", "Dome", counting_from=START)
    hoist = subsystem_create(telescope, "hoist", "Dome hoist", counting_from=START)
    fans = subsystem_create(telescope, "cooling_fans", "Cell fans", counting_from=START)  # a second telescope part
    steps = _from_due(drive, dome, hoist, fans, users=users).step_list
    (release,) = _releases(steps)
    assert release.startswith(
        f"When the work is done and everyone is {TELESCOPE}, {DOME} and {LOAD}, remove the locks and tags as the "
        "site's lockout procedure says, but leave in place the out-of-service tag"  # the hoist's inspection tags out
    )
    for words in (TELESCOPE, DOME, LOAD):
        assert release.count(words) == 1
    # Whatever order the subsystems come in, the same words: the set of wordings stays finite and recognised.
    assert release_step(["load", "telescope", "enclosure", "load"], tagged_out=True) == release


def test_every_wording_of_the_release_is_recognised_and_placed_as_the_release():
    # Every non-empty set of moving things, with or without the out-of-service tag that stays; and the recoat
    # reinstall's own, which takes off the removal's long-term locks and pins too.
    assert len(RELEASE_STEPS) == 2 * (2 ** len(CLEAR_OF) - 1) + 1 and RELEASE_AT_REINSTALL in RELEASE_STEPS
    assert not is_release_step(LOCKOUT) and not is_release_step(BACK_IN_SERVICE) and not is_release_step("")
    dome_release = release_step(["enclosure"])
    # Before the lockout it is refused as the telescope's is; after it, it closes the locked-out work.
    early = ["Close the enclosure.", dome_release, LOCKOUT, "Grease the wheels.", BACK_IN_SERVICE]
    assert services.lockout_sequence_problem(["electrical"], early, []).startswith(
        "Step 2 removes the locks, but the energy is isolated only at step 3"
    )
    placed = ["Close the enclosure.", LOCKOUT, "Grease the wheels.", dome_release, BACK_IN_SERVICE]
    assert services.isolated_steps(placed) == (1, range(2, 3))
    assert services.lockout_sequence_problem(["electrical"], placed, []) == ""


@pytest.mark.parametrize("code", KINDS)
def test_every_kind_says_what_moves_once_its_locks_come_off(code):
    kind = KINDS[code]
    assert kind.moves in CLEAR_OF or (code == "other" and kind.moves == "")
    for plan in kind.plans:  # the plans keep the one release as its place; the order words it
        assert plan.restore[0] == RELEASE


def test_the_hoist_is_a_kind_with_its_own_supply_its_load_and_work_at_height():
    hoist = KINDS["hoist"]
    assert hoist.label == "Hoist or crane"
    assert {"suspended_load", "electrical", "height", "moving_machinery"} <= set(hoist.hazards)
    assert "supply of its own" in hoist.own_point
    (plan,) = hoist.plans
    unloaded = " ".join(plan.before_isolation)
    assert "everyone clear of its path and the area under it" in unloaded and "unloaded" in unloaded


# --- 2. the brake air the lockout vented ------------------------------------------------------------------------


@pytest.fixture
def air_brakes(telescope, mains):
    """The telescope's brakes are spring-applied and air-released, fed through one valve the lockout locks."""
    IsolationPoint.objects.create(telescope=telescope, energy="air", label="Brake air supply valve")
    return subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)


def test_a_drive_order_whose_lockout_vents_the_brake_air_brings_it_back_with_everyone_clear_first(
    telescope, air_brakes, users
):
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    steps = _from_due(drive, users=users).step_list
    (release,) = _releases(steps)
    assert steps[steps.index(release) + 1:] == [BRAKE_AIR_BACK, BACK_IN_SERVICE, HAND_BACK]
    assert "everyone told and outside the swept volume" in BRAKE_AIR_BACK
    assert "each axis balanced or restrained" in BRAKE_AIR_BACK and "slowly" in BRAKE_AIR_BACK


def test_the_air_comes_back_once_per_order_however_many_plans_and_telescopes(site, telescope, air_brakes, users):
    from observatory_ops.registry.models import Telescope

    other = Telescope.objects.create(site=site, name="West", aperture_m=0.4, mount="fork")
    IsolationPoint.objects.create(telescope=other, energy="ac", label="West isolator")
    IsolationPoint.objects.create(telescope=other, energy="air", label="West brake air valve")
    subsystem_create(other, "brake", "West brake", counting_from=START)
    parts = [subsystem_create(scope, kind, f"{scope.name} {kind}", counting_from=START)
             for scope in (telescope, other) for kind in ("axis1_drive", "cooling_fans")]
    steps = _from_due(*parts, users=users).step_list
    assert steps.count(BRAKE_AIR_BACK) == 1
    release = steps.index(_releases(steps)[0])
    assert steps[release + 1] == BRAKE_AIR_BACK
    back_in_service = [i for i, step in enumerate(steps) if step.endswith(BACK_IN_SERVICE)]
    assert len(back_in_service) == 2  # the drives'; the fans' plans end by checking that every fan runs
    assert back_in_service and min(back_in_service) > release + 1  # before anything goes back in service


def _air_steps(steps: list[str]) -> list[str]:
    """The steps that bring brake air back, in any wording (a plan label before one ignored)."""
    return [step for step in steps if "restore the air" in step.lower() or "restore the brake air" in step.lower()]


def test_an_order_with_the_air_brake_plan_brings_the_air_back_once_in_the_words_for_every_axis(air_brakes, users):
    steps = _from_due(air_brakes, users=users).step_list
    assert _air_steps(steps) == [BRAKE_AIR_BACK]
    assert steps[steps.index(_releases(steps)[0]) + 1] == BRAKE_AIR_BACK
    assert not RESTORES_BRAKE_AIR - {BRAKE_AIR_BACK} & set(steps)  # the brake plan's one-axis words are not printed


def test_one_brakes_plan_does_not_stand_in_for_the_other_axes_brakes_that_the_shared_air_releases(
    telescope, air_brakes, users
):
    """The lockout closes the one brake air valve, so every axis's brake applies; its air coming back releases them
    all. An order over the axis 1 brake's plan and the axis 2 drive brings back the air for every axis, with everyone
    clear, once: not the brake plan's own step for its axis as well."""
    subsystem_create(telescope, "brake", "Axis 2 brake", counting_from=START)
    drive = subsystem_create(telescope, "axis2_drive", "Axis 2 drive", counting_from=START)
    steps = _from_due(air_brakes, drive, users=users).step_list
    release = steps.index(_releases(steps)[0])
    assert steps[release + 1] == BRAKE_AIR_BACK and _air_steps(steps) == [BRAKE_AIR_BACK]
    assert "each axis" in BRAKE_AIR_BACK and "each brake" in BRAKE_AIR_BACK
    # Both air brakes' own plans on the order: still one step, not one per axis.
    both = _from_due(*telescope.subsystems.filter(kind="brake"), users=users).step_list
    assert _air_steps(both) == [BRAKE_AIR_BACK]
    assert both[both.index(_releases(both)[0]) + 1] == BRAKE_AIR_BACK
    # Each brake is still tested back in service, after the air.
    assert sum(step.endswith(BACK_IN_SERVICE) for step in both) == 2


def test_air_brakes_with_no_air_point_registered_get_the_step_for_every_axis(telescope, mains, users):
    """Work on an air brake vents its air whether or not the valve is registered as an isolation point, and the shared
    air releases the other axis's brake too: the order over one brake's plan says so in the words for every axis."""
    first = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    subsystem_create(telescope, "brake", "Axis 2 brake", counting_from=START)
    assert not IsolationPoint.objects.filter(energy="air").exists()
    steps = _from_due(first, users=users).step_list
    assert _air_steps(steps) == [BRAKE_AIR_BACK]
    assert steps[steps.index(_releases(steps)[0]) + 1] == BRAKE_AIR_BACK
    # Steps edited by hand with only one axis's words leave the other brake's air unspoken for: flagged.
    one_axis = [step for step in steps if step != BRAKE_AIR_BACK]
    one_axis.insert(one_axis.index(_releases(steps)[0]) + 1, KINDS_BRAKE_ONE_AXIS)
    assert services.brake_air_problem([first], ["pneumatic"], one_axis).endswith(BRAKE_AIR_BACK)


def test_a_brake_plan_stored_with_the_earlier_restore_wording_gets_the_step_with_everyone_clear(air_brakes, users):
    """The earlier wording said nothing of anyone's being clear; the plan keeps its words until an engineer takes the
    catalogue's present ones (planning.selectors.catalogue_revision), and its orders meanwhile get the step."""
    plan = air_brakes.plans.get()
    plan.steps_restore = "Restore the air slowly and check that the brake releases and holds.\n" + BACK_IN_SERVICE
    plan.save()
    steps = _from_due(air_brakes, users=users).step_list
    release = steps.index(_releases(steps)[0])
    assert steps[release + 1:] == [BRAKE_AIR_BACK, BACK_IN_SERVICE, HAND_BACK]  # the air restored once


def test_no_step_where_the_lockout_vents_no_brake_air(site, telescope, mains, users):
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    # An air-released brake and no air point the lockout locks: the moving telescope's order is warned to bleed the
    # brake supply (selectors.isolation_gaps: the tube can swing with the drives locked), so it brings the air back.
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    assert _from_due(drive, users=users).step_list.count(BRAKE_AIR_BACK) == 1
    # Work with nothing that moves vents no brake air where no air point is locked.
    supply = subsystem_create(telescope, "ac_power", "Mains distribution", counting_from=START)
    assert BRAKE_AIR_BACK not in _from_due(supply, users=users).step_list
    IsolationPoint.objects.create(telescope=telescope, subsystem=brake, energy="air", label="Brake valve")
    on_the_brake = services.work_order_ad_hoc(site, [brake], "Replace a hose", users["engineer"],
                                              steps="Replace the brake hose.", restore=BACK_IN_SERVICE)
    steps = on_the_brake.step_list
    assert steps[steps.index(_releases(steps)[0]) + 1:] == [BRAKE_AIR_BACK, BACK_IN_SERVICE, HAND_BACK]
    # A retired air brake leaves spring brakes released electrically: the air vents no brake.
    brake.retired_on = START
    brake.save()
    subsystem_create(telescope, "spring_brake", "Axis 2 brake", counting_from=START)
    IsolationPoint.objects.create(telescope=telescope, energy="air", label="Cover air")
    assert BRAKE_AIR_BACK not in _from_due(drive, users=users).step_list


def test_the_page_and_the_paper_show_the_domes_release_and_the_brake_air(telescope, air_brakes, users, client):
    """As a technician reads it: the order over a dome whose lockout also vents the brakes' air."""
    from test_workorder_pdf import body_text

    dome = subsystem_create(telescope, "enclosure", "Dome", counting_from=START)
    IsolationPoint.objects.create(telescope=telescope, subsystem=dome, energy="ac", label="Dome drives isolator")
    order = _from_due(dome, users=users)
    client.force_login(users["technician"])
    page = " ".join(re.sub(r"<[^>]+>", " ", html.unescape(client.get(order.get_absolute_url()).content.decode()))
                    .split())
    paper = " ".join(body_text(client.get(f"/workorders/{order.pk}/pdf/").content).split())
    for text in (page, paper):
        assert release_step(["telescope", "enclosure"]) in text and BRAKE_AIR_BACK in text
        assert " ".join(PRECEDENCE_STATEMENT.split()) in text


def test_the_recoat_phases_that_take_the_locks_off_bring_the_brake_air_back_and_the_removal_does_not(
    telescope, air_brakes, users
):
    """The removal leaves the locks on until the reinstall (the tube is out of balance): nothing it vented comes back.
    The reinstall and the realignment take the locks off: the air comes back right after, with everyone clear."""
    from observatory_ops.calc.windows import RECOAT_PHASES
    from observatory_ops.mirrors import services as mirror_services
    from observatory_ops.mirrors.models import Mirror

    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    plan = mirror_services.recoat_plan_create(mirror, dt.date(2026, 8, 3), list(RECOAT_PHASES), 3.0, users["engineer"])
    orders = {o.title.split(": ", 1)[1]: o.step_list for o in plan.work_orders.all()}
    assert BRAKE_AIR_BACK not in orders["removal"]
    for phase in ("reinstall", "realignment and measurement"):
        steps = orders[phase]
        assert steps.count(BRAKE_AIR_BACK) == 1, phase
        assert is_release_step(steps[steps.index(BRAKE_AIR_BACK) - 1]) or "remove the pins, the locks" in (
            steps[steps.index(BRAKE_AIR_BACK) - 1]), phase
        # Nothing moves under power before the brakes' air is back and each brake tested.
        moves = [i for i, step in enumerate(steps) if "under power" in step and "Do not move" not in step]
        assert all(i > steps.index(BRAKE_AIR_BACK) for i in moves), phase


# --- steps written or edited by hand ----------------------------------------------------------------------------


def test_steps_edited_without_the_brake_air_step_are_refused_and_an_order_stored_so_is_flagged(
    telescope, air_brakes, users, client
):
    """The steps an engineer edits keep the air step where the lockout vents brake air, as they keep the lockout step;
    an order stored without it (drafted before the step existed) says so on its page and its paper."""
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    order = _from_due(drive, users=users)
    without = [step for step in order.step_list if step != BRAKE_AIR_BACK]
    client.force_login(users["engineer"])
    form = {"title": order.title, "order_type": order.order_type, "priority": order.priority,
            "estimated_hours": order.estimated_hours, "steps": "\n".join(without), "tools": order.tools}
    page = html.unescape(client.post(f"/workorders/{order.pk}/edit/", form).content.decode())
    assert "no step after the locks come off brings it back with everyone clear" in page
    order.refresh_from_db()
    assert BRAKE_AIR_BACK in order.step_list  # nothing stored
    assert client.post(f"/workorders/{order.pk}/edit/",
                       {**form, "steps": "\n".join(order.step_list)}).status_code == 302

    type(order).objects.filter(pk=order.pk).update(steps="\n".join(without))  # as stored before the step existed
    order.refresh_from_db()
    warning = services.brake_air_problem([drive], order.hazards, order.step_list)
    assert warning.endswith(BRAKE_AIR_BACK)
    page = " ".join(html.unescape(client.get(order.get_absolute_url()).content.decode()).split())
    assert "no step after the locks come off brings it back" in page and "Do not start the work" in page


def test_a_recoat_removal_keeping_its_locks_on_is_not_asked_for_the_air(telescope, air_brakes, users):
    from observatory_ops.calc.windows import RECOAT_PHASES
    from observatory_ops.mirrors import services as mirror_services
    from observatory_ops.mirrors.models import Mirror
    from observatory_ops.workorders import selectors

    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    plan = mirror_services.recoat_plan_create(mirror, dt.date(2026, 8, 3), list(RECOAT_PHASES), 3.0, users["engineer"])
    assert all(selectors.lockout_step_warning(order) == "" for order in plan.work_orders.all())
    # The reinstall's release, in its own words, ends its locked-out work: its brake air and first moves under power
    # come after it, so they wait while another crew is locked out (a safety review found them counted as
    # locked-out work).
    reinstall = next(o for o in plan.work_orders.all() if RELEASE_AT_REINSTALL in o.step_list)
    steps = reinstall.step_list
    release = steps.index(RELEASE_AT_REINSTALL)
    assert services.isolated_steps(steps)[1].stop == release
    assert services.held_for_other_crews(steps) == set(range(release + 1, len(steps)))
    # The realignment hands the observatory back in words of its own: read as the hand-back, it waits while another
    # crew has work left on the telescope (a diff review found it unread).
    realignment = next(o for o in plan.work_orders.all() if o.recoat_phase == "realignment")
    back = realignment.step_list.index(HAND_BACK_AFTER_REALIGNMENT)
    assert is_hand_back(realignment.step_list[back]) and back in services.held_for_other_crews(realignment.step_list)


def test_hazards_brought_up_to_date_on_hand_written_steps_name_the_air_step_to_put_in(
    telescope, site, air_brakes, users, client
):
    box = subsystem_create(telescope, "other", "Eyepiece box", counting_from=START, no_hazards_found=True)
    order = services.work_order_ad_hoc(site, [box], "Sort the eyepieces", users["engineer"], steps="Sort them.")
    box.hazards, box.no_hazards_found = ["electrical"], False
    box.save()
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/hazards/", follow=True)
    said = " ".join(str(m) for m in response.context["messages"])
    assert services.LOCKOUT_STEP in said and f'right after it: "{BRAKE_AIR_BACK}"' in said
