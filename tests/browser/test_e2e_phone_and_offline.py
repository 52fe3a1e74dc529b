"""In a real browser: the pages reflow on a phone (390 CSS px), an upright tablet (800) and a desktop (1280) without
scrolling the whole page sideways (WCAG 2.1 SC 1.4.10, Reflow: content at 320 CSS px wide without scrolling in two
directions, data tables excepted, which scroll in a box of their own); the due list turns each row into a card on a
phone; on a touch screen its tick cells, fields and standalone links are 44 x 44 CSS px targets (SC 2.5.5); on paper
the buttons are left out; and a form sent while the server cannot be reached keeps what was typed
(observatory_ops/static/observatory_ops/forms.js).

Runs against pytest-django's live server (the demo observatory of fixtures_demo for the page sweep). Screenshots are
left behind for a person to look at; the tests never read them back.
"""
from __future__ import annotations

import datetime as dt
import re
import tempfile
from pathlib import Path

import pytest
from django.urls import reverse
from playwright.sync_api import Page, expect

SCREENSHOTS = Path(tempfile.gettempdir())
WIDTHS = (390, 800, 1280)
TARGET_PX = 44  # WCAG 2.1 SC 2.5.5
NOT_SENT = ("Not sent: no connection to the server. What you typed is still here; press again when the connection is "
            "back.")
TECHNICIAN = ("technician", "pw-technician-123456")


def _page_width(page: Page) -> int:
    return page.evaluate("document.documentElement.scrollWidth")


@pytest.mark.browser
def test_no_page_scrolls_sideways_on_a_phone_a_tablet_or_a_desktop(browser_page, live_server, login, demo):
    """The pages the review measured (dashboard 523 px wide on a 390 px phone, /workorders/ 811 px also at 800,
    a work order's history table 500, a subsystem page 670, the finish form's part selects 426) and the rest of ours
    with wide tables."""
    from observatory_ops.mirrors.models import Mirror
    from observatory_ops.registry.models import Subsystem
    from observatory_ops.workorders.models import WorkOrder

    page = browser_page
    technician = demo.usernames["technician"]
    login(page, live_server, technician, demo.passwords[technician])
    busiest = max(Subsystem.objects.filter(telescope__site=demo.site), key=lambda s: s.readings.count())
    mirror = Mirror.objects.filter(subsystem__telescope__site=demo.site).first()
    underway = WorkOrder.objects.filter(state="underway").first()
    urls = [
        demo.site.get_absolute_url(), reverse("due-list"), reverse("workorder-list"),
        WorkOrder.objects.order_by("pk").first().get_absolute_url(), reverse("workorder-finish", args=[underway.pk]),
        busiest.get_absolute_url(), mirror.get_absolute_url(), reverse("nights-list", args=[demo.site.slug]),
    ]
    wide = []
    for width in WIDTHS:
        page.set_viewport_size({"width": width, "height": 900})
        for url in urls:
            page.goto(live_server.url + url)
            if _page_width(page) > width:
                wide.append((width, url, _page_width(page)))
        page.goto(live_server.url + reverse("mirror-recoat", args=[mirror.pk]))
        page.get_by_role("button", name="Find windows").click()
        expect(page.locator("details.nights-table")).to_have_count(1)
        if _page_width(page) > width:
            wide.append((width, "recoat planner", _page_width(page)))
    assert not wide, f"pages wider than the window (window width, page, page width): {wide}"


# Each due-list row at a given width: how its cells are laid out and what the phone card's labels say.
_ROWS = """() => [...document.querySelectorAll("table.due-table tbody tr")].slice(0, 8).map(row => ({
  width: row.getBoundingClientRect().width, display: getComputedStyle(row).display,
  cells: [...row.cells].map(td => ({label: td.dataset.label || "", shown: getComputedStyle(td, "::before").content,
                                   width: td.getBoundingClientRect().width, text: td.innerText.trim()})),
}))"""


@pytest.mark.browser
def test_on_a_phone_each_due_item_is_a_card_of_labelled_lines(browser_page, live_server, login, demo):
    page = browser_page
    technician = demo.usernames["technician"]
    login(page, live_server, technician, demo.passwords[technician])
    page.set_viewport_size({"width": 390, "height": 844})
    page.goto(live_server.url + reverse("due-list"))
    page.screenshot(path=str(SCREENSHOTS / "e2e_due_list_390_cards.png"), full_page=True)
    rows = page.evaluate(_ROWS)
    assert rows
    for row in rows:
        assert row["width"] <= 390 - 2 * 16, f"a card fits the phone: {row}"
        labelled = [cell for cell in row["cells"] if cell["label"]]
        assert [c["label"] for c in labelled] == ["Site", "Telescope", "Subsystem", "Service", "Trigger",
                                                  "Now / limit", "Forecast", "Why"]
        for cell in labelled:  # each line says what it is: its header's words before its value
            assert cell["shown"].startswith(f'"{cell["label"]}"'), cell
            assert cell["text"] and cell["width"] > 200, f"a value reads across the card, not a letter a line: {cell}"
    # Sorting is still offered: the headers that sort are a line of links above the cards.
    expect(page.locator("table.due-table thead th.orderable a").first).to_be_visible()

    page.set_viewport_size({"width": 1280, "height": 800})
    page.goto(live_server.url + reverse("due-list"))
    assert all(row["display"] == "table-row" for row in page.evaluate(_ROWS)), "on a desktop it stays a table"


@pytest.mark.browser
def test_on_a_phone_each_work_order_is_a_card_with_its_number_and_state_first(browser_page, live_server, login, demo):
    """A review: the work order list scrolled sideways inside its box on a 390 px phone, its site, telescope, planned
    day and assignee out of sight. Each order is now a card as a due item is (workorders.tables, site.css)."""
    page = browser_page
    technician = demo.usernames["technician"]
    login(page, live_server, technician, demo.passwords[technician])
    page.set_viewport_size({"width": 390, "height": 844})
    page.goto(live_server.url + reverse("workorder-list") + "?state=all")
    page.screenshot(path=str(SCREENSHOTS / "e2e_workorder_list_390_cards.png"), full_page=True)
    rows = page.evaluate(_ROWS.replace("table.due-table", "table.card-table"))
    assert rows
    for row in rows:
        assert row["width"] <= 390 - 2 * 16, f"a card fits the phone: {row}"
        number, state, *rest = row["cells"]
        assert re.fullmatch(r"WO-\d{5}", number["text"]) and number["shown"] == "none" and state["shown"] == "none"
        assert [c["label"] for c in rest] == ["Title", "Site", "Telescope", "Planned", "Priority", "Assignee"]
        for cell in rest:
            assert cell["shown"].startswith(f'"{cell["label"]}"'), cell
    page.set_viewport_size({"width": 1280, "height": 800})
    page.goto(live_server.url + reverse("workorder-list"))
    assert all(row["display"] == "table-row" for row in page.evaluate(_ROWS.replace("table.due-table",
                                                                                     "table.card-table")))


@pytest.mark.browser
def test_on_a_phone_the_recoat_planners_tables_are_cards_of_labelled_lines(browser_page, live_server, login, demo):
    """A review: the recoat planner's windows, phase dates and nights scrolled sideways inside their boxes on a phone,
    their costs and crew days out of sight. Each row is now a card whose every line says what it is."""
    from observatory_ops.mirrors.models import Mirror

    page = browser_page
    engineer = demo.usernames["engineer"]
    login(page, live_server, engineer, demo.passwords[engineer])
    page.set_viewport_size({"width": 390, "height": 844})
    mirror = Mirror.objects.filter(subsystem__telescope__site=demo.site).first()
    page.goto(live_server.url + reverse("mirror-recoat", args=[mirror.pk]))
    page.get_by_role("button", name="Find windows").click()
    expect(page.locator("details.nights-table")).to_have_count(1)
    page.evaluate("document.querySelectorAll('details').forEach(d => d.open = true)")
    page.screenshot(path=str(SCREENSHOTS / "e2e_recoat_planner_390_cards.png"), full_page=True)
    rows = page.evaluate(_ROWS.replace("table.due-table", "table.card-lines"))
    assert rows
    for row in rows:
        assert row["width"] <= 390 - 2 * 16, f"a card fits the phone: {row}"
        for cell in row["cells"]:
            assert cell["label"] and cell["shown"].startswith(f'"{cell["label"]}"'), cell
    choose = page.locator("table.card-lines input[type=radio]").first
    expect(choose).to_be_visible()
    page.set_viewport_size({"width": 1280, "height": 800})
    assert all(row["display"] == "table-row" for row in page.evaluate(_ROWS.replace("table.due-table",
                                                                                     "table.card-lines")))


_BOXES = """els => els.filter(el => el.offsetParent !== null).map(el => {
  const r = el.getBoundingClientRect();
  return {what: el.outerHTML.slice(0, 90), width: r.width, height: r.height};
})"""


@pytest.mark.browser
def test_on_a_touch_screen_ticks_fields_and_standalone_links_are_44_px_targets(browser_page, live_server, demo):
    from playwright.sync_api import expect

    from observatory_ops.registry.models import Subsystem

    browser = browser_page.context.browser
    for width in (390, 800):
        context = browser.new_context(viewport={"width": width, "height": 900}, has_touch=True)
        try:
            page = context.new_page()
            page.goto(live_server.url + reverse("login"))
            technician = demo.usernames["technician"]
            page.get_by_label("User name").fill(technician)
            page.get_by_label("Password").fill(demo.passwords[technician])
            page.get_by_role("button", name="Sign in").click()
            expect(page.get_by_role("link", name="Due list", exact=True)).to_be_visible()
            assert page.evaluate("matchMedia('(pointer: coarse)').matches")
            subsystem = Subsystem.objects.filter(telescope__site=demo.site).first()
            for url in (reverse("due-list"), subsystem.get_absolute_url(),
                        reverse("reading-log", args=[subsystem.pk])):
                page.goto(live_server.url + url)
                boxes = page.locator(
                    ".due-table td.tick label, main select, main input:not([type=checkbox]):not([type=hidden]), "
                    ".topbar a, td a, li > a"
                ).evaluate_all(_BOXES)
                small = [box for box in boxes if box["width"] < TARGET_PX or box["height"] < TARGET_PX]
                assert boxes and not small, f"{url} at {width} px: {small}"
            # A tap anywhere in a due row's tick cell ticks its box.
            page.goto(live_server.url + reverse("due-list"))
            cell = page.locator(".due-table td.tick label").first
            size = cell.bounding_box()
            cell.tap(position={"x": size["width"] - 3, "y": size["height"] - 3})
            expect(cell.locator("input")).to_be_checked()
        finally:
            context.close()


@pytest.mark.browser
def test_printed_a_work_order_leaves_out_its_buttons_and_keeps_each_caution_whole(browser_page, live_server, login,
                                                                                  underway):
    page = browser_page
    login(page, live_server, *TECHNICIAN)
    page.goto(live_server.url + underway.get_absolute_url())
    expect(page.locator(".actions")).to_be_visible()
    page.emulate_media(media="print")
    expect(page.locator(".actions")).to_be_hidden()  # "Download PDF", "Finish and record"...
    expect(page.locator(".skip-link")).to_be_hidden()
    breaks = page.locator(".caution, .cautions").evaluate_all("els => els.map(el => getComputedStyle(el).breakInside)")
    assert breaks and set(breaks) == {"avoid"}, breaks


# --- Sending without a connection ---------------------------------------------------------------------------------

@pytest.fixture
def fans(transactional_db, users):
    """The cooling fans of a site in use, its due states computed (so each plan offers "Log service for this plan")."""
    from conftest import mains_isolator, site_in_use

    from observatory_ops.planning.services import site_recompute
    from observatory_ops.registry.models import Subsystem

    site = site_in_use("offline", kinds=("cooling_fans",))
    mains_isolator(site.telescopes.get())
    site_recompute(site)
    return Subsystem.objects.get(telescope__site=site)


@pytest.mark.browser
def test_a_reading_sent_without_a_connection_stays_on_the_page_and_is_sent_when_pressed_again(
    browser_page, live_server, login, fans
):
    from observatory_ops.logbook.models import Reading

    page = browser_page
    login(page, live_server, *TECHNICIAN)
    page.set_viewport_size({"width": 390, "height": 844})
    form_url = live_server.url + reverse("reading-log", args=[fans.pk])
    page.goto(form_url)
    page.get_by_label("Quantity").select_option("fan_current_a")
    page.locator("#id_value").fill("0.82")
    page.get_by_label("Note").fill("left fan, after cleaning")

    page.context.set_offline(True)
    page.get_by_role("button", name="Save reading").click()
    note = page.get_by_role("alert")
    expect(note).to_have_text(NOT_SENT)
    assert page.url == form_url  # not the browser's "No internet" page
    expect(page.locator("#id_value")).to_have_value("0.82")
    expect(page.get_by_label("Note")).to_have_value("left fan, after cleaning")
    assert page.evaluate("document.querySelector('.send-note').previousElementSibling.textContent") == "Save reading"
    assert not Reading.objects.exists()

    page.context.set_offline(False)
    page.get_by_role("button", name="Save reading").click()
    expect(page.locator(".messages")).to_contain_text("Reading logged")
    assert Reading.objects.get().note == "left fan, after cleaning"
    page.goto(form_url)  # sent and stored: nothing typed comes back
    expect(page.get_by_label("Note")).to_have_value("")
    expect(page.locator(".draft-note")).to_have_count(0)


@pytest.mark.browser
def test_what_was_typed_comes_back_after_a_send_lost_on_the_way_and_never_after_one_answered(
    browser_page, live_server, login, fans
):
    from observatory_ops.logbook.models import ServiceRecord

    page = browser_page
    login(page, live_server, *TECHNICIAN)
    plan = fans.plans.get(name="Replace fan filters")
    page.goto(live_server.url + fans.get_absolute_url())
    page.locator(f"#plan-{plan.pk}").get_by_role("link", name="Log service for this plan").click()
    expect(page.get_by_label("Summary")).to_have_value("Replace fan filters")  # from the plan
    page.get_by_label("Findings").fill("Both filters grey; replaced.")

    # The server answers the check, then the post is lost on the way: the browser's error page takes the form's place.
    page.route("**/service/new/**", lambda route: route.abort("internetdisconnected")
               if route.request.method == "POST" else route.continue_())
    page.get_by_role("button", name="Save record").click()
    expect(page).to_have_url(re.compile("^chrome-error:"))
    page.unroute("**/service/new/**")
    page.go_back()
    page.locator(f"#plan-{plan.pk}").get_by_role("link", name="Log service for this plan").click()
    expect(page.get_by_label("Findings")).to_have_value("Both filters grey; replaced.")
    expect(page.locator(".draft-note")).to_contain_text("What you typed here before is back")
    assert not ServiceRecord.objects.exists()

    # Refused by the server (a date to come): its problems are listed first, with the focus, and the title says so.
    page.get_by_label("Performed on").fill("2099-01-01")
    page.get_by_role("button", name="Save record").click()
    expect(page.locator("#error-summary")).to_be_focused()
    expect(page).to_have_title("Error: Log service: T1 Cooling fans · observatory_ops")
    expect(page.locator(".draft-note")).to_have_count(0)  # the server gave the form back with what was typed

    page.get_by_label("Performed on").fill(dt.date.today().isoformat())
    page.get_by_role("button", name="Save record").click()
    expect(page.locator(".messages")).to_contain_text("Service work logged")
    assert ServiceRecord.objects.get().findings == "Both filters grey; replaced."
    page.locator(f"#plan-{plan.pk}").get_by_role("link", name="Log service for this plan").click()
    expect(page.get_by_label("Findings")).to_have_value("")
    expect(page.locator(".draft-note")).to_have_count(0)


@pytest.mark.browser
def test_the_button_pressed_goes_with_the_form_after_the_check(browser_page, live_server, login, transactional_db,
                                                              users, telescope):
    from conftest import mains_isolator

    from observatory_ops.registry.services import subsystem_create
    from observatory_ops.workorders import services

    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    mains_isolator(telescope)
    order = services.work_order_from_due([fans.plans.get(name="Replace fan filters")], users["engineer"],
                                         planned_date=dt.date(2026, 6, 15))
    services.work_order_move(order, "issue", users["engineer"])
    page = browser_page
    login(page, live_server, *TECHNICIAN)
    page.goto(live_server.url + order.get_absolute_url())
    start = page.locator("button[name=go][value=start]")
    with page.expect_request(lambda request: request.method == "POST" and "/move/start/" in request.url) as sent:
        start.click()
    assert "go=start" in sent.value.post_data
    expect(page.locator(".messages")).to_be_visible()  # the answer to the move
    order.refresh_from_db()
    assert order.state == "underway"


@pytest.mark.browser
def test_the_nights_import_shows_its_progress_only_for_the_send_that_goes(browser_page, live_server, login, fans):
    page = browser_page
    login(page, live_server, *TECHNICIAN)
    page.goto(live_server.url + reverse("nights-import", args=[fans.telescope.site.slug]))
    page.set_input_files("input[type=file]", files=[{"name": "nights.csv", "mimeType": "text/csv",
                                                     "buffer": b"night,open_hours\n2026-05-01,3.5\n"}])
    page.context.set_offline(True)
    page.locator("#import-button").click()
    expect(page.get_by_role("alert")).to_have_text(NOT_SENT)
    # The page's own handler (it shows "Reading and checking the file" and holds the button) did not run.
    expect(page.locator("#import-progress")).to_be_hidden()
    expect(page.locator("#import-button")).to_be_enabled()

    page.context.set_offline(False)
    page.locator("#import-button").click()
    expect(page.locator(".messages")).to_contain_text("1")


@pytest.mark.browser
def test_a_send_from_one_form_of_a_page_forgets_what_was_typed_in_its_other_forms(
    browser_page, live_server, login, fans, users
):
    """A review: a withdraw reason half typed, then Issue pressed instead, came back on the order's page next time,
    offered as if it had not reached the server. Once the server answers a send, every draft of that page goes."""
    from observatory_ops.planning.services import site_today
    from observatory_ops.workorders import services

    order = services.work_order_from_due(list(fans.plans.all()), users["engineer"], site_today(fans.telescope.site))
    page = browser_page
    login(page, live_server, "engineer", "pw-engineer-123456")
    page.goto(live_server.url + order.get_absolute_url())
    page.get_by_label("Reason to withdraw").fill("drafted by mistake")
    page.get_by_role("button", name="Issue to the technicians").click()
    expect(page.locator(".messages")).to_contain_text("issue to the technicians: done")
    page.goto(live_server.url + order.get_absolute_url())
    expect(page.get_by_label("Reason to withdraw")).to_have_value("")
    expect(page.locator(".draft-note")).to_have_count(0)


@pytest.mark.browser
def test_what_was_typed_comes_back_in_a_new_tab_after_the_tab_was_closed(browser_page, live_server, login, fans):
    """A tablet review closed the finish form's tab and lost its findings: drafts were kept per tab. They are kept in
    the browser for the signed-in user, for a shift, until a send the server answers or signing out."""
    page = browser_page
    login(page, live_server, *TECHNICIAN)
    plan = fans.plans.get(name="Replace fan filters")
    page.goto(live_server.url + fans.get_absolute_url())
    page.locator(f"#plan-{plan.pk}").get_by_role("link", name="Log service for this plan").click()
    form_url = page.url
    page.get_by_label("Findings").fill("Left filter torn.")
    again = page.context.new_page()
    page.close()
    again.goto(form_url)
    expect(again.get_by_label("Findings")).to_have_value("Left filter torn.")
    expect(again.locator(".draft-note")).to_contain_text("What you typed here before is back")
    again.close()
