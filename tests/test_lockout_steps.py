"""Where the lockout step stands in a work order's steps, and that it stays there.

The lockout step (``services.LOCKOUT_STEP``) comes after the steps done under power before isolation
(closing the dome, parking, opening covers, tests that need the drives live) and before anything that
touches drives, brakes, electrics or moving parts; the locks come off in the restoring steps, as the
site's lockout procedure says, after all the locked-out work of the order. An order whose hazards call
for isolation cannot lose it: saving the steps without it puts it back, and such an order cannot be
issued or started.

Energy isolation before servicing, and re-energising only under the written procedure, is OSHA 29 CFR
1910.147 (c)(4) and (e); which steps of a telescope need power is common practice, no published source.
"""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from test_workorders import drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.registry.catalogue import BEFORE_ISOLATION, HAND_BACK, KINDS, OUT_OF_CONTROL, RELEASE, RESTORE
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import services
from observatory_ops.workorders.models import State, WorkOrder

LOCKOUT = services.LOCKOUT_STEP
PLANS = [(kind, plan) for kind in KINDS.values() for plan in kind.plans]


def _id(value) -> str:
    return value.name if hasattr(value, "name") else value.code


# --- the catalogue ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_every_catalogue_plan_isolates_after_its_powered_steps_and_before_the_rest(kind, plan):
    hazards = [*kind.hazards, *plan.hazards]
    assert services.needs_isolation(hazards), "every catalogue plan so far has energy to isolate"
    release, *restore = plan.restore
    assert release == RELEASE
    steps = services.steps_in_groups(hazards, list(plan.before_isolation), list(plan.after_isolation), restore)
    assert steps == [*plan.before_isolation, LOCKOUT, *plan.after_isolation, *plan.restore]


def test_no_step_is_in_two_of_the_groups():
    after = {step for _, plan in PLANS for step in plan.after_isolation}
    assert not after & BEFORE_ISOLATION and not after & RESTORE and not BEFORE_ISOLATION & RESTORE


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_nothing_done_under_power_touches_what_isolation_protects(kind, plan):
    hands_on = re.compile(r"\b(inspect|clean|lubricate|replace|retighten|refit|remove|strip|feeler|terminations)\b",
                          re.IGNORECASE)
    for step in plan.before_isolation:
        assert not hands_on.search(step), step


@pytest.mark.parametrize("kind, plan", PLANS, ids=_id)
def test_the_locks_come_off_only_under_the_site_procedure(kind, plan):
    # Not a tag's "do not move", nor the drive cabinet it hangs on.
    moves = re.compile(r"(?<!do not )\b(move|slew|turn|rotate|drive(?! cabinet)|run)\b", re.IGNORECASE)
    for step in plan.after_isolation:  # moving anything while locked out: only under the procedure
        assert "remove the locks" not in step, step
        if moves.search(step):
            assert "remove the lock only as the site's lockout procedure says" in step, step
    release, *in_service = plan.restore
    assert release == RELEASE  # one wording, so an order over several plans removes the locks once
    hands_on = re.compile(r"\b(inspect|clean|lubricate|replace|retighten|refit|strip|feeler|terminations)\b",
                          re.IGNORECASE)
    for step in in_service:  # after the locks are off: restoring and testing, no hands-on work
        assert "remove the lock" not in step and not hands_on.search(step), step


def test_the_primary_mirror_clean_parks_and_opens_the_cover_before_isolation(telescope, users):
    # The reviewer's case: followed in made, the technician must not have to break the lockout to park.
    mirror = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=dt.date(2026, 1, 1))
    made = services.work_order_from_due([mirror.plans.get(name="Inspect and CO2-snow clean primary")],
                                         users["engineer"])
    steps = made.step_list
    lockout = steps.index(LOCKOUT)
    assert steps[lockout - 2].startswith("Park the telescope pointing at the horizon stop")
    assert steps[lockout - 1].startswith("Open the mirror cover; let the mirror reach ambient temperature")
    assert steps[lockout + 1] == "Measure reflectance at the marked positions before cleaning."


def test_several_plans_isolate_once_and_restore_after_all_their_locked_out_work(telescope, users):
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    brake = subsystem_create(telescope, "brake", "Axis 2 brake", counting_from=dt.date(2026, 1, 1))
    made = services.work_order_from_due([*fans.plans.all(), *brake.plans.all()], users["engineer"])
    steps = made.step_list
    assert steps.count(LOCKOUT) == 1
    lockout = steps.index(LOCKOUT)
    unprefixed = [re.sub(r"^\[[^\]]*\] ", "", step) for step in steps]
    assert all(step in BEFORE_ISOLATION for step in unprefixed[:lockout])
    # No plan's locks come off while another plan's locked-out work is still to do.
    release = next(i for i, step in enumerate(unprefixed) if step in RESTORE)
    assert not any(step in BEFORE_ISOLATION or step in RESTORE for step in unprefixed[lockout + 1 : release])
    assert all(step in RESTORE for step in unprefixed[release:])
    # Every plan's steps are all there, in the plan's own order; a step the plans share is written once.
    for plan in [*fans.plans.all(), *brake.plans.all()]:
        positions = [unprefixed.index(step) for step in plan.step_list]
        assert positions == sorted(positions), plan.name
    # A step about the whole telescope is written once, with no plan's label; one about a plan's own subsystem stays
    # one per subsystem, named (the fans' two plans read their records once, the brake its own).
    assert "Park the telescope at its service position." in steps  # shared: no plan's label
    read = "Read the last service record and open faults for this subsystem."
    assert {step for step in unprefixed if unprefixed.count(step) > 1} == {read}
    assert sorted(step for step in steps if step.endswith(read)) == [
        f"[Check brake pads, air pressure and holding] {read}", f"[Fans] {read}"
    ]
    assert steps.count(RELEASE) == 1  # the locks come off once, after all the locked-out work


def test_an_order_across_two_telescopes_parks_each_telescope(site, telescope, users):
    from observatory_ops.registry.models import Telescope

    other = Telescope.objects.create(site=site, name="West", aperture_m=0.4, mount="fork")
    plans = [
        plan
        for scope in (telescope, other)
        for kind in ("brake", "cooling_fans")
        for plan in subsystem_create(scope, kind, kind, counting_from=dt.date(2026, 1, 1)).plans.all()
    ]
    steps = services.work_order_from_due(plans, users["engineer"]).step_list
    park = "Park the telescope at its service position."
    assert [s for s in steps if s.endswith(park)] == [f"[{telescope.name}] {park}", f"[West] {park}"]
    assert steps.count(LOCKOUT) == 1


def test_ad_hoc_steps_go_where_their_group_says_whatever_their_words(telescope, users, site):
    """A step is placed by its group, never by its wording: catalogue words in the work stay in the work. A drive can
    move the telescope: the order takes the observatory out of robotic and remote control first and hands it back
    last, by itself."""
    mount_drive = subsystem_create(telescope, "axis1_drive", "Drive", counting_from=dt.date(2026, 1, 1))
    made = services.work_order_ad_hoc(
        site, [mount_drive], "Replace encoder cable", users["technician"],
        powered="Park the telescope at its service position.", steps="Replace the encoder cable.",
    )
    assert made.step_list == [
        OUT_OF_CONTROL, "Park the telescope at its service position.", LOCKOUT, "Replace the encoder cable.", RELEASE,
        HAND_BACK,
    ]


def test_ad_hoc_steps_in_their_groups_put_the_lockout_and_the_release_between_them(telescope, users, site, client):
    """The reviewer's case: the engineer's own wording of powered steps, which no list can recognise."""
    belt = subsystem_create(telescope, "axis1_drive", "Drive", counting_from=dt.date(2026, 1, 1))
    client.force_login(users["engineer"])
    response = client.post(f"/sites/{site.slug}/workorders/new/", {
        "title": "Replace the drive belt", "order_type": "corrective", "subsystems": [belt.pk],
        "powered": "Park the telescope at the zenith.\nClose the dome.",
        "steps": "Replace the belt.", "restore": "Refit the guard, power up and test.",
    })
    assert response.status_code == 302
    made = WorkOrder.objects.latest("pk")
    assert made.step_list == [
        OUT_OF_CONTROL, "Park the telescope at the zenith.", "Close the dome.", LOCKOUT, "Replace the belt.", RELEASE,
        "Refit the guard, power up and test.", HAND_BACK,
    ]


def test_steps_under_power_typed_by_hand_on_a_moving_telescope_still_take_it_out_of_control_and_hand_it_back(
    telescope, users, site, client
):
    """A review's ad hoc order on a brake, its steps under power typed ("Take the telescope out of robotic control",
    "Park the telescope at zenith"), had neither the order's own step out of robotic and remote control nor the
    hand-back at the end, and another crew's hand-back then waited on it. The typed step is refused, saying why (the
    order does it itself); typed without it, the order begins with its own and ends with the hand-back."""
    brake = subsystem_create(telescope, "brake", "Axis 2 brake", counting_from=dt.date(2026, 1, 1))
    client.force_login(users["engineer"])
    before = WorkOrder.objects.count()
    data = {"title": "Brake slips", "order_type": "corrective", "subsystems": [brake.pk],
            "powered": "Take the telescope out of robotic control\nPark the telescope at zenith",
            "steps": "Replace the brake pads."}
    response = client.post(f"/sites/{site.slug}/workorders/new/", data)
    assert response.status_code == 200 and WorkOrder.objects.count() == before
    assert ("Leave out &quot;Take the telescope out of robotic control&quot;: where the telescope can move, the order "
            "takes the observatory out of robotic and remote control as its first step by itself") in (
        response.content.decode())
    data["powered"] = "Park the telescope at zenith"
    assert client.post(f"/sites/{site.slug}/workorders/new/", data).status_code == 302
    steps = WorkOrder.objects.latest("pk").step_list
    assert steps[:3] == [OUT_OF_CONTROL, "Park the telescope at zenith", LOCKOUT] and steps[-1] == HAND_BACK
    assert steps.count(OUT_OF_CONTROL) == 1 and steps.count(HAND_BACK) == 1


def test_a_hand_back_typed_among_the_restore_steps_is_refused_as_the_order_adds_its_own(telescope, users, site, client):
    """An onboarding review typed "Return the observatory to robotic control." after the locks: the order then had it
    as a step of its own, tickable while another crew worked, before the held hand-back the order adds. Refused, saying
    why; a step that only names a remote control is kept."""
    belt = subsystem_create(telescope, "axis1_drive", "Drive", counting_from=dt.date(2026, 1, 1))
    client.force_login(users["engineer"])
    before = WorkOrder.objects.count()
    data = {"title": "Replace the drive belt", "order_type": "corrective", "subsystems": [belt.pk],
            "steps": "Replace the belt.", "restore": "Power up and test.\nReturn the observatory to robotic control."}
    response = client.post(f"/sites/{site.slug}/workorders/new/", data)
    assert response.status_code == 200 and WorkOrder.objects.count() == before
    assert ("Leave out &quot;Return the observatory to robotic control.&quot;: the order adds the return to robotic "
            "and remote control as its last step by itself") in response.content.decode()
    data["restore"] = "Power up and test.\nCheck the remote control handset's batteries."
    assert client.post(f"/sites/{site.slug}/workorders/new/", data).status_code == 302


def test_work_without_energy_to_isolate_gets_no_lockout_step(telescope, users, site):
    other = subsystem_create(
        telescope, "other", "Eyepiece box", counting_from=dt.date(2026, 1, 1), no_hazards_found=True
    )
    made = services.work_order_ad_hoc(site, [other], "Sort eyepieces", users["technician"], steps="Sort them.")
    assert made.step_list == ["Sort them."]


# --- the edit form ---------------------------------------------------------------------------------------


def _edit(client, work_order, steps: list[str]):
    return client.post(f"/workorders/{work_order.pk}/edit/", {
        "title": work_order.title, "order_type": work_order.order_type, "priority": work_order.priority,
        "planned_date": "", "assignee": "", "estimated_hours": "2", "steps": "\n".join(steps),
        "tools": work_order.tools,
    }, follow=True)


def test_saving_steps_without_the_lockout_step_is_refused_with_the_line_to_put_back(order, users, client):  # noqa: F811
    """The form cannot know which of the engineer's steps need power, so it does not guess where the lockout
    goes (a reviewer found a guessed place ahead of a live test): it refuses and names the line."""
    client.force_login(users["engineer"])
    edit_page = client.get(f"/workorders/{order.pk}/edit/").content.decode()
    assert "keep the lockout step" in edit_page
    before = order.step_list
    without = [step for step in before if step != LOCKOUT]
    page = _edit(client, order, without).content.decode()
    assert "The lockout step is missing" in page and html.escape(LOCKOUT) in page
    assert WorkOrder.objects.get(pk=order.pk).step_list == before

    # Kept, even moved: saved as the engineer wrote it.
    moved = [*without[:1], LOCKOUT, *without[1:]]
    _edit(client, order, moved)
    assert WorkOrder.objects.get(pk=order.pk).step_list == moved


def test_an_order_that_lost_its_lockout_step_cannot_be_issued_or_started(order, users):  # noqa: F811
    # Steps changed outside the edit form (the admin, a script): the lifecycle refuses.
    kept = order.steps
    order.steps = "\n".join(step for step in order.step_list if step != LOCKOUT)
    order.save()
    with pytest.raises(services.Refused, match="call for energy isolation, but none of its steps is the lockout"):
        services.work_order_move(order, "issue", users["engineer"])
    assert WorkOrder.objects.get(pk=order.pk).state == State.DRAFT

    order.steps = kept
    order.save()
    services.work_order_move(order, "issue", users["engineer"])
    order.refresh_from_db()
    order.steps = "\n".join(step for step in order.step_list if step != LOCKOUT)
    order.save()
    with pytest.raises(services.Refused, match="none of its steps is the lockout step"):
        services.work_order_move(order, "start", users["technician"])
    assert WorkOrder.objects.get(pk=order.pk).state == State.ISSUED


def test_the_page_says_why_an_order_without_its_lockout_step_is_not_issued(order, users, client):  # noqa: F811
    order.steps = "\n".join(step for step in order.step_list if step != LOCKOUT)
    order.save()
    client.force_login(users["engineer"])
    page = client.post(f"/workorders/{order.pk}/move/issue/", follow=True).content.decode()
    assert "Not done: WO-" in page and "none of its steps is the lockout step" in page
    assert WorkOrder.objects.get(pk=order.pk).state == State.DRAFT


# --- the lockout in sequence ------------------------------------------------------------------------------------
#
# OSHA 29 CFR 1910.147(d): the energy is isolated (d)(4) and stored energy made safe (d)(5) before the work, and the
# locks come off (e) only after it. So the lockout step stands before every step of a plan's locked-out work and the
# step that removes the locks after all of them; an order whose steps say otherwise is neither saved nor issued nor
# started (a reviewer moved the lockout to the last line, and the checklist then let hands-on work be ticked with
# nothing isolated).


def _groups(work_order):
    """(under power, the locked-out work, the restoring) of a one-plan order, around its lockout and release."""
    steps = work_order.step_list
    lockout, release = steps.index(LOCKOUT), steps.index(RELEASE)
    return steps[:lockout], steps[lockout + 1:release], steps[release + 1:]


def test_the_lockout_moved_after_the_release_is_refused_on_save_and_on_issue(order, users, client):  # noqa: F811
    powered, work, restore = _groups(order)
    last = [*powered, *work, RELEASE, *restore, LOCKOUT]
    client.force_login(users["engineer"])
    before = order.step_list
    page = html.unescape(_edit(client, order, last).content.decode())
    assert (f"Step {len(powered) + len(work) + 1} removes the locks, but the energy is isolated only at step "
            f"{len(last)} (the lockout step)") in page
    assert WorkOrder.objects.get(pk=order.pk).step_list == before

    order.steps = "\n".join(last)  # stored so outside the form (the admin, a script, before this check)
    order.save()
    shown = html.unescape(client.get(order.get_absolute_url()).content.decode())
    assert "Do not start the work until the site engineer has put that right." in shown
    with pytest.raises(services.Refused, match=r"cannot be issued: step \d+ removes the locks"):
        services.work_order_move(order, "issue", users["engineer"])
    assert WorkOrder.objects.get(pk=order.pk).state == State.DRAFT


def test_a_plans_locked_out_work_moved_before_the_lockout_is_refused_by_name(order, users, client):  # noqa: F811
    powered, work, restore = _groups(order)
    early = [*powered, work[0], LOCKOUT, *work[1:], RELEASE, *restore]
    client.force_login(users["engineer"])
    page = html.unescape(_edit(client, order, early).content.decode())
    assert f'Step {len(powered) + 1} ("{work[0][:79]}…") is work its plan does with the energy isolated, but it ' \
           f"stands before the lockout (step {len(powered) + 2})" in page
    after = [*powered, LOCKOUT, *work[1:], RELEASE, work[0], *restore]
    page = html.unescape(_edit(client, order, after).content.decode())
    assert f"stands after the locks come off (step {after.index(RELEASE) + 1})" in page

    # A step in the engineer's own words is the engineer's to place; an issued order checks again when started.
    own = [*powered, "Look the drive over for anything loose.", LOCKOUT, *work, RELEASE, *restore]
    _edit(client, order, own)
    assert WorkOrder.objects.get(pk=order.pk).step_list == own
    services.work_order_move(order, "issue", users["engineer"])
    order.refresh_from_db()
    order.steps = "\n".join(early)
    order.save()
    with pytest.raises(services.Refused, match="cannot be started: step"):
        services.work_order_move(order, "start", users["technician"])


def test_the_release_deleted_before_steps_that_bring_energy_back_is_refused_on_save_and_on_issue(
    order, users, client  # noqa: F811
):
    """A safety review deleted the step that removes the locks: the restoring steps after it then counted as locked-out
    work and were ticked while another crew was locked out, and the order finished with nothing asked about locks."""
    powered, work, restore = _groups(order)
    assert restore  # the drive's order brings power back and hands the telescope back after its release
    no_release = [*powered, LOCKOUT, *work, *restore]
    client.force_login(users["engineer"])
    before = order.step_list
    page = html.unescape(_edit(client, order, no_release).content.decode())
    first = len(powered) + len(work) + 2
    assert (f"Step {first} (\"{restore[0][:79]}") in page and "brings energy or service back after the lockout, but " \
        "no step before it removes the locks" in page
    assert WorkOrder.objects.get(pk=order.pk).step_list == before
    order.steps = "\n".join(no_release)  # stored outside the form
    order.save()
    with pytest.raises(services.Refused, match=rf"cannot be issued: step {first} \("):
        services.work_order_move(order, "issue", users["engineer"])
    # Nor with the release moved after a step that brings energy back (a diff review: it then counted as locked-out
    # work, free to tick while another crew was locked out).
    moved = [*powered, LOCKOUT, *work, restore[0], RELEASE, *restore[1:]]
    assert services.lockout_sequence_problem(order.hazards, moved, []).startswith(
        f"Step {len(powered) + len(work) + 2} (")
    # Work that ends locked out in words of its own, with nothing restored after it, stays the engineer's to write.
    assert services.lockout_sequence_problem(order.hazards, [*powered, LOCKOUT, *work], []) == ""


def test_a_lockout_with_nothing_done_under_it_is_refused(order, users, client):  # noqa: F811
    powered, work, restore = _groups(order)
    client.force_login(users["engineer"])
    empty = [*powered, LOCKOUT, RELEASE, *restore]  # the plan's work taken out
    page = html.unescape(_edit(client, order, empty).content.decode())
    assert (f"No step comes between the lockout (step {len(powered) + 1}) and the step that removes the locks (step "
            f"{len(powered) + 2}): the work done with the energy isolated goes there.") in page
    at_the_end = [*powered, *restore, LOCKOUT]
    page = html.unescape(_edit(client, order, at_the_end).content.decode())
    assert f"No step comes between the lockout (step {len(at_the_end)}) and the end of the steps" in page


def test_a_mirror_clean_merged_with_drive_work_closes_the_enclosure_once_and_keeps_its_own_parking(
    telescope, users
):
    """The shared preparation (records, out of robotic control and the enclosure closed) is written once; the two
    parking positions stay two steps, the horizon stop saying which work it is for."""
    mirror = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=dt.date(2026, 1, 1))
    axis = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=dt.date(2026, 1, 1))
    made = services.work_order_from_due(
        [mirror.plans.get(name="Inspect and CO2-snow clean primary"), *axis.plans.all()], users["engineer"]
    )
    before = made.step_list[: made.step_list.index(LOCKOUT)]
    assert sum("close the enclosure" in step.lower() for step in before) == 1
    assert any("horizon stop" in step for step in before)


def test_an_ad_hoc_repair_may_also_do_a_plans_work_which_then_counts_again_and_one_failure_is_counted(
    telescope, users, site, client
):
    """A review's corrective order fitted new brake pads and left "Check brake pads" due: an ad hoc order could not say
    it did a plan's work. A plan chosen with its subsystem becomes an item of the order; finishing restarts it, and the
    reliability page still counts one failure for the brake (reliability.selectors.failures_of_site). A plan of a
    subsystem not chosen is refused, naming it, and nothing is stored."""
    from observatory_ops.planning.models import ServicePlan
    from observatory_ops.reliability.selectors import failures_of_site

    brake = subsystem_create(telescope, "brake", "Axis 2 brake", counting_from=dt.date(2026, 1, 1))
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    pads = ServicePlan.objects.filter(subsystem=brake).first()
    other = ServicePlan.objects.filter(subsystem=fans).first()
    client.force_login(users["engineer"])
    data = {"title": "Brake slips", "order_type": "corrective", "subsystems": [brake.pk], "plans": [other.pk],
            "steps": "Replace the brake pads."}
    before = WorkOrder.objects.count()
    response = client.post(f"/sites/{site.slug}/workorders/new/", data)
    assert response.status_code == 200 and WorkOrder.objects.count() == before
    assert "its subsystem is not among those chosen above" in response.content.decode()
    data["plans"] = [pads.pk]
    assert client.post(f"/sites/{site.slug}/workorders/new/", data).status_code == 302
    made = WorkOrder.objects.latest("pk")
    assert [(i.subsystem_id, i.plan_id) for i in made.items.all()] == [(brake.pk, pads.pk)]
    made.planned_date = dt.date(2026, 6, 16)
    made.save()
    from observatory_ops.workorders.models import IsolationPoint

    for energy, label in (("ac", "Mount isolator"), ("air", "Brake air valve")):
        IsolationPoint.objects.get_or_create(telescope=telescope, energy=energy, defaults={"label": label})
    services.work_order_move(made, "issue", users["engineer"])
    services.work_order_move(made, "start", users["technician"])
    from test_workorders import _all_readings, _confirmed

    made.refresh_from_db()
    assert made.required_readings.exists()  # the plan's readings, as a due-list order for it asks them
    services.work_order_finish(made, users["technician"], 1.0, "pads worn through", _all_readings(made, 0.7),
                               **_confirmed(made))
    assert made.service_records.get().plan == pads
    assert len(failures_of_site(site)[brake.pk]) == 1


def test_the_catalogues_out_of_control_step_typed_after_a_slew_is_moved_first_and_remote_things_are_not_refused(
    telescope, users, site, client
):
    """A diff review: the catalogue's wording typed after "Slew the telescope to the zenith." was kept second, so the
    slew came while the remote scheduler was in control; and steps that only name something remote were refused."""
    brake = subsystem_create(telescope, "brake", "Axis 2 brake", counting_from=dt.date(2026, 1, 1))
    made = services.work_order_ad_hoc(
        site, [brake], "Brake slips", users["engineer"], steps="Replace the pads.",
        powered=f"Slew the telescope to the zenith.\n{OUT_OF_CONTROL}",
    )
    assert made.step_list[:2] == [OUT_OF_CONTROL, "Slew the telescope to the zenith."]
    assert made.step_list.count(OUT_OF_CONTROL) == 1 and made.step_list[-1] == HAND_BACK
    client.force_login(users["engineer"])
    for typed in ("Lock the remote-controlled shutter closed.", "Switch off the remote I/O box's 24 V supply.",
                  "Move the ladder out of the way of the remote weather mast."):
        response = client.post(f"/sites/{site.slug}/workorders/new/", {
            "title": "Brake slips", "order_type": "corrective", "subsystems": [brake.pk], "powered": typed,
            "steps": "Replace the pads."})
        assert response.status_code == 302, typed


def test_an_ad_hoc_order_naming_a_plan_takes_its_hazards_and_readings_as_a_due_list_order_does(
    telescope, users, site
):
    """A diff review: an ad hoc order on a primary mirror naming its cleaning plan lacked the plan's hazards (work at
    height, cryogens), so issuing it was refused as lacking hazards its subsystems "now" carry, and it asked for no
    reflectance reading, so finishing would restart the plan with none taken."""
    from observatory_ops.planning.models import ServicePlan

    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=dt.date(2026, 1, 1))
    plan = next(p for p in ServicePlan.objects.filter(subsystem=primary) if p.hazards and p.readings)
    from_due = services.work_order_from_due([plan], users["engineer"])
    ad_hoc = services.work_order_ad_hoc(site, [primary], "Mirror dirty", users["engineer"], plans=[plan],
                                        steps="Clean the mirror.")
    assert set(from_due.hazards) <= set(ad_hoc.hazards) and services.hazards_missing(ad_hoc) == []
    wanted = {(r.subsystem_id, r.quantity) for r in from_due.required_readings.all()}
    assert wanted and wanted == {(r.subsystem_id, r.quantity) for r in ad_hoc.required_readings.all()}
