"""What holds a work order at its start, and what stays fixed once its work has started, tried as the people who use
it: the technician on the order's page, the engineer on the lift page, the administrator in the admin.

- A lift with no working load limit entered may be issued (the paper can go out before the slings are chosen) but is
  not started: the tension of each sling leg, T = W / (n sin a), is compared with its rated capacity before the lift
  (ASME B30.9; load factor 1.155 at 60 degrees). The figures warn of it, from the same condition.
- A start more than a week before the planned day is asked first, on a page with a button, not refused (a week:
  common practice, no published source).
- Once the work has started, its steps, hazards, telescope, state and the subsystems it covers stay as stored, and an
  isolation point on its lockout is neither deleted nor moved to another telescope: the lockout step, the steps done
  locked out and the isolation points are ticked as they stand (OSHA 29 CFR 1910.147(d): the lockout applied and
  verified before the work; (e): removed only after it). A finished order's record stays as it was.
- How to leave a recoat's removal or reinstall that stops part way is a standing note, no longer a step: stored orders
  still draft or issued lose the step, the others keep their steps as they were (migration workorders.0013).
"""
from __future__ import annotations

import datetime as dt
import html
import importlib
import re
from html.parser import HTMLParser

import pytest
from django.apps import apps
from django.contrib.messages import get_messages
from test_recoat_phases import SLING_WLL_KG, orders  # noqa: F401  (orders: a fixture, used by name)
from test_workorders import drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Telescope
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.cautions import LIFT_NO_LIMIT_REFUSED, WORK_STOPPED_PART_WAY
from observatory_ops.workorders.forms import WorkOrderEditForm
from observatory_ops.workorders.models import ChecklistTick, IsolationPoint, State, WorkOrder
from observatory_ops.workorders.services import LOCKOUT_STEP


def _fresh(work_order) -> WorkOrder:
    return WorkOrder.objects.select_related("site", "telescope").get(pk=work_order.pk)


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def _message(response) -> str:
    return " ".join(str(m) for m in get_messages(response.wsgi_request))


class _Posted(HTMLParser):
    """What a browser posts from a page's form fields: name -> values (checked boxes, selected options, text areas
    without the line break that opens them), so an admin page is submitted as it stands plus the change tried."""

    def __init__(self, page: str):
        super().__init__()
        self.data: dict[str, list[str]] = {}
        self._select: tuple[str, list[str]] | None = None
        self._textarea: str | None = None
        self.feed(page)

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        name = attrs.get("name")
        if tag == "input" and name and attrs.get("type") not in ("submit", "button", "file"):
            if attrs.get("type") not in ("checkbox", "radio") or "checked" in attrs:
                self.data.setdefault(name, []).append(attrs.get("value") or "on" * (attrs.get("type") == "checkbox"))
        elif tag == "select" and name:
            self._select = (name, [])
        elif tag == "option" and self._select:
            self._select[1].append(attrs.get("value", ""))
            if "selected" in attrs:
                self.data.setdefault(self._select[0], []).append(attrs.get("value", ""))
        elif tag == "textarea" and name:
            self._textarea = name
            self.data.setdefault(name, []).append("")

    def handle_data(self, data):
        if self._textarea:
            self.data[self._textarea][-1] += data

    def handle_endtag(self, tag):
        if tag == "select" and self._select:
            name, options = self._select
            if name not in self.data and options:  # none selected: the first is sent
                self.data[name] = [options[0]]
            self._select = None
        elif tag == "textarea" and self._textarea:
            self.data[self._textarea][-1] = self.data[self._textarea][-1].removeprefix("\n")
            self._textarea = None


def _admin_post(client, url: str, **changes):
    """Submit the admin page at ``url`` as it stands, with ``changes`` (field name -> value) made."""
    data = _Posted(client.get(url).content.decode()).data
    data.update({name: [str(value)] for name, value in changes.items()})
    return client.post(url, data)


@pytest.fixture
def underway(order, users):  # noqa: F811  (the fixture of tests/test_workorders.py)
    """An axis-drive order (on T1, with its "Mount isolator" point) underway: its point and its lockout step ticked."""
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    point = IsolationPoint.objects.get(telescope=order.telescope, label="Mount isolator")
    services.checklist_tick_set(order, "point", point.pk, True, users["technician"])
    services.checklist_tick_set(order, "step", order.step_list.index(LOCKOUT_STEP), True, users["technician"])
    return _fresh(order)


# --- a lift without a working load limit ---------------------------------------------------------------------------


def test_a_recoat_lift_without_a_working_load_limit_is_issued_but_not_started(orders, users, client):  # noqa: F811
    removal = orders["removal"]
    figures = selectors.lift(removal)
    # The mirror's defaults: two legs at 60 degrees, no limit. Load factor 1/sin 60 = 1.155 (ASME B30.9).
    assert (figures.legs_rigged, figures.angle_deg, figures.wll_kg) == (2, 60, None)
    assert figures.load_factor == pytest.approx(1.155, abs=5e-4)
    assert figures.no_limit and any(w.startswith("No working load limit entered") for w in figures.warnings)
    services.work_order_move(removal, "issue", users["engineer"])  # the paper may go out early
    removal = _fresh(removal)
    with pytest.raises(services.Refused) as refused:
        services.work_order_move(removal, "start", users["technician"])
    assert str(refused.value) == LIFT_NO_LIMIT_REFUSED.format(number=removal.number)
    assert "the lift page ('Lifting figures' on the work order page)" in str(refused.value)
    assert _fresh(removal).state == State.ISSUED and _fresh(removal).started_at is None

    client.force_login(users["technician"])
    page = client.get(removal.get_absolute_url())
    assert 'value="start"' not in page.content.decode()
    assert f"Not offered: Start work. {str(refused.value)[:1].upper()}{str(refused.value)[1:]}." in _text(page)


def test_the_lifting_figures_are_offered_only_where_something_is_lifted(order, users, client):  # noqa: F811
    """A drive service lifts nothing: its page has no lifting-figures button. Adding the suspended-load hazard (a
    motor lowered on a hoist) offers it."""
    client.force_login(users["engineer"])
    assert "Lifting figures</a>" not in client.get(order.get_absolute_url()).content.decode()
    order.hazards = [*order.hazards, "suspended_load"]
    order.save()
    assert "Lifting figures</a>" in client.get(order.get_absolute_url()).content.decode()


def test_the_engineer_enters_the_limit_on_the_lift_page_and_the_work_starts(orders, users, client):  # noqa: F811
    removal = orders["removal"]
    services.work_order_move(removal, "issue", users["engineer"])
    client.force_login(users["engineer"])
    assert "Lifting figures</a>" in client.get(removal.get_absolute_url()).content.decode()  # where to enter it
    inputs = {name: "" if value is None else value for name, value in removal.lift_inputs.items()}
    response = client.post(f"/workorders/{removal.pk}/lift/", {**inputs, "wll_kg": ""}, follow=True)
    assert (
        "Lifting figures saved; the suspended-load caution is on the work order. It may be issued, but they stop the "
        f"work being started: {LIFT_NO_LIMIT_REFUSED.format(number=removal.number)}."
    ) in _text(response)
    response = client.post(f"/workorders/{removal.pk}/lift/", {**inputs, "wll_kg": SLING_WLL_KG})
    assert _message(response) == "Lifting figures saved; the suspended-load caution is on the work order."
    figures = selectors.lift(_fresh(removal))
    assert not figures.no_limit and not any("No working load limit" in w for w in figures.warnings)
    assert figures.margin > 1  # 500 kg a leg against about 29 kg: T = 50.6 kg / (2 sin 60) (ASME B30.9)
    services.work_order_move(_fresh(removal), "start", users["technician"])
    assert _fresh(removal).state == State.UNDERWAY


def test_a_lift_too_flat_and_without_a_limit_names_both_at_the_start(orders, users):  # noqa: F811
    """Load factor 1/sin 20 = 2.92, flatter than the 30 degrees (load factor 2.000) rigging practice stops at
    (ASME B30.9 and rigging handbooks)."""
    removal = orders["removal"]
    services.lift_set(removal, {**removal.lift_inputs, "angle_deg": 20})
    issue, start = selectors.lift_refusal(removal, "issue"), selectors.lift_refusal(removal, "start")
    assert "a sling angle of 20 degrees from horizontal (load factor 2.92)" in issue
    assert "no working load limit entered per leg" not in issue  # the paper may still go out once the angle is right
    assert start.startswith(f"{removal.number}'s lifting figures show a sling angle of 20 degrees")
    assert start.endswith("and no working load limit entered per leg: an engineer corrects the lifting figures (the "
                          "lift page) before it is issued or started")


# --- a start weeks before the planned day --------------------------------------------------------------------------


def _issued_for(work_order, users, days_ahead: int) -> WorkOrder:
    work_order.planned_date = site_today(work_order.site) + dt.timedelta(days=days_ahead)
    work_order.save()
    services.work_order_move(work_order, "issue", users["engineer"])
    return _fresh(work_order)


def test_a_start_more_than_a_week_early_asks_first_on_a_page_with_a_button(order, users, client):  # noqa: F811
    issued = _issued_for(order, users, 20)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{issued.pk}/move/start/", {"go": "start"})
    assert response.status_code == 200 and _fresh(issued).state == State.ISSUED  # asked, nothing done
    planned = f"{issued.planned_date:%d %b %Y}"
    question = f"{issued.number} is planned for {planned}, 20 days from now: start anyway?"
    assert selectors.early_start_question(issued) == question and question in _text(response)
    page = response.content.decode()
    # A plain form: the confirmation works on a tablet without JavaScript.
    assert "<script>" not in page and 'name="asked" value="confirmed"' in page
    assert f'action="/workorders/{issued.pk}/move/start/"' in page and f'href="/workorders/{issued.pk}/"' in page
    response = client.post(f"/workorders/{issued.pk}/move/start/", {"asked": "confirmed"})
    assert response.status_code == 302 and _fresh(issued).state == State.UNDERWAY


@pytest.mark.parametrize("days_ahead", [0, 7, -3])
def test_a_start_within_a_week_of_the_planned_day_asks_nothing(order, users, client, days_ahead):  # noqa: F811
    issued = _issued_for(order, users, days_ahead)
    assert selectors.early_start_question(issued) == ""
    client.force_login(users["technician"])
    assert client.post(f"/workorders/{issued.pk}/move/start/").status_code == 302
    assert _fresh(issued).state == State.UNDERWAY


def test_an_early_start_is_a_question_of_the_page_not_a_refusal_of_the_service(order, users):  # noqa: F811
    issued = _issued_for(order, users, 40)
    services.work_order_move(issued, "start", users["technician"])
    assert _fresh(issued).state == State.UNDERWAY


def test_a_held_start_is_refused_in_its_own_words_not_asked(orders, users, client):  # noqa: F811
    removal = orders["removal"]
    removal.planned_date = site_today(removal.site) + dt.timedelta(days=30)
    removal.save()
    services.work_order_move(removal, "issue", users["engineer"])
    assert selectors.early_start_question(_fresh(removal)) == ""  # no working load limit: refused anyway
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{removal.pk}/move/start/", follow=True)
    assert f"Not done: {LIFT_NO_LIMIT_REFUSED.format(number=removal.number)}." in _text(response)


# --- edits once the work has started -------------------------------------------------------------------------------


def test_the_admin_cannot_move_an_order_underway_to_another_telescope(underway, users, admin_client, site):
    other = Telescope.objects.create(site=site, name="T2", aperture_m=0.4, mount="fork")
    url = f"/admin/workorders/workorder/{underway.pk}/change/"
    response = _admin_post(admin_client, url, telescope=other.pk)
    assert response.status_code == 200
    assert f"{underway.number} is underway: its steps, hazards, telescope and state are not changed" in _text(response)
    assert _fresh(underway).telescope_id == underway.telescope_id
    # What does not touch the lockout is still changed there.
    assert _admin_post(admin_client, url, priority=WorkOrder.Priority.URGENT).status_code == 302
    assert _fresh(underway).priority == WorkOrder.Priority.URGENT


def test_the_admin_cannot_take_a_subsystem_off_an_order_underway(underway, admin_client):
    response = _admin_post(admin_client, f"/admin/workorders/workorder/{underway.pk}/change/",
                           **{"items-0-DELETE": "on"})
    assert response.status_code == 200
    assert f"{underway.number} is underway: its subsystems it covers are not changed" in _text(response)
    assert underway.items.count() == 1


def test_reverting_an_order_underway_to_its_draft_in_the_admin_history_is_refused(underway, admin_client):
    """simple_history's revert saves every field of the old version, state and steps included."""
    ticks = list(underway.ticks.values_list("pk", flat=True))
    first = underway.history.order_by("history_id").first()
    assert first.state == State.DRAFT
    response = _admin_post(admin_client, f"/admin/workorders/workorder/{underway.pk}/history/{first.history_id}/")
    assert response.status_code == 200 and f"{underway.number} is underway" in _text(response)
    stored = _fresh(underway)
    assert (stored.state, stored.steps, stored.started_at) == (State.UNDERWAY, underway.steps, underway.started_at)
    assert list(stored.ticks.values_list("pk", flat=True)) == ticks
    assert all(line.ticked for line in selectors.checklist(stored).points)


def test_a_finished_orders_record_is_not_reverted_either(underway, admin_client):
    WorkOrder.objects.filter(pk=underway.pk).update(state=State.FINISHED)  # as finishing leaves it
    first = underway.history.order_by("history_id").first()
    response = _admin_post(admin_client, f"/admin/workorders/workorder/{underway.pk}/history/{first.history_id}/")
    assert "is finished, awaiting countersignature: its record stays as it was" in _text(response)
    assert _fresh(underway).state == State.FINISHED
    with pytest.raises(services.Refused, match="its record stays as it was, its lifting figures included"):
        services.lift_set(_fresh(underway), {"diameter_mm": 500, "thickness_mm": 50, "material": "borosilicate"})


def test_before_the_start_the_admin_still_changes_the_telescope(order, users, admin_client, site):  # noqa: F811
    services.work_order_move(order, "issue", users["engineer"])
    other = Telescope.objects.create(site=site, name="T2", aperture_m=0.4, mount="fork")
    response = _admin_post(admin_client, f"/admin/workorders/workorder/{order.pk}/change/", telescope=other.pk)
    assert response.status_code == 302 and _fresh(order).telescope_id == other.pk


def test_the_edit_form_refuses_new_steps_on_an_order_underway(underway):
    """The page sends an order underway back unedited; its form refuses too, whoever builds it."""
    stored = underway.steps
    steps = [step for step in underway.step_list if step != LOCKOUT_STEP]
    form = WorkOrderEditForm(
        {"title": underway.title, "order_type": underway.order_type, "priority": underway.priority,
         "planned_date": underway.planned_date.isoformat(), "assignee": "", "estimated_hours": "1",
         "steps": "\n".join([*steps[:1], LOCKOUT_STEP, *steps[1:], "Check it again."]), "tools": ""},
        instance=underway,
    )
    assert not form.is_valid()
    assert f"{underway.number} is underway" in " ".join(form.non_field_errors())
    assert _fresh(underway).steps == stored


def test_an_isolation_point_on_a_lockout_underway_is_neither_deleted_nor_moved(underway, admin_client, site):
    point = IsolationPoint.objects.get(telescope=underway.telescope, label="Mount isolator")
    assert selectors.orders_underway_locking(point) == [underway]
    delete = f"/admin/workorders/isolationpoint/{point.pk}/delete/"
    assert f"This point is on the lockout of {underway.number}, underway" in _text(admin_client.get(delete))
    admin_client.post(delete, {"post": "yes"})
    assert IsolationPoint.objects.filter(pk=point.pk).exists()
    other = Telescope.objects.create(site=site, name="T2", aperture_m=0.4, mount="fork")
    response = _admin_post(admin_client, f"/admin/workorders/isolationpoint/{point.pk}/change/", telescope=other.pk)
    assert response.status_code == 200 and "it is not moved to another telescope or subsystem" in _text(response)
    assert IsolationPoint.objects.get(pk=point.pk).telescope_id == underway.telescope_id


def test_a_points_words_corrected_under_a_lockout_hold_the_locked_out_work_until_it_is_ticked_again(
    underway, admin_client, users
):
    point = IsolationPoint.objects.get(telescope=underway.telescope, label="Mount isolator")
    response = _admin_post(admin_client, f"/admin/workorders/isolationpoint/{point.pk}/change/",
                           label="Mount main isolator")
    assert response.status_code == 302
    assert not selectors.checklist(_fresh(underway)).points[0].ticked  # the tick was on other words
    locked = underway.step_list.index(LOCKOUT_STEP) + 1
    with pytest.raises(services.Refused, match="tick isolation point 'Mount main isolator' first"):
        services.checklist_tick_set(_fresh(underway), ChecklistTick.Kind.STEP, locked, True, users["technician"])


def test_a_point_on_no_order_underway_is_deleted_as_before(underway, admin_client, site):
    other = Telescope.objects.create(site=site, name="T2", aperture_m=0.4, mount="fork")
    spare = IsolationPoint.objects.create(telescope=other, energy="air", label="Brake air valve")
    assert selectors.orders_underway_locking(spare) == []  # the order underway is on T1
    admin_client.post(f"/admin/workorders/isolationpoint/{spare.pk}/delete/", {"post": "yes"})
    assert not IsolationPoint.objects.filter(pk=spare.pk).exists()


# --- the note on stopping part way, for orders stored before -------------------------------------------------------


def test_stored_orders_still_to_start_lose_the_step_and_the_others_keep_their_steps(orders, users):  # noqa: F811
    """Ticks are kept by step position: an order underway keeps the old step, so no tick moves to another line."""
    migration = importlib.import_module("observatory_ops.workorders.migrations.0013_stopping_part_way_note")

    def with_old_step(work_order, state):  # as the planner wrote them before: right after the lockout step
        steps = work_order.step_list
        steps.insert(steps.index(LOCKOUT_STEP) + 1, WORK_STOPPED_PART_WAY)
        WorkOrder.objects.filter(pk=work_order.pk).update(steps="\n".join(steps), state=state)
        return _fresh(work_order)

    issued = with_old_step(orders["removal"], State.ISSUED)
    started = with_old_step(orders["reinstall"], State.UNDERWAY)
    migration.step_to_note(apps, None)
    assert WORK_STOPPED_PART_WAY not in _fresh(issued).step_list
    assert _fresh(issued).step_list == orders["removal"].step_list  # as the planner writes them now
    reason = "step on stopping part way made a standing note"
    assert _fresh(issued).history.filter(history_change_reason=reason).exists()  # on the audit trail
    assert _fresh(started).steps == started.steps
    assert selectors.standing_notes(_fresh(issued)) == (WORK_STOPPED_PART_WAY,)


def test_a_mirror_lift_with_no_lifting_figures_is_issued_but_not_started(telescope, users, client):
    """A reviewer raised an order by hand to lift the primary out of its cell (a suspended load among its hazards) and
    was offered Start with no load, tension or working load limit worked out anywhere: the start waits for the figures
    as it waits for a working load limit (ASME B30.9), and is offered once they are entered."""
    from conftest import mains_isolator

    from observatory_ops.mirrors.models import Mirror
    from observatory_ops.registry.models import Subsystem
    from observatory_ops.workorders.cautions import LIFT_NO_FIGURES_REFUSED

    mains_isolator(telescope)
    primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name="Primary mirror",
                                       hazards=["suspended_load", "height", "optical_surface"])
    Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120, material="borosilicate",
                          cell_mass_kg=30)
    lift_order = services.work_order_ad_hoc(telescope.site, [primary], "Lift the primary out", users["engineer"],
                                       steps="Lift the mirror out of its cell with the crane.",
                                       hazards=["suspended_load", "height"],
                                       planned_date=site_today(telescope.site))
    assert "suspended_load" in lift_order.hazards and selectors.lift(lift_order) is None
    held = selectors.moves_held(_fresh(lift_order))
    assert "issue" not in held
    assert held["start"] == [LIFT_NO_FIGURES_REFUSED.format(number=lift_order.number, mirror="Primary mirror")]
    services.work_order_move(_fresh(lift_order), "issue", users["engineer"])
    # The paper says so too: a technician working from it would otherwise begin (a reviewer's finding).
    import io

    from pypdf import PdfReader

    client.force_login(users["technician"])
    document = client.get(f"/workorders/{lift_order.pk}/pdf/").content
    paper = " ".join(" ".join(page.extract_text() for page in PdfReader(io.BytesIO(document)).pages).split())
    assert "NOT TO BE STARTED YET" in paper and "has no lifting figures" in paper
    with pytest.raises(services.Refused, match="has no lifting figures"):
        services.work_order_move(_fresh(lift_order), "start", users["technician"])
    services.lift_set(_fresh(lift_order), {"diameter_mm": 500, "thickness_mm": 50, "hole_mm": 120,
                                           "material": "borosilicate", "fixture_kg": 30, "legs": 2, "angle_deg": 60,
                                           "wll_kg": SLING_WLL_KG})
    assert "start" not in selectors.moves_held(_fresh(lift_order))
    assert selectors.start_held_notice(_fresh(lift_order)) == ()
