"""A page offers nobody a form they cannot send. Whoever may read a page but not make its change (a viewer on the
recoat planner, the due list or a work order's checklist, a technician on the planner) sees the results without the
form, and a sentence saying who makes the change; whoever may make it gets the form. A form whose every control is
disabled is one nobody can send: a page leaves it out. The roles are those of ``observatory_ops.access.roles``; the
records are invented."""
from __future__ import annotations

import datetime as dt
import html
import re
from html.parser import HTMLParser

import pytest
from crew_calendar import mirror_under_a_flat_sky
from django.urls import resolve
from django.utils import dateformat

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.planning.models import PlanStatus
from observatory_ops.planning.services import HORIZON_DAYS, site_recompute, site_today
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders.models import ChecklistTick, IsolationPoint
from observatory_ops.workorders.selectors import checklist
from observatory_ops.workorders.services import checklist_tick_set, work_order_from_due, work_order_move
from tests.conftest import constant_sky
from tests.test_accessible_pages import due_at_two_telescopes  # noqa: F401  (a fixture)
from tests.test_roles import allowed, pages_of, records, sign_in  # noqa: F401  (records: a fixture)

pytestmark = pytest.mark.django_db

ROLES_BELOW_ADMINISTRATOR = ("viewer", "technician", "engineer")


class _Forms(HTMLParser):
    """The POST forms of a page, each with its target and the number of controls a person can use in it (neither
    hidden nor disabled)."""

    def __init__(self):
        super().__init__()
        self.forms: list[dict] = []
        self._open: dict | None = None

    def handle_starttag(self, tag, attrs):
        attributes = dict(attrs)
        if tag == "form":
            self._open = {"method": attributes.get("method", "get").lower(), "action": attributes.get("action"),
                          "usable": 0}
            self.forms.append(self._open)
        elif self._open is not None and tag in ("input", "button", "select", "textarea"):
            if "disabled" not in attributes and attributes.get("type") != "hidden":
                self._open["usable"] += 1

    def handle_endtag(self, tag):
        if tag == "form":
            self._open = None


def offered_forms(page: str, url: str) -> list[tuple[str, str, int]]:
    """(target, role it needs, controls a person can use) of each POST form of ``page`` (signing out aside)."""
    parser = _Forms()
    parser.feed(page)
    forms = [(form["action"] or url, form["usable"]) for form in parser.forms
             if form["method"] == "post" and form["action"] != "/logout/"]
    return [(target, resolve(target.split("?")[0]).func.required_role, usable) for target, usable in forms]


def test_no_page_offers_a_form_its_reader_cannot_send(client, records, users, site):  # noqa: F811
    """Every page of the project (``test_roles``' walk), with the site's due states stored so the due list has rows:
    each form a role is offered goes to a view that role may use, and has a control they can use. The walk's work order
    is a draft: nobody ticks its checklist yet, so its page has no tick form for anyone."""
    constant_sky(site, site_today(site) - dt.timedelta(days=400), site_today(site) + dt.timedelta(days=HORIZON_DAYS))
    site_recompute(site)
    wrong = []
    for who in ROLES_BELOW_ADMINISTRATOR:
        sign_in(client, users[who])
        for url, needed in pages_of(records):
            if not allowed(who, needed):
                continue
            response = client.get(url)
            if response.status_code != 200 or "text/html" not in response.get("Content-Type", ""):
                continue
            for target, role, usable in offered_forms(response.content.decode(), url):
                if not allowed(who, role):
                    wrong.append(f"{who} on {url}: a form to {target} (needs {role})")
                elif not usable:
                    wrong.append(f"{who} on {url}: a form to {target} with every control disabled")
    assert wrong == []


# --- the recoat planner --------------------------------------------------------------------------------------------

SEARCH = {"start": "2026-12-14", "horizon_days": "21"} | {
    f"phase_{i}": str(p.days) for i, p in enumerate(RECOAT_PHASES)
}


@pytest.fixture
def mirror(telescope, monkeypatch):
    """Under a flat sky from 1 December 2026; the planner's "today" (its search starts no earlier) is SEARCH's start."""
    monkeypatch.setattr("observatory_ops.mirrors.views.site_today", lambda site, now=None: dt.date(2026, 12, 14))
    return mirror_under_a_flat_sky(telescope, dt.date(2026, 12, 1), 62)


@pytest.mark.parametrize("who", ["viewer", "technician"])
def test_the_recoat_planner_shows_the_windows_without_the_plan_form_below_an_engineer(mirror, users, client, who):
    client.force_login(users[who])
    page = client.get(f"/mirrors/{mirror.pk}/recoat/", SEARCH).content.decode()
    assert "Cheapest windows for" in page and "Phase dates of the window from" in page  # the results, all of them
    assert 'name="window"' not in page and "create-recoat-plan" not in page
    assert f'action="/mirrors/{mirror.pk}/recoat/plan/"' not in page
    said = html.unescape(re.search(r'<p id="who-plans">(.*?)</p>', page).group(1))
    assert said == "An engineer plans the recoat in one of these windows; it makes the draft work orders of its phases."
    assert "<th>From</th>" in page and "<th></th>" not in page  # no empty column where the choices were


def test_an_engineer_gets_the_windows_to_choose_from_and_the_plan_button(mirror, users, client):
    client.force_login(users["engineer"])
    page = client.get(f"/mirrors/{mirror.pk}/recoat/", SEARCH).content.decode()
    assert f'action="/mirrors/{mirror.pk}/recoat/plan/"' in page
    assert 'name="window"' in page and "create-recoat-plan" in page
    assert 'id="who-plans"' not in page


# --- the due list --------------------------------------------------------------------------------------------------

def test_a_viewer_reads_the_due_list_without_tick_boxes_and_is_told_who_makes_orders(
    due_at_two_telescopes, users, client  # noqa: F811
):
    client.force_login(users["viewer"])
    page = client.get("/due/").content.decode()
    rows = PlanStatus.objects.filter(site=due_at_two_telescopes).count()
    assert rows > 1 and page.count('<tr role="row"><td role="cell" class="tick"></td>') == rows  # the cells kept
    assert 'name="plans"' not in page and "/workorders/from-due/" not in page and "make-work-order" not in page
    said = html.unescape(re.search(r'<p class="noprint" id="who-makes-orders">(.*?)</p>', page).group(1))
    assert said == "A technician or an engineer makes work orders from the items listed here."


def test_a_technician_ticks_due_items_for_a_work_order(due_at_two_telescopes, users, client):  # noqa: F811
    client.force_login(users["technician"])
    page = client.get("/due/").content.decode()
    assert 'action="/workorders/from-due/"' in page and "make-work-order" in page
    assert page.count('<input type="checkbox" name="plans"') == PlanStatus.objects.count() > 1
    assert 'id="who-makes-orders"' not in page


# --- the subsystem page --------------------------------------------------------------------------------------------

def test_below_an_engineer_a_plan_with_older_steps_says_who_gives_it_the_present_ones(telescope, users, client):
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=dt.date(2026, 1, 1))
    plan = brake.plans.first()
    template = next(t for t in KINDS["brake"].plans if t.name == plan.name)
    plan.steps = "\n".join(step for step in template.after_isolation if "pin" not in step.lower())  # older steps
    plan.save()
    for who in ("viewer", "technician"):
        client.force_login(users[who])
        page = client.get(brake.get_absolute_url()).content.decode()
        assert f'id="plan-{plan.pk}-revised"' in page and f"/plans/{plan.pk}/catalogue-steps/" not in page
        assert "An engineer gives the plan the catalogue's present steps here." in html.unescape(page)
    client.force_login(users["engineer"])
    page = client.get(brake.get_absolute_url()).content.decode()
    assert f'action="/plans/{plan.pk}/catalogue-steps/"' in page
    assert "An engineer gives the plan" not in html.unescape(page)


# --- the work order's checklist ------------------------------------------------------------------------------------

@pytest.fixture
def underway_ticked(telescope, users):
    """An axis drive's order underway, its isolation point ("Mount isolator") and its lockout step ticked by the
    technician."""
    drive = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=dt.date(2026, 1, 1))
    point = IsolationPoint.objects.create(telescope=telescope, energy="ac", label="Mount isolator")
    order = work_order_from_due(list(drive.plans.all()), users["engineer"], dt.date(2026, 6, 16))
    work_order_move(order, "issue", users["engineer"])
    work_order_move(order, "start", users["technician"])
    checklist_tick_set(order, ChecklistTick.Kind.POINT, point.pk, True, users["technician"])
    lockout = next(line for line in checklist(order).steps if line.is_lockout)
    checklist_tick_set(order, ChecklistTick.Kind.STEP, lockout.key, True, users["technician"])
    return order


def _line(page: str, anchor: str) -> str:
    return re.search(rf'<li id="{anchor}"[^>]*>(.*?)</li>', page, flags=re.S).group(1)


def test_a_viewer_reads_the_checklist_of_work_underway_as_recorded_with_no_form(underway_ticked, users, client):
    """The viewer got every line as a form (a CSRF token, a disabled box) it could never send. Now each line is its
    words, its lockout marking, a box that is no control, and who ticked it when."""
    client.force_login(users["viewer"])
    page = client.get(underway_ticked.get_absolute_url()).content.decode()
    lines = checklist(underway_ticked)
    assert f'action="/workorders/{underway_ticked.pk}/tick/"' not in page
    assert '<input type="checkbox"' not in page and 'name="ticked"' not in page
    for line in lines.steps + lines.points:
        shown = _line(page, line.anchor)
        assert "<form" not in shown and "csrfmiddlewaretoken" not in shown
        assert html.escape(line.text) in shown
        box = '<span class="tick-box" role="img" aria-label="ticked">✓</span>' if line.ticked else \
            '<span class="tick-box" role="img" aria-label="not ticked"></span>'
        assert box in shown
    lockout = next(line for line in lines.steps if line.is_lockout)
    shown = _line(page, lockout.anchor)
    assert '<strong class="lockout-mark">Lockout:</strong>' in shown
    assert re.search(rf'<li id="{lockout.anchor}" class="ticked lockout-line">', page)
    tick = ChecklistTick.objects.get(work_order=underway_ticked, kind="step")
    when = dateformat.format(tick.recorded_at.astimezone(underway_ticked.site.zone), "d M Y H:i")
    assert f'<span class="tick-note" id="note-{lockout.anchor}" data-recorded="ticked by technician, {when}">' in shown
    assert sum(line.ticked for line in lines.steps + lines.points) == 2


def test_a_technician_gets_each_line_of_work_underway_as_a_form_to_tick(underway_ticked, users, client):
    client.force_login(users["technician"])
    page = client.get(underway_ticked.get_absolute_url()).content.decode()
    lines = checklist(underway_ticked)
    assert page.count(f'action="/workorders/{underway_ticked.pk}/tick/"') == len(lines.steps + lines.points)
    ticked_box = r'<input type="checkbox" name="ticked" value="1" checked aria-describedby="note-[^"]+">'
    assert len(re.findall(ticked_box, page)) == 2
    assert "tick-box" not in page


def test_a_tick_refused_on_an_order_no_longer_underway_is_said_at_its_line_read_without_a_form(
    underway_ticked, users, client
):
    """A technician's page loaded while the work was underway posts a tick after it was withdrawn: the page comes back
    at the line, which says why, and offers no form any more. (Its locks were taken back first: an order is not
    withdrawn with its locks on, workorders.services.withdraw_refusal.)"""
    lockout = next(line for line in checklist(underway_ticked).steps if line.is_lockout)
    checklist_tick_set(underway_ticked, ChecklistTick.Kind.STEP, lockout.key, False, users["technician"])
    point = checklist(underway_ticked).points[0]
    checklist_tick_set(underway_ticked, ChecklistTick.Kind.POINT, point.key, False, users["technician"])
    work_order_move(underway_ticked, "withdraw", users["engineer"], reason="Postponed to the next shutdown")
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{underway_ticked.pk}/tick/",
                           {"kind": "step", "key": lockout.key + 1, "text": "whatever", "ticked": "1"}, follow=True)
    page = response.content.decode()
    shown = _line(page, f"step-{lockout.key + 2}")
    assert '<span class="tick-note refused" role="alert"' in shown and "Not recorded:" in shown
    assert "<form" not in shown and f'action="/workorders/{underway_ticked.pk}/tick/"' not in page
