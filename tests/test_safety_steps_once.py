"""Safety steps said once: whose brake air a lockout vents is decided in one place, and a merged order takes the
observatory out of robotic and remote control once.

1. A spring-applied, air-released brake stays released while its air is on: with the drives locked and the air on, an
   unbalanced tube can swing, so work with a moving telescope that has such brakes vents their air (common practice,
   no published source). Relieving stored energy after isolation is OSHA 29 CFR 1910.147(d)(5); bringing the air
   back only with everyone safely positioned is OSHA 29 CFR 1910.147(e)(2). One function,
   ``selectors.brake_air_vented``, says whose brake air the lockout vents; the step that brings it back
   (``services.brake_air_back``, ``catalogue.BRAKE_AIR_BACK``) and the warning to bleed it where no air point is
   registered (``selectors.isolation_gaps``) both read it, so wherever the warning says to bleed the air, the order
   brings it back.
2. Taking the observatory out of robotic and remote control before work, and handing it back at the end with the
   remote operators told, is common practice, no published source (telling those affected that the locks go on and
   come off is OSHA 29 CFR 1910.147(c)(9)). A merged order says it once, first, and hands it back once, last
   (``catalogue.HAND_BACK``); only the catalogue's wordings are taken apart, never a step the site wrote itself.

Local codes, the manufacturer's instructions and licensed practice take precedence, as every order says.
"""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.registry.catalogue import (
    BRAKE_AIR_BACK,
    HAND_BACK,
    KINDS,
    OUT_OF_CONTROL,
    OUT_OF_CONTROL_AND,
    TAKES_OUT_OF_CONTROL,
    TELESCOPE_STEPS,
)
from observatory_ops.registry.models import Telescope
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.models import IsolationPoint

pytestmark = pytest.mark.django_db

START = dt.date(2026, 1, 1)
SWING = "whose brakes are released by air"
CLOSE = "Take the observatory out of robotic and remote control and close the enclosure."
PARKED = "Take the observatory out of robotic and remote control and park the telescope."
PARK = "Park the telescope at its service position."


def _from_due(*subsystems, users):
    return services.work_order_from_due([p for s in subsystems for p in s.plans.all()], users["engineer"])


def _out_of_control(steps: list[str]) -> list[str]:
    """The steps that take the observatory out of robotic and remote control (a plan label before one ignored)."""
    return [step for step in steps if "out of robotic" in step.lower()]


@pytest.fixture
def mains(telescope):
    return IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")


# --- 1. whose brake air the lockout vents, decided once ----------------------------------------------------------


def _both_readers(order, subsystems) -> tuple[bool, bool]:
    """(the order's steps bring the brake air back, the order warns to bleed a moving telescope's brake air)."""
    step = BRAKE_AIR_BACK in order.step_list
    assert step == services.brake_air_back(subsystems, order.hazards, [])
    warned = any(SWING in gap for gap in selectors.isolation_gaps(order))
    return step, warned


def test_a_moving_telescopes_air_brakes_are_vented_and_both_readers_say_so(telescope, mains, users):
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    order = _from_due(drive, users=users)
    hazards = {telescope.pk: set(order.hazards)}
    (found,) = selectors.brake_air_vented(hazards, [drive], [])
    assert found.telescope_id == telescope.pk and found.brakes == (brake,) and found.worked_on == ()
    assert found.moving and not found.air_point
    # No air point: the warning says to bleed the brake supply, and the steps bring the air back once.
    assert _both_readers(order, [drive]) == (True, True)
    assert order.step_list.count(BRAKE_AIR_BACK) == 1

    # With the brake air's point registered the lockout vents it there: no warning, and the air still comes back.
    IsolationPoint.objects.create(telescope=telescope, energy="air", label="Brake air valve")
    points = selectors.isolation_points(order)
    (found,) = selectors.brake_air_vented(hazards, [drive], points)
    assert found.air_point and found.moving
    again = _from_due(drive, users=users)
    assert _both_readers(again, [drive]) == (True, False)


def test_work_where_nothing_moves_vents_no_brake_air_unless_an_air_point_is_locked(telescope, mains, users):
    """Mains work has no moving telescope among its hazards: neither reader speaks of brake air until the lockout
    locks the telescope's air point, and then only the step does (the point is there: nothing to warn of)."""
    subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    supply = subsystem_create(telescope, "ac_power", "Mains distribution", counting_from=START)
    order = _from_due(supply, users=users)
    assert "moving_machinery" not in order.hazards
    assert selectors.brake_air_vented({telescope.pk: set(order.hazards)}, [supply], []) == []
    assert _both_readers(order, [supply]) == (False, False)
    IsolationPoint.objects.create(telescope=telescope, energy="air", label="Brake air valve")
    (found,) = selectors.brake_air_vented({telescope.pk: set(order.hazards)}, [supply],
                                          selectors.isolation_points(order))
    assert found.air_point and not found.moving
    assert _both_readers(_from_due(supply, users=users), [supply]) == (True, False)


def test_work_on_an_air_brake_vents_its_air_point_or_not_and_a_retired_one_vents_nothing_else(
    telescope, mains, users
):
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    (found,) = selectors.brake_air_vented({telescope.pk: {"pneumatic"}}, [brake], [])
    assert found.worked_on == (brake,) and found.brakes == (brake,) and not found.moving
    # Retired, it is still the order's own brake (its work vents its air), but no brake in service is vented.
    brake.retired_on = START
    brake.save()
    (found,) = selectors.brake_air_vented({telescope.pk: {"moving_machinery"}}, [brake], [])
    assert found.brakes == () and found.worked_on == (brake,)
    assert services.brake_air_back([brake], ["pneumatic"], []) is True


def test_wherever_the_warning_says_to_bleed_the_brake_air_the_order_brings_it_back(telescope, mains, users):
    """The pairing the two readers keep, over the catalogue's kinds on a telescope with an air-released brake and no
    air point: every order warned to bleed the air restores it with everyone clear."""
    subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    for code in KINDS:
        if code in ("brake", "other") or not KINDS[code].plans:
            continue
        subsystem = subsystem_create(telescope, code, f"The {code}", counting_from=START)
        order = _from_due(subsystem, users=users)
        step, warned = _both_readers(order, [subsystem])
        assert step or not warned, code
        assert warned == ("moving_machinery" in order.hazards and "pneumatic" not in order.hazards), code


# --- 2. out of robotic and remote control once, at the start ----------------------------------------------------


def test_a_merged_order_over_plans_in_both_wordings_takes_the_observatory_out_of_control_once_first(
    telescope, mains, users
):
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    dome = subsystem_create(telescope, "enclosure", "Dome", counting_from=START)
    # Each plan on its own takes it out of control in its own words, and so did the merged order before.
    assert CLOSE in drive.plans.get().step_list and PARKED in dome.plans.get().step_list
    steps = _from_due(drive, dome, users=users).step_list
    assert _out_of_control(steps) == [OUT_OF_CONTROL] and steps[0] == OUT_OF_CONTROL
    assert steps[-1] == HAND_BACK and steps.count(HAND_BACK) == 1
    # What each wording did besides stays, where its plan had it: the enclosure closed before the drive's slew
    # test, the telescope parked once for both plans (the drive's parking and the dome's are one step).
    (close,) = [i for i, step in enumerate(steps) if step.endswith("] Close the enclosure.")]  # the drive plan's
    park = steps.index(PARK)
    slew = next(i for i, step in enumerate(steps) if "slew and track" in step)
    rain = next(i for i, step in enumerate(steps) if "rain sensor" in step)
    assert 0 < close < slew and park < rain and steps.count(PARK) == 1
    assert steps.index(services.LOCKOUT_STEP) > max(close, slew, park, rain)


def test_a_merged_order_over_two_telescopes_takes_the_observatory_out_of_control_once(site, telescope, mains, users):
    other = Telescope.objects.create(site=site, name="West", aperture_m=0.4, mount="fork")
    IsolationPoint.objects.create(telescope=other, energy="ac", label="West isolator")
    here = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    there = subsystem_create(other, "axis1_drive", "West axis 1 drive", counting_from=START)
    steps = _from_due(here, there, users=users).step_list
    assert _out_of_control(steps) == [OUT_OF_CONTROL] and steps[0] == OUT_OF_CONTROL
    # Each telescope's enclosure is still closed, under its own plan's label (which names its telescope).
    closed = [step for step in steps if step.endswith("] Close the enclosure.")]
    assert len(closed) == 2 and closed[0].startswith(f"[{telescope.name}: ") and closed[1].startswith("[West: ")
    assert steps[-1] == HAND_BACK and steps.count(HAND_BACK) == 1


def test_an_order_that_said_it_once_already_is_left_as_it_was(telescope, mains, users):
    """Two plans in the same words were merged into one step before: nothing to take apart, the step stays where it
    was (after the plans' reading of their records, before their tests), in its words."""
    first = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    second = subsystem_create(telescope, "axis2_drive", "Axis 2 drive", counting_from=START)
    steps = _from_due(first, second, users=users).step_list
    assert _out_of_control(steps) == [CLOSE] and OUT_OF_CONTROL not in steps
    slews = [i for i, step in enumerate(steps) if "slew and track" in step]
    assert len(slews) == 2 and steps.index(CLOSE) < min(slews)
    single = _from_due(first, users=users).step_list
    assert _out_of_control(single) == [CLOSE] and single[-1] == HAND_BACK


def test_the_sites_own_words_are_not_rewritten(telescope, mains, users):
    """A step an engineer wrote in the plan in words of their own is the site's: it stays, word for word, even where
    the catalogue's steps beside it are said once."""
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=START)
    dome = subsystem_create(telescope, "enclosure", "Dome", counting_from=START)
    own = "Take the scope off the night's robotic queue and ring the remote operators."
    plan = drive.plans.get()
    plan.steps_powered = plan.steps_powered.replace(CLOSE, own)
    plan.save()
    steps = _from_due(drive, dome, users=users).step_list
    assert [step for step in steps if own in step] == [f"[{plan.name}] {own}"]
    assert [step for step in steps if step.endswith(f"] {PARKED}")] and OUT_OF_CONTROL not in steps  # said once
    # With the catalogue's words twice beside the site's, those are said once, and the site's stay.
    second = subsystem_create(telescope, "axis2_drive", "Axis 2 drive", counting_from=START)
    steps = _from_due(drive, dome, second, users=users).step_list
    assert _out_of_control(steps) == [OUT_OF_CONTROL] and steps[0] == OUT_OF_CONTROL
    assert [step for step in steps if own in step] == [f"[{plan.name}] {own}"]


def test_every_wording_taken_apart_says_what_it_said_and_is_recognised():
    """Each of the catalogue's wordings that takes it out of control is known with what it did besides; the parts
    are steps about the whole telescope, written once for the plans that share them."""
    assert set(OUT_OF_CONTROL_AND) == TAKES_OUT_OF_CONTROL and OUT_OF_CONTROL_AND[OUT_OF_CONTROL] == ()
    for wording, rest in OUT_OF_CONTROL_AND.items():
        assert wording.startswith(OUT_OF_CONTROL[:-1])
        for step in rest:
            assert step in TELESCOPE_STEPS
            # The rest of the wording, word for word: nothing added ("at its service position" was, once).
            assert wording.lower().endswith(" and " + step[0].lower() + step[1:])


def test_parking_taken_apart_adds_no_position_the_plan_never_gave(telescope, mains, users):
    """The enclosure's "... and park the telescope" taken apart is "Park the telescope." where no other plan parks at
    the service position: the primary mirror's own step parks it at the horizon stop, "not at the service position",
    and the order must not say both (common practice, no published source)."""
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=START)
    dome = subsystem_create(telescope, "enclosure", "Dome", counting_from=START)
    steps = _from_due(primary, dome, users=users).step_list
    assert steps[0] == OUT_OF_CONTROL and PARK not in steps
    assert any(step.endswith("] Park the telescope.") for step in steps)
