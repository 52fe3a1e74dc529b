"""In a real browser: the checklist's Record buttons are for pages without JavaScript.

With the script running, a changed box is recorded at once and the script hides the buttons (the hidden
attribute, which site.css must not override with its display rule for buttons); with JavaScript off,
every line keeps its Record button and pressing it records the tick.
"""
from __future__ import annotations

import pytest
from playwright.sync_api import expect


def _open_as_technician(page, live_server, login, order) -> None:
    login(page, live_server, "technician", "pw-technician-123456")
    page.goto(live_server.url + order.get_absolute_url())


@pytest.mark.browser
def test_with_javascript_the_record_buttons_are_hidden_and_a_box_records_at_once(
    browser_page, live_server, login, underway
):
    from observatory_ops.workorders.models import ChecklistTick

    page = browser_page
    _open_as_technician(page, live_server, login, underway)
    buttons = page.locator("form.tick button")
    expect(buttons).to_have_count(len(underway.step_list) + 1)
    for index in range(buttons.count()):
        expect(buttons.nth(index)).to_be_hidden()
    page.locator("#step-1 input[type=checkbox]").check()
    expect(page.locator("#step-1 .tick-note")).to_contain_text("ticked by technician")
    assert ChecklistTick.objects.filter(work_order=underway, step_index=0, ticked=True).exists()


@pytest.mark.browser
def test_with_javascript_locked_out_work_ticked_too_soon_says_why_beside_the_line_and_stays_unticked(
    browser_page, live_server, login, underway
):
    """The sequence of the lockout (OSHA 29 CFR 1910.147(d)): the fan filters (step 5) are changed locked out,
    after the lockout (step 4) and the isolation point."""
    from observatory_ops.workorders.models import ChecklistTick

    page = browser_page
    _open_as_technician(page, live_server, login, underway)
    page.locator("#step-5 input[type=checkbox]").click()  # not check(): the script unticks it again
    expect(page.locator("#step-5 .tick-note.refused")).to_have_text(
        "Not recorded: step 5 is done with the energy isolated: tick the lockout (step 4) and isolation point "
        "'Mount isolator' first."
    )
    # Said also in the page's one live region, there from the start (a screen reader announces it): an
    # accessibility review heard nothing of a refusal.
    expect(page.locator("#tick-said")).to_have_text(
        "Not recorded: step 5 is done with the energy isolated: tick the lockout (step 4) and isolation point "
        "'Mount isolator' first."
    )
    expect(page.locator("#step-5 input[type=checkbox]")).not_to_be_checked()
    assert not ChecklistTick.objects.filter(work_order=underway).exists()


@pytest.mark.browser
def test_with_javascript_a_refusal_is_said_until_anything_is_changed_again(browser_page, live_server, login, underway):
    """A technician's review: an old "Not recorded" stayed beside a line after its reason was dealt with. A refusal
    answers one change: the next change of any box puts the note back as recorded."""
    from observatory_ops.workorders.models import ChecklistTick, IsolationPoint

    page = browser_page
    point = IsolationPoint.objects.get(telescope=underway.telescope)
    _open_as_technician(page, live_server, login, underway)
    page.locator("#step-5 input[type=checkbox]").click()
    expect(page.locator("#step-5 .tick-note.refused")).to_contain_text("Not recorded: step 5 is done with")
    page.locator(f"#point-{point.pk} input[type=checkbox]").check()
    expect(page.locator(f"#point-{point.pk} .tick-note")).to_contain_text("ticked by technician")
    expect(page.locator("#step-5 .tick-note")).to_have_text("")
    expect(page.locator("#step-5 .tick-note")).not_to_have_class("tick-note refused")
    # The lockout asks first (a tap on its words ticks it): dismissed, nothing is recorded; accepted, it is.
    asked = []
    page.once("dialog", lambda dialog: (asked.append(dialog.message), dialog.dismiss()))
    page.locator("#step-4 input[type=checkbox]").click()
    expect(page.locator("#step-4 input[type=checkbox]")).not_to_be_checked()
    assert asked and asked[0].startswith("Record the lockout")
    assert not ChecklistTick.objects.filter(work_order=underway, step_index=3).exists()
    page.once("dialog", lambda dialog: dialog.accept())
    page.locator("#step-4 input[type=checkbox]").check()
    expect(page.locator("#step-4 .tick-note")).to_contain_text("ticked by technician")
    page.locator("#step-5 input[type=checkbox]").check()
    expect(page.locator("#step-5 .tick-note")).to_contain_text("ticked by technician")
    assert ChecklistTick.objects.filter(work_order=underway, step_index=4, ticked=True).exists()


@pytest.mark.browser
def test_with_javascript_the_lockout_is_not_taken_back_from_under_the_locked_out_work(
    browser_page, live_server, login, underway, users
):
    """The sequence of the lockout kept after the fact (OSHA 29 CFR 1910.147(d)): with the filters (step 5) ticked,
    the tick on the lockout (step 4) stays, and its box shows it ticked again."""
    from observatory_ops.workorders import services
    from observatory_ops.workorders.models import ChecklistTick, IsolationPoint

    point = IsolationPoint.objects.get(telescope=underway.telescope)
    services.checklist_tick_set(underway, "point", point.pk, True, users["technician"])
    for index in (3, 4):  # the lockout (step 4) and the filters changed under it (step 5)
        services.checklist_tick_set(underway, "step", index, True, users["technician"])
    page = browser_page
    _open_as_technician(page, live_server, login, underway)
    page.locator("#step-4 input[type=checkbox]").click()  # not uncheck(): the script ticks it again
    expect(page.locator("#step-4 .tick-note.refused")).to_contain_text(
        "Not recorded: the tick on step 4 stays: take back step 5 first: it was done with the energy isolated. "
        "(ticked by technician, "
    )
    expect(page.locator("#step-4 input[type=checkbox]")).to_be_checked()
    assert ChecklistTick.objects.filter(work_order=underway).count() == 3


@pytest.mark.browser
def test_without_javascript_every_line_has_a_visible_record_button_that_records(
    browser_page, live_server, login, underway
):
    from observatory_ops.workorders.models import ChecklistTick

    page = browser_page
    # A second context of the same browser, with scripts off.
    context = page.context.browser.new_context(java_script_enabled=False)
    try:
        plain = context.new_page()
        _open_as_technician(plain, live_server, login, underway)
        buttons = plain.locator("form.tick button")
        expect(buttons).to_have_count(len(underway.step_list) + 1)
        for index in range(buttons.count()):
            expect(buttons.nth(index)).to_be_visible()
        plain.locator("#step-2 input[type=checkbox]").check()
        plain.locator("#step-2 button").click()
        expect(plain.locator("#step-2 .tick-note")).to_contain_text("ticked by technician")
        assert ChecklistTick.objects.filter(work_order=underway, step_index=1, ticked=True).exists()
    finally:
        context.close()


@pytest.mark.browser
def test_with_no_connection_a_tick_stays_as_it_was_and_says_it_was_not_recorded(
    browser_page, live_server, login, underway
):
    """A review on dome Wi-Fi: ticking with the connection down threw the whole page away for the browser's error
    page (the script fell back to a plain post). The box goes back, the line says why, the page stays."""
    from observatory_ops.workorders.models import ChecklistTick

    page = browser_page
    _open_as_technician(page, live_server, login, underway)
    page.context.set_offline(True)
    try:
        page.locator("#step-1 input[type=checkbox]").click()
        expect(page.locator("#step-1 .tick-note.refused")).to_have_text(
            "No connection to the server: this tick was not kept. Tap again when it is back.")
        expect(page.locator("#step-1 input[type=checkbox]")).not_to_be_checked()
        expect(page.locator("h1")).to_contain_text(underway.number)  # still the order's page
    finally:
        page.context.set_offline(False)
    assert not ChecklistTick.objects.filter(work_order=underway).exists()
    page.locator("#step-1 input[type=checkbox]").check()  # tapped again with the connection back
    expect(page.locator("#step-1 .tick-note")).to_contain_text("ticked by technician")
