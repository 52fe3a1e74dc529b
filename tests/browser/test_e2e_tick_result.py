"""On a tablet in a real browser: a step that asks for its result (the realignment's check of the collimation on a
star) is refused without it, the box going back as it was, and recorded with it; the note says the result and its box
goes (tests/test_tick_result.py holds the rule)."""
from __future__ import annotations

import pytest
from playwright.sync_api import expect

CHECK = "Under power, from the control panel, check the collimation on a star and record the result."


@pytest.fixture
def realignment(transactional_db, users, site, telescope):
    from observatory_ops.workorders.models import WorkOrder

    return WorkOrder.objects.create(site=site, telescope=telescope, title="Realign after the recoat",
                                    created_by=users["engineer"], steps="\n".join(["Park the telescope", CHECK]),
                                    state="underway")


@pytest.mark.browser
def test_the_check_is_refused_without_its_result_and_recorded_with_it(browser_page, live_server, login, realignment):
    from observatory_ops.workorders.models import ChecklistTick

    page = browser_page
    login(page, live_server, "technician", "pw-technician-123456")
    page.goto(live_server.url + realignment.get_absolute_url())
    box = page.locator("#step-2 input[type=checkbox]")
    note = page.locator("#step-2 .tick-note")
    result = page.get_by_label("Result, before ticking")
    expect(result).to_be_visible()
    expect(page.locator("#step-1 .tick-result")).to_have_count(0)

    box.click()  # not check(): the box goes back when the tick is refused, which check() may see as a failed click
    expect(note).to_contain_text("step 2 asks for its result")
    expect(box).not_to_be_checked()
    assert not ChecklistTick.objects.filter(work_order=realignment).exists()

    result.fill("coma under 1 arcsec")
    box.check()
    expect(note).to_contain_text("result: coma under 1 arcsec")
    expect(box).to_be_checked()
    expect(result).to_be_hidden()
    assert ChecklistTick.objects.get(work_order=realignment).result == "coma under 1 arcsec"


@pytest.mark.browser
def test_enter_in_the_result_box_ticks_the_step(browser_page, live_server, login, realignment):
    """A diff review pressed Enter in the box: the form went as a plain post with its box unticked, and the result
    was lost."""
    from observatory_ops.workorders.models import ChecklistTick

    page = browser_page
    login(page, live_server, "technician", "pw-technician-123456")
    page.goto(live_server.url + realignment.get_absolute_url())
    result = page.get_by_label("Result, before ticking")
    result.fill("spot centred within 2 px")
    result.press("Enter")
    expect(page.locator("#step-2 .tick-note")).to_contain_text("result: spot centred within 2 px")
    expect(page.locator("#step-2 input[type=checkbox]")).to_be_checked()
    assert ChecklistTick.objects.get(work_order=realignment).result == "spot centred within 2 px"
    page.wait_for_timeout(1500)  # the line takes no tap for a moment after its tick is recorded (ticks.js SETTLE_MS)
    page.locator("#step-2 input[type=checkbox]").uncheck()  # taken back: no result sent with it
    expect(page.locator("#step-2 .tick-note")).to_contain_text("tick taken back")


@pytest.mark.browser
def test_enter_in_the_empty_result_box_says_what_it_waits_for(browser_page, live_server, login, realignment):
    """Enter with nothing typed said nothing (ticks.js); now the line's note says what to do, and nothing is sent."""
    from observatory_ops.workorders.models import ChecklistTick

    page = browser_page
    login(page, live_server, "technician", "pw-technician-123456")
    page.goto(live_server.url + realignment.get_absolute_url())
    page.get_by_label("Result, before ticking").press("Enter")
    expect(page.locator("#step-2 .tick-note")).to_have_text("Type the result first, then press Enter or tick the line.")
    expect(page.locator("#step-2 input[type=checkbox]")).not_to_be_checked()
    assert not ChecklistTick.objects.filter(work_order=realignment).exists()
