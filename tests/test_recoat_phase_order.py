"""The phase orders of a recoat are done in their order: removal, strip and coat, reinstall, realignment. Each
starts only once the one before it in its recoat plan is finished (or countersigned); until then its page offers
no Start and says which order holds it and how that order stands, and the service refuses it in the same words.

Each phase's steps take the one before as done: the realignment parks the telescope, takes the locks off and
checks the collimation under power, which only a reinstalled mirror with the balance restored allows; the locks
stay on until the work is complete (OSHA 29 CFR 1910.147(e)). The order of the phases itself is common practice,
no published source.
"""
from __future__ import annotations

import datetime as dt
import html
import io
import re

import pytest
from conftest import mains_isolator, new_coating_logged
from django.contrib.messages import get_messages
from django.utils import timezone
from pypdf import PdfReader
from test_recoat_phases import slings_rated
from test_workorders import _confirmed, _finish_confirmations

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import CoatingEvent, Mirror
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Subsystem
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.models import State, WorkOrder

OUT = "T1 is out of service: its primary mirror is out"
PHASES = ("removal", "coating", "reinstall", "realignment")


@pytest.fixture
def mirror(telescope):
    primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name="Primary mirror")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=dt.date(2025, 8, 1), metal="al")
    mains_isolator(telescope)
    return mirror


@pytest.fixture
def recoat(mirror, users):
    """The four phase orders of a recoat planned from a week ahead, by phase, all drafts, the slings' working load
    limit entered on each that lifts (without one it would not start: tests/test_start_holds.py)."""
    start = site_today(mirror.subsystem.telescope.site) + dt.timedelta(days=7)
    plan = mirror_services.recoat_plan_create(mirror, start, list(RECOAT_PHASES), 3.5, users["engineer"])
    return {order.recoat_phase: order for order in slings_rated(list(plan.work_orders.all()))}


def _fresh(order) -> WorkOrder:
    return WorkOrder.objects.select_related("site", "telescope").get(pk=order.pk)


def _issued(order, users) -> WorkOrder:
    services.work_order_move(_fresh(order), "issue", users["engineer"])
    return _fresh(order)


def _finished(order, users) -> WorkOrder:
    order = _fresh(order)
    if order.state == State.DRAFT:
        order = _issued(order, users)
    services.work_order_move(order, "start", users["technician"])
    order = _fresh(order)
    new_coating_logged(order, users["technician"])
    services.work_order_finish(
        order, users["technician"], 8.0, "done", {r.pk: 0.9 for r in order.required_readings.all()},
        **_confirmed(order),
    )
    return _fresh(order)


def _text(response) -> str:
    assert response.status_code == 200
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def _message(response) -> str:
    return " ".join(str(m) for m in get_messages(response.wsgi_request))


def _held(before: WorkOrder, stands: str, this: str) -> str:
    return (
        "a recoat's phases are done in their order (removal, strip and coat, reinstall, realignment and measurement): "
        f"this {this} starts only once {before.number} ({before.title}) is finished, and it is {stands}"
    )


@pytest.mark.parametrize("stands", ["draft", "issued", "underway"])
def test_the_reinstall_does_not_start_while_the_strip_and_coat_is_not_finished(recoat, users, client, stands):
    """The review's case: the reinstall was started and finished while the strip-and-coat order was a draft."""
    _finished(recoat["removal"], users)
    coating = recoat["coating"]
    if stands != "draft":
        coating = _issued(coating, users)
    if stands == "underway":
        services.work_order_move(coating, "start", users["technician"])
    words = {"draft": "still a draft", "issued": "issued but not started", "underway": "underway, not finished"}
    expected = _held(coating, words[stands], "reinstall")
    reinstall = _issued(recoat["reinstall"], users)
    with pytest.raises(services.Refused) as refused:
        services.work_order_move(reinstall, "start", users["technician"])
    assert str(refused.value) == expected
    assert _fresh(reinstall).state == State.ISSUED and _fresh(reinstall).started_at is None
    # The telescope still stands without its mirror: nothing cleared the notice.
    assert [o.telescope_id for o in selectors.telescopes_out([reinstall.site])] == [reinstall.telescope_id]

    client.force_login(users["technician"])
    page = client.get(reinstall.get_absolute_url()).content.decode()
    assert 'value="start"' not in page  # no button the service would refuse
    shown = _text(client.get(reinstall.get_absolute_url()))
    assert f"Not offered: Start work. {expected[:1].upper()}{expected[1:]}." in shown
    # A post from an old page is refused in the same words.
    response = client.post(f"/workorders/{reinstall.pk}/move/start/", follow=True)
    assert f"Not done: {expected}." in _text(response)
    assert _fresh(reinstall).state == State.ISSUED


def test_the_realignment_does_not_start_while_the_mirror_is_out(recoat, users, client):
    """The review's case: the realignment (park, locks off, collimation under power) was started with the mirror
    out and the tube out of balance."""
    _finished(recoat["removal"], users)
    _finished(recoat["coating"], users)
    reinstall = _issued(recoat["reinstall"], users)
    realignment = _issued(recoat["realignment"], users)
    expected = _held(reinstall, "issued but not started", "realignment and measurement")
    with pytest.raises(services.Refused, match=re.escape(expected)):
        services.work_order_move(realignment, "start", users["technician"])
    assert _fresh(realignment).state == State.ISSUED


def test_the_phases_done_in_their_order_each_start_once_the_one_before_is_finished(recoat, users):
    removal = _issued(recoat["removal"], users)
    assert "start" not in selectors.moves_held(removal)  # the first phase waits for nothing
    for before, phase in zip(PHASES, PHASES[1:], strict=False):
        order = _issued(recoat[phase], users)
        assert "start" in selectors.moves_held(order), phase
        _finished(recoat[before], users)
        assert "start" not in selectors.moves_held(_fresh(order)), phase
    _finished(recoat["realignment"], users)
    assert {_fresh(o).state for o in recoat.values()} == {State.FINISHED}


def test_a_countersigned_phase_lets_the_next_one_start(recoat, users):
    removal = _finished(recoat["removal"], users)
    services.work_order_move(removal, "countersign", users["engineer"])  # a second person
    assert _fresh(removal).state == State.COUNTERSIGNED
    coating = _issued(recoat["coating"], users)
    services.work_order_move(coating, "start", users["technician"])
    assert _fresh(coating).state == State.UNDERWAY


def test_after_a_withdrawn_phase_the_recoat_is_planned_again(recoat, users):
    removal = _finished(recoat["removal"], users)
    coating = _fresh(recoat["coating"])
    services.work_order_move(coating, "withdraw", users["engineer"], reason="coating plant closed")
    reinstall = _issued(recoat["reinstall"], users)
    with pytest.raises(services.Refused) as refused:
        services.work_order_move(reinstall, "start", users["technician"])
    assert str(refused.value) == (
        f"the strip and coat before this reinstall ({coating.number}, {coating.title}) was withdrawn, so this recoat "
        "cannot go on as planned: withdraw its other orders still to do and plan the recoat again on the mirror's "
        "recoat planner"
    )
    assert removal.state == State.FINISHED


def test_issuing_ahead_is_allowed_only_starting_waits(recoat, users):
    """The paper may be printed and handed out ahead of the work; only the start waits for the phase before."""
    for phase in PHASES:
        assert _issued(recoat[phase], users).state == State.ISSUED


# --- the out-of-service notice on the realignment ---------------------------------------------------------------


def test_the_realignment_carries_the_out_of_service_notice_while_the_mirror_is_out(recoat, users, client):
    """Removal, coating and reinstall are written for a telescope without its mirror; the realignment is not."""
    _finished(recoat["removal"], users)
    realignment = _fresh(recoat["realignment"])
    notices = selectors.telescope_out_notices(realignment)
    assert [title for title, _, _ in notices] == [OUT]
    for phase in ("coating", "reinstall"):
        assert selectors.telescope_out_notices(_fresh(recoat[phase])) == [], phase
    client.force_login(users["technician"])
    assert OUT in _text(client.get(realignment.get_absolute_url()))
    document = client.get(f"/workorders/{realignment.pk}/pdf/").content
    printed = " ".join(" ".join(p.extract_text() for p in PdfReader(io.BytesIO(document)).pages).split())
    assert OUT in printed


def test_once_the_reinstall_is_finished_the_realignment_carries_no_notice(recoat, users):
    for phase in ("removal", "coating", "reinstall"):
        _finished(recoat[phase], users)
    assert selectors.telescope_out_notices(_fresh(recoat["realignment"])) == []


# --- the finish message words the next phase order by how it stands ---------------------------------------------


def _finish_by_form(client, order, users):
    order = _fresh(order)
    if order.state == State.DRAFT:
        order = _issued(order, users)
    services.work_order_move(order, "start", users["technician"])
    order = _fresh(order)
    new_coating_logged(order, users["technician"])
    client.force_login(users["technician"])
    data = {
        "actual_hours": "8", "findings": "done", "work_done_on": site_today(order.site).isoformat(),
        **_finish_confirmations(order), **{f"reading_{r.pk}": "0.9" for r in order.required_readings.all()},
    }
    response = client.post(f"/workorders/{order.pk}/finish/", data)
    assert response.status_code == 302, _text(response)[-1500:]
    return response


def _link(order) -> str:
    return f'<a href="/workorders/{order.pk}/">{order.number} {order.title}</a>'


def test_the_next_phase_still_a_draft_is_to_be_issued(recoat, users, client):
    coating = recoat["coating"]
    message = _message(_finish_by_form(client, recoat["removal"], users))
    assert f"Next: {_link(coating)} (planned {coating.planned_date:%d %b %Y}; still a draft: issue it)." in message


def test_the_next_phase_issued_can_be_started(recoat, users, client):
    coating = _issued(recoat["coating"], users)
    message = _message(_finish_by_form(client, recoat["removal"], users))
    assert f"Next: {_link(coating)} (planned {coating.planned_date:%d %b %Y}; issued: it can be started)." in message


def test_a_withdrawn_next_phase_says_the_recoat_is_planned_again(recoat, users, client, mirror):
    coating = _fresh(recoat["coating"])
    services.work_order_move(coating, "withdraw", users["engineer"], reason="coating plant closed")
    message = _message(_finish_by_form(client, recoat["removal"], users))
    assert (
        f"Next: {_link(coating)} was withdrawn, so this recoat cannot go on as planned: withdraw its other orders "
        f"still to do and plan the recoat again on the <a href=\"/mirrors/{mirror.pk}/recoat/\">mirror's recoat "
        "planner</a>."
    ) in message
    assert recoat["reinstall"].number not in message.split("Next:")[1].split("was withdrawn")[0]


# --- the strip and coat is finished only once its new coating is logged -----------------------------------------
# Its step "Log the new coating" could be ticked with none logged: the realignment then restarted the recoat plans
# while the mirror's reflectance decline still ran from the old coating (a review of the left-alone list).


def _coating_underway(recoat, users) -> WorkOrder:
    _finished(recoat["removal"], users)
    coating = _issued(recoat["coating"], users)
    services.work_order_move(coating, "start", users["technician"])
    return _fresh(coating)


def test_the_strip_and_coat_is_not_finished_before_its_new_coating_is_logged(recoat, mirror, users, client):
    coating = _coating_underway(recoat, users)
    today = site_today(coating.site)
    expected = (f"Primary mirror has no new coating logged: its newest logged coating is of 01 Aug 2025, before this "
                f"recoat was planned or began ({today:%d %b %Y}). Log the new coating on the mirror's page (New "
                "coating, with the day it was coated and its recipe) before finishing this order")
    with pytest.raises(services.Refused, match=re.escape(expected)):
        services.work_order_finish(coating, users["technician"], 8.0, "done", {}, **_confirmed(coating))
    assert _fresh(coating).state == State.UNDERWAY
    client.force_login(users["technician"])
    page = _text(client.get(f"/workorders/{coating.pk}/"))
    assert "Not offered: Finish and record. Primary mirror has no new coating logged" in page
    assert f'href="/workorders/{coating.pk}/finish/"' not in client.get(f"/workorders/{coating.pk}/").content.decode()
    assert f'href="/mirrors/{mirror.pk}/" id="mirror-page"' in client.get(f"/workorders/{coating.pk}/").content.decode()
    response = client.get(f"/workorders/{coating.pk}/finish/")  # an old page or a typed address
    assert response.status_code == 302
    assert [str(m) for m in get_messages(response.wsgi_request)] == [
        f"{coating.number} cannot be finished yet: {expected}, so the reflectance decline and the recoat plans start "
        "again from it."
    ]


def test_a_coating_older_than_the_recoat_does_not_count_and_one_entered_late_with_its_true_date_does(
    recoat, mirror, users
):
    """A diff review: the removal entered afterwards (finished on the day it was typed in) had made a coating logged
    with its true, earlier date count for nothing, and a corrected removal date was never read. The coating the
    recoat replaces is older than the plan made for it; the new one is not, whenever it is entered. With the mirror out,
    an older one is refused (mirrors.services.coating_before_removal: a recoat review's slip was taken for one)."""
    from django.core.exceptions import ValidationError

    coating = _coating_underway(recoat, users)
    plan = coating.recoat_plans.get()
    planned = site_today(coating.site)  # made today, for a window a week ahead (the fixture)
    with pytest.raises(ValidationError, match="An earlier coating entered late is logged once this recoat is finished"):
        mirror_services.coating_log(mirror, users["engineer"], planned - dt.timedelta(days=1), "al", [])
    assert "finish" in selectors.moves_held(coating)
    assert plan.starts_on > planned
    mirror_services.coating_log(mirror, users["engineer"], planned, "al", [])
    assert "finish" not in selectors.moves_held(_fresh(coating))


def test_once_the_new_coating_is_logged_on_the_mirror_page_the_strip_and_coat_finishes(recoat, mirror, users, client):
    coating = _coating_underway(recoat, users)
    client.force_login(users["technician"])
    response = client.post(f"/mirrors/{mirror.pk}/coatings/new/", {
        "coated_on": site_today(coating.site).isoformat(), "metal": "al", "layers": "SiO2:100", "note": "",
    })
    assert response.status_code == 302
    assert CoatingEvent.objects.filter(mirror=mirror, coated_on=site_today(coating.site)).exists()
    said = [str(m) for m in get_messages(response.wsgi_request)][-1]  # the way back to the order it held
    assert said.endswith(f'<a href="/workorders/{coating.pk}/">{coating.number}</a> ({coating.title}) can now be '
                         "finished.")
    assert f'href="/workorders/{coating.pk}/finish/"' in client.get(f"/workorders/{coating.pk}/").content.decode()
    services.work_order_finish(coating, users["technician"], 8.0, "done", {}, **_confirmed(coating))
    assert _fresh(coating).state == State.FINISHED


def test_no_other_order_waits_for_a_coating(recoat, users):
    removal = _issued(recoat["removal"], users)
    services.work_order_move(removal, "start", users["technician"])
    assert "finish" not in selectors.moves_held(_fresh(removal))


def test_a_new_coating_is_not_logged_while_the_recoats_removal_is_not_finished(recoat, mirror, users, admin_client):
    """A year's review logged the new coating while the removal waited for its lifting figures: the cleaning plan
    restarted and came overdue while the old coating was still in, and the dusty weeks to the removal were charged to
    the new one. Refused on the mirror page's service and in the admin until the removal is finished; an old coating
    entered late (dated before the recoat was planned) is not this recoat's."""
    from django.core.exceptions import ValidationError

    today = site_today(mirror.subsystem.telescope.site)
    with pytest.raises(ValidationError, match=f"the mirror's removal for its recoat, {recoat['removal'].number}, is "
                                              "draft: the mirror is still in the telescope with its old coating"):
        mirror_services.coating_log(mirror, users["technician"], today, "al", [])
    assert CoatingEvent.objects.filter(mirror=mirror).count() == 1
    from test_mirror_admin import _admin_post

    response = _admin_post(admin_client, mirror, coatings=[{"coated_on": today.isoformat(), "metal": "al",
                                                            "layers": "", "note": ""}])
    assert response.status_code == 200 and "the mirror is still in the telescope" in response.content.decode()
    assert CoatingEvent.objects.filter(mirror=mirror).count() == 1
    mirror_services.coating_log(mirror, users["technician"], today - dt.timedelta(days=30), "al", [])  # entered late
    assert CoatingEvent.objects.filter(mirror=mirror).count() == 2

    # A stored coating re-dated in the admin to a day of the recoat is refused alike (the last notes left it).
    late = CoatingEvent.objects.get(mirror=mirror, coated_on=today - dt.timedelta(days=30))
    page = admin_client.get(f"/admin/mirrors/mirror/{mirror.pk}/change/")
    data = {name: ("" if value is None else value) for name, value in page.context["adminform"].form.initial.items()}
    data["subsystem"] = mirror.subsystem_id
    for formset in page.context["inline_admin_formsets"]:
        rows = formset.formset
        data.update({f"{rows.prefix}-{k}": v for k, v in rows.management_form.initial.items()})
        for form in rows.forms[:rows.initial_form_count()]:
            data.update({form.add_prefix(k): ("" if v is None else v) for k, v in form.initial.items()})
            data.update({form.add_prefix("id"): form.instance.pk, form.add_prefix("mirror"): mirror.pk})
            if form.instance.pk == late.pk:
                data[form.add_prefix("coated_on")] = today.isoformat()
    response = admin_client.post(f"/admin/mirrors/mirror/{mirror.pk}/change/", data)
    assert response.status_code == 200 and "the mirror is still in the telescope" in response.content.decode()
    late.refresh_from_db()
    assert late.coated_on == today - dt.timedelta(days=30)


def test_a_coating_is_not_dated_before_the_mirror_came_out(recoat, mirror, users):
    """A diff review finished the removal today and logged a coating dated ten days before: the mirror was still in
    the telescope then."""
    from django.core.exceptions import ValidationError

    from observatory_ops.logbook.models import ServiceRecord

    removal = recoat["removal"]
    WorkOrder.objects.filter(pk=removal.pk).update(state="finished", finished_at=timezone.now())
    today = site_today(mirror.subsystem.telescope.site)
    ServiceRecord.objects.create(subsystem=mirror.subsystem, performed_on=today, performed_by=users["technician"],
                                 summary="Removal", created_by=users["technician"], work_order=removal)
    type(removal.recoat_plans.first()).objects.filter(pk=removal.recoat_plans.first().pk).update(
        starts_on=today - dt.timedelta(days=20))
    with pytest.raises(ValidationError, match=f"the mirror came out of the telescope on {today:%d %b %Y}"):
        mirror_services.coating_log(mirror, users["technician"], today - dt.timedelta(days=10), "al", [])
    # Dated before the recoat was planned and before its first day, it is refused all the same once the mirror is out
    # (a recoat review's slip of three days was taken for an old coating entered late).
    with pytest.raises(ValidationError, match="An earlier coating entered late is logged once this recoat is finished"):
        mirror_services.coating_log(mirror, users["technician"], today - dt.timedelta(days=25), "al", [])
    mirror_services.coating_log(mirror, users["technician"], today, "al", [])



def _catalogue_primary_recoat(telescope, users):
    """A primary registered with its catalogue plans (its recoat plan among them) on ``telescope``, its mirror coated
    with bare aluminium on 01 Aug 2025, and its recoat planned from a week ahead: (the mirror, its recoat plan, the
    phase orders by phase, the slings' working load limit entered on each that lifts)."""
    from observatory_ops.mirrors.services import recoat_plans
    from observatory_ops.registry.services import subsystem_create

    primary = subsystem_create(telescope, "primary_mirror", "Primary mirror", counting_from=dt.date(2025, 8, 1))
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=dt.date(2025, 8, 1), metal="al")
    mains_isolator(telescope)
    [recoat_plan] = recoat_plans(primary)
    start = site_today(telescope.site) + dt.timedelta(days=7)
    plan = mirror_services.recoat_plan_create(mirror, start, list(RECOAT_PHASES), 3.5, users["engineer"])
    recoat = {order.recoat_phase: order for order in slings_rated(list(plan.work_orders.all()))}
    return mirror, recoat_plan, recoat


def test_the_realignment_expects_the_new_coatings_fresh_value_and_adds_no_second_recoat_record(telescope, users):
    """A recoat review: the realignment's reflectance row read the old bare aluminium's computed fresh value (0.9032)
    beside a reading of the new protected coating (0.83 fresh), and its finish wrote a second record of the recoat
    plan, days after the coating's, from which the plan then counted. A primary registered with its catalogue plans
    (its recoat plan among them), on the fixture's telescope."""
    from observatory_ops.logbook.models import ServiceRecord
    from observatory_ops.logbook.quantities import reflectance_text
    from observatory_ops.mirrors.services import _coating_band

    mirror, recoat_plan, recoat = _catalogue_primary_recoat(telescope, users)
    realignment = recoat["realignment"]
    reading = realignment.required_readings.get()
    old = reflectance_text(_coating_band(mirror, "al", []))
    assert reading.limit_text == f"about {old} expected (computed fresh for Al)"
    for phase in ("removal", "coating", "reinstall"):
        _finished(recoat[phase], users)  # the strip and coat logs Al + SiO2 100 nm (tests/conftest.py)
    new = reflectance_text(_coating_band(mirror, "al", [{"material": "SiO2", "thickness_nm": 100}]))
    assert new != old
    reading.refresh_from_db()
    assert reading.limit_text == f"about {new} expected (computed fresh for Al + SiO2 100 nm)"
    # The coating's record of the recoat plan is not said to make the realignment's item done (a diff review: the
    # page told the engineer to withdraw the realignment).
    assert selectors.served_since(realignment, list(realignment.items.all())) == {}
    _finished(realignment, users)
    records = ServiceRecord.objects.filter(plan=recoat_plan, performed_on__gte=site_today(telescope.site))
    assert [r.summary for r in records] == ["New coating: Al + SiO2 100 nm"]
    done = ServiceRecord.objects.get(work_order=realignment)
    assert (done.plan, done.summary) == (None, realignment.title)


def test_a_recoat_plan_the_coating_did_not_restart_is_restarted_by_the_realignment(telescope, users):
    """A diff review made the recoat plan inactive while the coating was logged (the coating wrote no record of it),
    active again before the realignment: the realignment's finish restarts it, as the records say, not as assumed."""
    from observatory_ops.logbook.models import ServiceRecord

    mirror, recoat_plan, recoat = _catalogue_primary_recoat(telescope, users)
    _finished(recoat["removal"], users)
    type(recoat_plan).objects.filter(pk=recoat_plan.pk).update(active=False)
    _finished(recoat["coating"], users)
    type(recoat_plan).objects.filter(pk=recoat_plan.pk).update(active=True)
    _finished(recoat["reinstall"], users)
    _finished(recoat["realignment"], users)
    done = ServiceRecord.objects.get(work_order=recoat["realignment"])
    assert done.plan_id == recoat_plan.pk
