"""An order made before a hazard was added to its subsystems: the page and the paper say what it lacks, and an
engineer brings it up to date before the work starts.

A work order copies its hazards when it is made (``services.work_order_from_due``, ``work_order_ad_hoc``), so a
hazard added later to a subsystem (in the admin, or by an upgrade that adds catalogue hazards) leaves the orders
made before without its cautions, protective equipment and, for energy, its isolation and lockout step. Energy
isolation before servicing is OSHA 29 CFR 1910.147 (c)(4); where the lockout step goes among an order's steps is
the step groups' to say (tests/test_lockout_steps.py), never a step's wording.
"""
from __future__ import annotations

import datetime as dt
import html
import io
import re

import pytest
from conftest import mains_isolator
from pypdf import PdfReader
from test_workorders import (  # noqa: F401  (fixtures, used by name)
    ISOLATED,
    PLANNED,
    _confirmed,
    _finish_confirmations,
    drive,
    order,
)

from observatory_ops.mirrors.models import Mirror
from observatory_ops.planning.models import ServicePlan
from observatory_ops.registry.catalogue import RELEASE
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import (
    CAUTIONS,
    HAZARDS_MISSING_BEFORE_START,
    HAZARDS_MISSING_ON_PAPER,
    HAZARDS_MISSING_STARTED,
    HAZARDS_MISSING_TITLE,
    LOCKOUT_STEP_MISSING,
)
from observatory_ops.workorders.models import State, WorkOrder

LOCKOUT = services.LOCKOUT_STEP
BUTTON = "Bring the hazards up to date"


def _add_hazard(subsystem, *codes: str) -> None:
    """As the admin or an upgrade does it: the subsystem carries more hazards; its orders are not touched."""
    subsystem.hazards = [*subsystem.hazards, *codes]
    subsystem.save()


def _fresh(work_order) -> WorkOrder:
    return WorkOrder.objects.get(pk=work_order.pk)


def _text(response) -> str:
    """A page's text with tags dropped and white space collapsed, as a reader sees it."""
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def _pdf_text(client, work_order) -> str:
    response = client.get(f"/workorders/{work_order.pk}/pdf/")
    assert response.status_code == 200
    pages = PdfReader(io.BytesIO(response.content)).pages
    return " ".join(" ".join(page.extract_text() for page in pages).split())


@pytest.fixture
def eyepieces(telescope):
    """A subsystem whose work has no energy to isolate, and a plan in its three step groups; its telescope has a
    mains isolation point, for when the tests give the work an electrical hazard."""
    mains_isolator(telescope)
    box = subsystem_create(
        telescope, "other", "Eyepiece cabinet", counting_from=dt.date(2026, 1, 1), no_hazards_found=True
    )
    ServicePlan.objects.create(
        subsystem=box, name="Clean the eyepieces", steps_powered="Switch on the cabinet light.",
        steps="Clean each eyepiece with lens tissue.", steps_restore="Put the eyepieces back in their slots.",
        hazards=["chemical"], counting_from=dt.date(2026, 1, 1),
    )
    return box


# --- what is missing -------------------------------------------------------------------------------------


def test_a_hazard_added_to_a_subsystem_after_the_order_was_made_is_found(order, drive):  # noqa: F811
    assert selectors.hazards_missing(order) == []
    _add_hazard(drive, "height")
    assert selectors.hazards_missing(order) == ["height"]
    assert "height" not in _fresh(order).hazards  # the order itself is not changed by reading it


def test_a_hazard_added_to_a_plan_the_order_covers_is_found_too(order, drive):  # noqa: F811
    # An order copies its plans' hazards with its subsystems' (services.work_order_from_due).
    plan = drive.plans.first()
    plan.hazards = [*plan.hazards, "laser"]
    plan.save()
    assert selectors.hazards_missing(order) == ["laser"]


def test_hazards_the_order_has_beyond_its_subsystems_are_not_missing_nor_reported(telescope, site, users):
    # An ad hoc order keeps the further hazards the engineer ticked; only what the subsystems add counts.
    box = subsystem_create(
        telescope, "other", "Eyepiece cabinet", counting_from=dt.date(2026, 1, 1), no_hazards_found=True
    )
    made = services.work_order_ad_hoc(site, [box], "Sort eyepieces", users["engineer"], steps="Sort them.",
                                      hazards=["laser"])
    assert selectors.hazards_missing(made) == []
    _add_hazard(box, "optical_surface")
    assert selectors.hazards_missing(made) == ["optical_surface"]


def _move_to(work_order, state: str, users) -> None:
    if state == State.WITHDRAWN:
        services.work_order_move(work_order, "withdraw", users["engineer"], reason="no longer needed")
        return
    services.work_order_move(work_order, "issue", users["engineer"])
    services.work_order_move(work_order, "start", users["technician"])
    services.work_order_finish(
        work_order, users["technician"], 1.0, "Isolation ticked on the paper.",
        {r.pk: 0.5 for r in work_order.required_readings.all()}, **_confirmed(work_order),
    )
    if state == State.COUNTERSIGNED:
        services.work_order_move(work_order, "countersign", users["engineer"])


@pytest.mark.parametrize("state", [State.FINISHED, State.COUNTERSIGNED, State.WITHDRAWN])
def test_finished_and_withdrawn_orders_show_nothing(order, drive, users, client, state):  # noqa: F811
    _move_to(order, state, users)
    _add_hazard(drive, "height")
    assert _fresh(order).state == state and selectors.hazards_missing(_fresh(order)) == []
    client.force_login(users["engineer"])
    page = _text(client.get(order.get_absolute_url()))
    assert HAZARDS_MISSING_TITLE not in page and BUTTON not in page
    assert HAZARDS_MISSING_TITLE not in _pdf_text(client, order)


def test_the_recoat_orders_at_the_telescope_are_compared_with_their_mirror_and_the_coating_is_left_out(
    telescope, users
):
    """mirrors.services gives each recoat phase its own hazards besides the mirror's. The coating, away at the
    plant (``at_telescope`` False), carries its own only: a telescope that can move is not part of it, so
    nothing the mirror gains is missing from it. The orders at the telescope lack what the mirror gains since;
    the recoat service plans the realignment covers (to restart them) add nothing of theirs."""
    from observatory_ops.calc.windows import RECOAT_PHASES
    from observatory_ops.mirrors import services as mirror_services

    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=dt.date(2026, 1, 1))
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    plan = mirror_services.recoat_plan_create(mirror, dt.date(2026, 8, 3), list(RECOAT_PHASES), 3.0, users["engineer"])
    orders = {o.title.split(": ", 1)[1]: o for o in plan.work_orders.all()}
    assert not orders["strip and coat"].at_telescope
    assert all(selectors.hazards_missing(o) == [] for o in orders.values())  # the recoat plans' chemicals included
    _add_hazard(primary, "cryogen")
    assert selectors.hazards_missing(orders["strip and coat"]) == []
    for phase in ("removal", "reinstall", "realignment and measurement"):
        assert selectors.hazards_missing(orders[phase]) == ["cryogen"], phase


# --- the page and the paper ------------------------------------------------------------------------------


def test_the_page_names_the_missing_hazards_and_tells_the_engineer_what_to_do(order, drive, users, client):  # noqa: F811
    _add_hazard(drive, "height", "laser")
    client.force_login(users["engineer"])
    page = _text(client.get(order.get_absolute_url()))
    assert HAZARDS_MISSING_TITLE in page
    assert ("Its subsystems or their service plans now carry hazards it was made without: Work at height, Alignment "
            "lasers. It does not carry their safety cautions (the controls and the protective equipment)." in page)
    assert HAZARDS_MISSING_BEFORE_START.format(moves="issued or started") in page
    assert BUTTON in page
    # Above everything of the work, so it is read first.
    assert page.index(HAZARDS_MISSING_TITLE) < page.index("Why this work is due") < page.index("Safety first")
    assert CAUTIONS["height"].text not in page  # the order's cautions are still its own, until it is updated


def test_a_technician_sees_the_notice_without_the_button(order, drive, users, client):  # noqa: F811
    _add_hazard(drive, "height")
    client.force_login(users["technician"])
    page = _text(client.get(order.get_absolute_url()))
    assert HAZARDS_MISSING_TITLE in page and "until then it cannot be issued or started." in page
    assert BUTTON not in page


def test_the_moves_an_order_behind_its_hazards_cannot_make_are_not_offered(order, drive, users, client):  # noqa: F811
    client.force_login(users["engineer"])
    assert "Issue to the technicians" in _text(client.get(order.get_absolute_url()))
    _add_hazard(drive, "height")
    page = _text(client.get(order.get_absolute_url()))
    assert "Issue to the technicians" not in page and "Withdraw" in page


def test_an_issued_order_with_its_lockout_step_is_told_only_what_it_lacks(order, drive, users, client):  # noqa: F811
    """The drive's order already isolates (its lockout step and points): a hazard of stored air added since lacks
    its cautions, not a lockout step; an issued order can no longer be issued, only started."""
    services.work_order_move(order, "issue", users["engineer"])
    assert services.LOCKOUT_STEP in _fresh(order).step_list
    _add_hazard(drive, "pneumatic")
    client.force_login(users["technician"])
    page = _text(client.get(order.get_absolute_url()))
    assert "It does not carry their safety cautions (the controls and the protective equipment)." in page
    assert "lockout step their energy calls for" not in page
    assert "until then it cannot be started." in page and "cannot be issued" not in page


def test_a_started_order_has_no_button_and_tells_the_technician_to_stop(order, drive, users, client):  # noqa: F811
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    _add_hazard(drive, "height")
    client.force_login(users["engineer"])
    response = client.get(order.get_absolute_url())
    page = _text(response)
    assert HAZARDS_MISSING_TITLE in page and HAZARDS_MISSING_STARTED in page
    assert BUTTON not in page and f"/workorders/{order.pk}/hazards/" not in response.content.decode()
    with pytest.raises(services.Refused, match="underway: only an order not yet started"):
        services.work_order_hazards_update(order, users["engineer"])
    assert "height" not in _fresh(order).hazards


@pytest.mark.parametrize("action", ["issue", "start"])
def test_an_order_that_lacks_hazards_can_be_neither_issued_nor_started_until_brought_up_to_date(
    order, drive, users, action  # noqa: F811
):
    """The paper would lack the added hazards' cautions and isolation (OSHA 29 CFR 1910.147 (c)(4)): refused,
    nothing changed, until an engineer brings the order up to date."""
    if action == "start":
        services.work_order_move(order, "issue", users["engineer"])
    _add_hazard(drive, "height")
    before = _fresh(order).state
    who = users["engineer"] if action == "issue" else users["technician"]
    with pytest.raises(services.Refused, match=r"lacks hazards its subsystems now carry \(work at height\)"):
        services.work_order_move(_fresh(order), action, who)
    assert _fresh(order).state == before
    services.work_order_hazards_update(_fresh(order), users["engineer"])
    services.work_order_move(_fresh(order), action, who)
    assert _fresh(order).state == (State.ISSUED if action == "issue" else State.UNDERWAY)


def test_an_order_up_to_date_shows_no_notice(order, users, client):  # noqa: F811
    client.force_login(users["engineer"])
    page = _text(client.get(order.get_absolute_url()))
    assert HAZARDS_MISSING_TITLE not in page and BUTTON not in page
    assert HAZARDS_MISSING_TITLE not in _pdf_text(client, order)


def test_the_pdf_carries_the_notice_before_the_cautions(order, drive, users, client):  # noqa: F811
    _add_hazard(drive, "height")
    client.force_login(users["viewer"])
    text = _pdf_text(client, order)
    assert HAZARDS_MISSING_TITLE in text and "it was made without: Work at height." in text
    assert HAZARDS_MISSING_ON_PAPER in text
    assert text.index(HAZARDS_MISSING_TITLE) < text.index("CAUTIONS") < text.index("Steps")


# --- bringing an order up to date -----------------------------------------------------------------------


def test_the_update_adds_the_hazards_keeps_the_old_ones_and_leaves_other_orders_alone(order, drive, users):  # noqa: F811
    other = services.work_order_from_due(list(drive.plans.all()), users["engineer"])
    before = list(order.hazards)
    _add_hazard(drive, "height")
    update = services.work_order_hazards_update(order, users["engineer"])
    assert update.added == ["height"]
    assert set(_fresh(order).hazards) == {*before, "height"}
    assert CAUTIONS["height"] in selectors.cautions(_fresh(order))
    assert selectors.hazards_missing(_fresh(order)) == []
    assert "height" not in _fresh(other).hazards and selectors.hazards_missing(other) == ["height"]


def test_the_update_never_removes_a_hazard(order, drive, users):  # noqa: F811
    # A hazard taken off the subsystem since stays on the order: only a person deciding it does not apply
    # may remove a caution, and the update does not decide that.
    drive.hazards = [h for h in drive.hazards if h != "moving_machinery"] + ["height"]
    drive.save()
    update = services.work_order_hazards_update(order, users["engineer"])
    assert update.added == ["height"]
    assert {"moving_machinery", "electrical", "height"} <= set(_fresh(order).hazards)


def test_the_audit_trail_says_who_brought_the_order_up_to_date(order, drive, users):  # noqa: F811
    _add_hazard(drive, "height")
    services.work_order_hazards_update(order, users["engineer"])
    record = _fresh(order).history.first()
    assert record.history_user == users["engineer"]
    assert record.history_change_reason == "hazards brought up to date" and "height" in record.hazards


def test_the_button_updates_the_order_and_says_what_was_added(order, drive, users, client):  # noqa: F811
    _add_hazard(drive, "height")
    client.force_login(users["engineer"])
    # A visit to the button's address does nothing and goes to the order's page, saying so (posted_only).
    visit = client.get(f"/workorders/{order.pk}/hazards/", follow=True)
    assert visit.redirect_chain == [(order.get_absolute_url(), 302)]
    assert "That address belongs to a button" in _text(visit) and "height" not in _fresh(order).hazards
    assert client.put(f"/workorders/{order.pk}/hazards/").status_code == 405
    page = _text(client.post(f"/workorders/{order.pk}/hazards/", follow=True))
    assert f"{order.number}: added Work at height, with its caution." in page
    assert HAZARDS_MISSING_TITLE not in page and CAUTIONS["height"].text in page
    # Pressed again from the old page: nothing to add, and said so.
    page = _text(client.post(f"/workorders/{order.pk}/hazards/", follow=True))
    assert "Not updated: WO-" in page and "already carries every hazard of its subsystems" in page


def test_a_technician_cannot_update_an_order(order, drive, users, client):  # noqa: F811
    _add_hazard(drive, "height")
    with pytest.raises(services.Refused, match="needs the engineer role"):
        services.work_order_hazards_update(order, users["technician"])
    client.force_login(users["technician"])
    assert client.post(f"/workorders/{order.pk}/hazards/").status_code == 403
    assert "height" not in _fresh(order).hazards


def test_an_issued_order_can_be_updated_and_stays_issued(order, drive, users):  # noqa: F811
    services.work_order_move(order, "issue", users["engineer"])
    _add_hazard(drive, "height")
    services.work_order_hazards_update(order, users["engineer"])
    assert _fresh(order).state == State.ISSUED and "height" in _fresh(order).hazards


# --- the lockout step -------------------------------------------------------------------------------------


def test_a_newly_needed_lockout_goes_between_the_step_groups_of_an_order_as_its_plans_made_it(eyepieces, users, client):
    made = services.work_order_from_due(list(eyepieces.plans.all()), users["engineer"], PLANNED)
    assert made.step_list == [
        "Switch on the cabinet light.", "Clean each eyepiece with lens tissue.",
        "Put the eyepieces back in their slots.",
    ]
    _add_hazard(eyepieces, "electrical")
    client.force_login(users["engineer"])
    page = _text(client.get(made.get_absolute_url()))
    assert "nor the lockout step their energy calls for" in page
    page = _text(client.post(f"/workorders/{made.pk}/hazards/", follow=True))
    assert "The lockout step and the step that removes the locks were put into the steps from its plans." in page
    assert _fresh(made).step_list == [
        "Switch on the cabinet light.", LOCKOUT, "Clean each eyepiece with lens tissue.", RELEASE,
        "Put the eyepieces back in their slots.",
    ]
    services.work_order_move(_fresh(made), "issue", users["engineer"])  # nothing stands in the way
    assert _fresh(made).state == State.ISSUED


def test_steps_edited_since_are_not_given_a_lockout_by_guess_and_the_order_waits_for_the_engineer(
    eyepieces, users, client
):
    made = services.work_order_from_due(list(eyepieces.plans.all()), users["engineer"], PLANNED)
    made.steps += "\nCheck the cabinet heater works."  # the engineer's own step: under power or not?
    made.save()
    edited = made.step_list
    _add_hazard(eyepieces, "electrical")
    client.force_login(users["engineer"])
    page = _text(client.post(f"/workorders/{made.pk}/hazards/", follow=True))
    assert "added Hazardous electrical energy" in page
    assert "the lockout step was not placed by guess. Edit the steps and put it in" in page and LOCKOUT in page
    assert _fresh(made).step_list == edited and "electrical" in _fresh(made).hazards
    assert LOCKOUT_STEP_MISSING in page  # beside the steps, until it is put in
    assert f"Warning: {LOCKOUT_STEP_MISSING}" in _pdf_text(client, made)
    with pytest.raises(services.Refused, match="none of its steps is the lockout step"):
        services.work_order_move(_fresh(made), "issue", users["engineer"])

    steps = [edited[0], LOCKOUT, *edited[1:3], RELEASE, *edited[3:]]
    client.post(f"/workorders/{made.pk}/edit/", {
        "title": made.title, "order_type": made.order_type, "priority": made.priority,
        "planned_date": PLANNED.isoformat(),
        "assignee": "", "estimated_hours": "1", "steps": "\n".join(steps), "tools": "",
    })
    assert _fresh(made).step_list == steps
    assert LOCKOUT_STEP_MISSING not in _text(client.get(made.get_absolute_url()))
    services.work_order_move(_fresh(made), "issue", users["engineer"])


def test_an_ad_hoc_order_keeps_its_steps_and_must_have_the_lockout_put_in(telescope, site, users):
    # Its step groups were not kept, so nothing can say where the lockout goes.
    box = subsystem_create(
        telescope, "other", "Eyepiece cabinet", counting_from=dt.date(2026, 1, 1), no_hazards_found=True
    )
    made = services.work_order_ad_hoc(site, [box], "Fix the cabinet light", users["engineer"],
                                      steps="Replace the lamp.")
    _add_hazard(box, "electrical")
    update = services.work_order_hazards_update(made, users["engineer"])
    assert update.lockout_missing and not update.steps_rebuilt
    assert _fresh(made).step_list == ["Replace the lamp."]
    assert selectors.lockout_step_warning(_fresh(made)) == LOCKOUT_STEP_MISSING


def test_a_suspended_load_added_to_a_mirror_brings_its_lifting_figures(telescope, users):
    primary = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=dt.date(2026, 1, 1))
    Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120, material="borosilicate",
                          cell_mass_kg=30)
    plan = next(p for p in primary.plans.all() if "suspended_load" not in p.hazards)  # not the recoat plan
    made = services.work_order_from_due([plan], users["engineer"])
    assert made.lift_inputs is None
    _add_hazard(primary, "suspended_load")
    update = services.work_order_hazards_update(made, users["engineer"])
    assert update.lift_added and _fresh(made).lift_inputs == primary.mirror.lift_inputs


def test_the_admin_shows_an_orders_hazards_and_steps_but_does_not_edit_them(order, admin_client):  # noqa: F811
    """Edited only on the order's pages, which never drop a hazard nor lose the lockout step."""
    page = admin_client.get(f"/admin/workorders/workorder/{order.pk}/change/").content.decode()
    assert 'name="hazards"' not in page and 'name="steps"' not in page
    assert html.escape(LOCKOUT) in page or LOCKOUT in page


# --- an order started before its subsystems gained a hazard ---------------------------------------------------


def _started_then_hazard(order, drive, users):  # noqa: F811
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    _add_hazard(drive, "height")


def _finish_data(work_order, **extra) -> dict:
    from observatory_ops.planning.services import site_today

    data = {"actual_hours": "1.5", "findings": "", "work_done_on": site_today(work_order.site).isoformat(),
            **_finish_confirmations(work_order)}
    data.update({f"reading_{r.pk}": "0.5" for r in work_order.required_readings.all()})
    return {**data, **extra}


def test_finishing_an_order_that_lacks_a_hazard_needs_a_confirmation_and_findings_that_say_how(
    order, drive, users  # noqa: F811
):
    """The work may be done when the hazard appears; finishing it then records that the person confirmed the
    hazard was controlled (fall protection: OSHA 29 CFR 1910.28), never silently."""
    _started_then_hazard(order, drive, users)
    readings = {r.pk: 0.5 for r in order.required_readings.all()}
    unticked = [line.text for line in selectors.unticked_lines(order)]
    with pytest.raises(services.Refused, match="lacks hazards .*work at height.*confirm"):
        services.work_order_finish(order, users["technician"], 1.5, "done", readings, confirmed_unticked=unticked)
    with pytest.raises(services.Refused, match="say in the findings how the hazards"):
        services.work_order_finish(
            order, users["technician"], 1.5, "  ", readings, confirmed_unticked=unticked, confirmed_hazards=["height"]
        )
    fresh = _fresh(order)
    assert fresh.state == State.UNDERWAY and fresh.hazards_confirmed_at_finish == [] and fresh.finished_at is None
    assert not fresh.items.first().subsystem.service_records.exists()

    services.work_order_finish(
        order, users["technician"], 1.5, "Harness clipped to the dome anchor throughout.", readings,
        confirmed_unticked=unticked, confirmed_hazards=["height"], isolation_answer=ISOLATED,
    )
    fresh = _fresh(order)
    assert fresh.state == State.FINISHED and fresh.hazards_confirmed_at_finish == ["height"]
    assert "height" not in fresh.hazards  # the order keeps what it carried; the record says what it lacked


def test_an_order_that_lacks_nothing_finishes_as_before_and_records_no_hazard(order, users):  # noqa: F811
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    services.work_order_finish(
        order, users["technician"], 1.0, "Isolation ticked on the paper.",
        {r.pk: 0.5 for r in order.required_readings.all()}, **_confirmed(order),
    )
    assert _fresh(order).hazards_confirmed_at_finish == []


def test_the_finish_form_shows_the_lacking_hazards_cautions_and_asks_for_the_confirmation(
    order, drive, users, client  # noqa: F811
):
    _started_then_hazard(order, drive, users)
    client.force_login(users["technician"])
    url = f"/workorders/{order.pk}/finish/"
    page = _text(client.get(url))
    assert "Hazards this work order lacks" in page and CAUTIONS["height"].text in page
    assert "local codes" in page.lower()  # the precedence statement stands beside the cautions

    refused = _text(client.post(url, _finish_data(order, findings="done")))
    assert "Confirm that these hazards were controlled or did not arise" in refused
    assert _fresh(order).state == State.UNDERWAY

    done = client.post(
        url, _finish_data(order, findings="Harness on.", confirm_hazards="on", lacking_hazard=["height"]), follow=True
    )
    assert _fresh(order).state == State.FINISHED
    record = _text(done)
    assert "The hazard it lacked, confirmed as controlled, is on the record." in record
    assert "confirmed that they were controlled or did not arise, and the findings say how: Work at height." in record
    assert "hazards its subsystems gained after it was made (work at height)" in _pdf_text(client, order)


def test_a_hazard_added_while_the_finish_form_was_open_is_not_confirmed_by_it(order, drive, users, client):  # noqa: F811
    """The confirmation names the hazards the person saw; one added since sends them back to the form."""
    _started_then_hazard(order, drive, users)
    client.force_login(users["technician"])
    data = _finish_data(order, findings="Harness on.", confirm_hazards="on", lacking_hazard=["height"])
    _add_hazard(drive, "laser")
    page = _text(client.post(f"/workorders/{order.pk}/finish/", data))
    assert "lacks hazards its subsystems gained after it was made (alignment lasers): confirm" in page
    assert _fresh(order).state == State.UNDERWAY
