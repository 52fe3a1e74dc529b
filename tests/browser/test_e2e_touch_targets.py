"""In a real browser, on an upright tablet (800 x 1280 CSS px): the work order's checklist rows, the buttons of
its page and the finish form's confirmation are touch targets of at least 44 x 44 CSS px (WCAG 2.1 success
criterion 2.5.5, Target Size: 44 by 44 CSS pixels). A checkbox's target is its label, which toggles it, so the
row is measured; a tap on the row's words ticks the box. Printed, the page keeps its compact checklist: the
screen's touch-target rules do not apply on paper.

Screenshots are left behind for a person to look at; the test never reads them back.
"""
from __future__ import annotations

import tempfile
from pathlib import Path

import pytest
from playwright.sync_api import Page, expect

SCREENSHOTS = Path(tempfile.gettempdir())
TARGET_PX = 44  # WCAG 2.1 SC 2.5.5
TABLET = {"width": 800, "height": 1280}

# Each visible element's bounding box (CSS px), with what it is, for the failure message.
_BOXES = """els => els.filter(el => el.offsetParent !== null).map(el => {
  const r = el.getBoundingClientRect();
  return {what: el.outerHTML.slice(0, 90), width: r.width, height: r.height};
})"""


def _boxes(page: Page, selector: str) -> list[dict]:
    boxes = page.locator(selector).evaluate_all(_BOXES)
    assert boxes, f"nothing visible matches {selector!r}"
    return boxes


def _too_small(boxes: list[dict]) -> list[dict]:
    return [box for box in boxes if box["width"] < TARGET_PX or box["height"] < TARGET_PX]


def _open(page: Page, live_server, login, url: str) -> None:
    login(page, live_server, "technician", "pw-technician-123456")
    page.set_viewport_size(TABLET)
    page.goto(live_server.url + url)


@pytest.mark.browser
def test_on_a_tablet_each_checklist_row_and_every_button_is_a_44_px_target(browser_page, live_server, login, underway):
    from observatory_ops.workorders.models import ChecklistTick

    page = browser_page
    _open(page, live_server, login, underway.get_absolute_url())
    page.screenshot(path=str(SCREENSHOTS / "e2e_touch_targets_checklist.png"), full_page=True)
    rows = _boxes(page, ".checklist form.tick > label")
    assert len(rows) == len(underway.step_list) + 1  # every step and the one isolation point
    assert not _too_small(rows), _too_small(rows)
    buttons = _boxes(page, "main button, main .button")
    assert any("Finish and record" in box["what"] for box in buttons)
    assert not _too_small(buttons), _too_small(buttons)

    # The row is the box's target: a tap on its words, well to the right of the box, ticks it.
    words = page.locator("#step-1 form.tick > label")
    size = words.bounding_box()
    words.click(position={"x": size["width"] * 0.6, "y": size["height"] / 2})
    expect(page.locator("#step-1 input[type=checkbox]")).to_be_checked()
    expect(page.locator("#step-1 .tick-note")).to_contain_text("ticked by technician")
    assert ChecklistTick.objects.filter(work_order=underway, step_index=0, ticked=True).exists()


@pytest.mark.browser
def test_without_javascript_the_record_buttons_are_44_px_targets(browser_page, live_server, login, underway):
    context = browser_page.context.browser.new_context(java_script_enabled=False, viewport=TABLET)
    try:
        plain = context.new_page()
        _open(plain, live_server, login, underway.get_absolute_url())
        record = _boxes(plain, "form.tick button")
        assert len(record) == len(underway.step_list) + 1
        assert not _too_small(record), _too_small(record)
    finally:
        context.close()


@pytest.mark.browser
def test_the_finish_forms_confirmation_is_a_44_px_target(browser_page, live_server, login, underway):
    page = browser_page
    _open(page, live_server, login, f"/workorders/{underway.pk}/finish/")  # nothing ticked: it asks to confirm
    page.screenshot(path=str(SCREENSHOTS / "e2e_touch_targets_finish.png"), full_page=True)
    confirm = _boxes(page, ".form label.confirm")
    assert not _too_small(confirm), _too_small(confirm)
    buttons = _boxes(page, "main button")
    assert not _too_small(buttons), _too_small(buttons)


@pytest.mark.browser
def test_printed_the_checklist_stays_compact(browser_page, live_server, login, underway):
    page = browser_page
    _open(page, live_server, login, underway.get_absolute_url())
    page.emulate_media(media="print")
    printed = page.locator(".checklist form.tick > label").evaluate_all(
        "els => els.map(el => [getComputedStyle(el).display, getComputedStyle(el).minHeight, "
        "getComputedStyle(el.querySelector('input')).width])"
    )
    # As before the touch targets: the label runs inline, no minimum height, the box at its own 13 px size.
    assert printed and all(row == ["inline", "0px", "13px"] for row in printed), printed
    expect(page.locator("form.tick button").first).to_be_hidden()  # the Record buttons are not printed
