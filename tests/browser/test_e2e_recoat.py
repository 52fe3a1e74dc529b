"""End to end in a real browser (issue 5, item 6): an engineer reads the T70 primary mirror's decline and
crossing date, finds the cheapest recoat windows, chooses the second one and turns it into a recoat plan of
draft work orders; the removal carries the lifting figures and the suspended-load caution, and the site's
calendar file holds the window.

Runs against the demo observatory of fixtures_demo, served by pytest-django's live server. The calendar file
is parsed with the ``icalendar`` package; an all-day event's DTEND is the day after its last day
(RFC 5545, section 3.6.1).
"""
from __future__ import annotations

import datetime as dt
import re
import tempfile
from pathlib import Path

import pytest
from icalendar import Calendar
from playwright.sync_api import Page, expect

from observatory_ops.calc.windows import RECOAT_PHASES, total_days

SCREENSHOTS = Path(tempfile.gettempdir())
#: Used instead of the planner's default horizon (which ends near the crossing date) when that is too short
#: to hold two whole recoats, so there is a second window to choose.
LONG_HORIZON_DAYS = 365


def _shot(page: Page, name: str) -> None:
    """Left behind for a person to look at; the test never reads it back."""
    page.screenshot(path=str(SCREENSHOTS / f"e2e_recoat_{name}.png"), full_page=True)


def _t70_primary():
    from observatory_ops.mirrors.models import Mirror

    return Mirror.objects.select_related("subsystem__telescope__site").get(
        subsystem__name="Primary mirror", subsystem__telescope__name="T70"
    )


def _recoat_events(body: bytes) -> list:
    return [
        event for event in Calendar.from_ical(body).walk("VEVENT")
        if str(event.get("summary", "")).startswith("Recoat window")
    ]


@pytest.mark.browser
def test_engineer_chooses_the_second_window_and_gets_a_recoat_plan_of_draft_work_orders(
    browser_page, live_server, login, demo
):
    from observatory_ops.mirrors.models import RecoatPlan
    from observatory_ops.workorders.cautions import CAUTIONS
    from observatory_ops.workorders.models import State

    page = browser_page
    engineer = demo.usernames["engineer"]
    login(page, live_server, engineer, demo.passwords[engineer])
    mirror = _t70_primary()
    mirror_url = live_server.url + mirror.get_absolute_url()

    # The mirror page: the decline plot and the date the fit crosses the recoat line.
    page.goto(mirror_url)
    expect(page.get_by_role("heading", level=1)).to_contain_text("Primary mirror")
    expect(page.locator(".plot svg")).to_be_visible()
    crossing = page.locator(".panel", has_text="Crosses the line")
    expect(crossing.locator("strong")).to_have_text(re.compile(r"about \d{2} \w{3} \d{4}"))
    _shot(page, "1_mirror")

    # The planner: find windows with the default phases, see the calendar of nights and the windows.
    page.get_by_role("link", name="Plan the recoat window").click()
    expect(page.get_by_role("heading", name="Choose the recoat window")).to_be_visible()
    horizon = page.get_by_label("Horizon (days)")
    if int(horizon.input_value()) < 2 * total_days(RECOAT_PHASES):
        horizon.fill(str(LONG_HORIZON_DAYS))
    page.get_by_role("button", name="Find windows").click()
    expect(page.get_by_role("heading", name=re.compile(r"Cheapest windows for \d+ days of work"))).to_be_visible()
    if page.locator("input[type=radio][name=window]").count() < 2:
        # Some days of the year the default horizon holds one window only (the demo closes over the year's end and
        # the crew keeps weekends): look further ahead.
        page.get_by_label("Horizon (days)").fill(str(LONG_HORIZON_DAYS))
        page.get_by_role("button", name="Find windows").click()
        expect(page.locator(".calendar .night")).to_have_count(LONG_HORIZON_DAYS)
    expect(page.locator(".calendar .night")).to_have_count(int(page.get_by_label("Horizon (days)").input_value()))
    # A window loses its days of work and any crew days off inside it (the site's crew weekdays): its nights.
    nights = [int(n) for n in page.locator("table").first.locator("tbody tr td:nth-child(4)").all_inner_texts()]
    expect(page.locator(".calendar .night.chosen")).to_have_count(nights[0])
    radios = page.locator("input[type=radio][name=window]")
    assert radios.count() >= 2, "the planner should offer alternatives to the cheapest window"
    expect(radios.first).to_be_checked()
    _shot(page, "2_windows")

    # Choose the second window and plan the recoat in it.
    second = page.locator("table tbody tr").nth(1)
    second.get_by_role("radio").check()
    start = dt.date.fromisoformat(second.get_by_role("radio").get_attribute("value"))
    end = start + dt.timedelta(days=nights[1] - 1)
    expect(second.locator("td").nth(2)).to_have_text(end.strftime("%a %d %b %Y"))
    page.get_by_role("button", name="Plan the recoat in the chosen window").click()
    page.wait_for_url(lambda url: "/recoat/?" not in url)
    page.wait_for_load_state()
    if page.locator("#late-question").count():  # a window starting after the recoat plan is due asks first
        expect(page.locator("#late-question")).to_contain_text(f"The window from {start:%a %d %b %Y} starts")
        _shot(page, "2b_late_question")
        page.get_by_role("button", name="Plan it in this window anyway").click()

    expect(page).to_have_url(mirror_url)
    planned = re.compile(rf"Recoat planned {start:%d %b %Y} to {end:%d %b %Y}: \d+ draft work orders made")
    expect(page.locator(".messages")).to_contain_text(planned)
    plan = RecoatPlan.objects.get(mirror=mirror)
    assert (plan.starts_on, plan.ends_on) == (start, end)
    orders = list(plan.work_orders.order_by("planned_date"))
    assert len(orders) >= 4, "removal, strip and coat, reinstall and realignment each need a work order"
    assert all(o.state == State.DRAFT for o in orders)
    assert all(start <= o.planned_date <= end for o in orders)
    # The recoat's own orders (the list under its window; the other work its downtime could take follows it).
    links = page.locator("li", has_text=f"{start:%d %b %Y} to {end:%d %b %Y}").locator("ol").get_by_role("link")
    expect(links).to_have_text([o.number for o in plan.work_orders.order_by("planned_date", "pk")])  # in phase order
    _shot(page, "3_planned")

    # The removal: lifting figures in kg and lb, and the suspended-load caution before the steps.
    removal = next(o for o in orders if "removal" in o.title.lower())
    links.filter(has_text=removal.number).click()
    expect(page.get_by_role("heading", level=1)).to_contain_text("removal")
    expect(page.locator(".wo-state")).to_have_text(State.DRAFT.label)
    expect(page.get_by_role("heading", name="Lifting figures")).to_be_visible()
    load = page.locator("tr", has=page.locator("th", has_text="Total suspended load"))
    expect(load.locator("td")).to_have_text(re.compile(r"^[\d,.]+ kg \([\d,.]+ lb\)$"))
    suspended = CAUTIONS["suspended_load"]
    caution = page.locator("section.cautions .caution", has_text=suspended.title)
    expect(caution).to_contain_text(suspended.standard)
    _shot(page, "4_removal")

    # The site's calendar file, fetched in the signed-in context, has the window as an all-day event.
    page.goto(mirror_url)
    ics = page.get_by_role("link", name=re.compile(r"calendar file \(\.ics\)"))
    response = page.request.get(live_server.url + ics.get_attribute("href"))
    assert response.ok, f"the calendar file answered HTTP {response.status}"
    assert response.headers["content-type"].startswith("text/calendar")
    events = _recoat_events(response.body())
    assert len(events) == 1, f"expected one recoat window in the calendar, found {len(events)}"
    event = events[0]
    assert str(event["summary"]) == f"Recoat window: {mirror.subsystem.telescope.name} {mirror.subsystem.name}"
    assert event.decoded("dtstart") == start
    assert event.decoded("dtend") == end + dt.timedelta(days=1)
