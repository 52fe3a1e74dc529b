"""On an upright tablet (800 x 1280 CSS px, touch) in a real browser: the work order's checklist and the two lists a
technician works from, after a tablet review.

- A double tap on a step's words records one tick: the line takes no tap while its tick is being sent, nor for a
  moment after it is recorded (the page's SETTLE_MS); a deliberate tap later takes the tick back. The page's clock is
  Playwright's fake one, paused, so the moment lasts until the test moves the clock on: nothing here depends on how
  fast the server answers.
- The lines still to do stand out; a ticked one is plain muted words, still 4.5:1 (WCAG 2.1 SC 1.4.3; the contrast
  ratio as tests/test_accessible_pages.py computes it from WCAG 2.1's definition).
- The lockout asks its question only when every isolation point on the page is ticked: with one unticked the server
  refuses the lockout and names the point, so the question would have the technician affirm a refused lockout.
- /workorders/ fits 768 px without scrolling sideways, an order's number on one line; on /due/ no word is broken
  across lines and each tick cell is a 44 x 44 px target (WCAG 2.1 SC 2.5.5).
"""
from __future__ import annotations

import re

import pytest
from django.urls import reverse
from playwright.sync_api import Page, expect
from test_accessible_pages import contrast

TABLET = {"width": 800, "height": 1280}
TARGET_PX = 44  # WCAG 2.1 SC 2.5.5
SETTLE_MS = 1000  # detail.html: how long a line takes no tap after its tick is recorded


@pytest.fixture
def tablet(browser_page) -> Page:
    """A page in a context of its own with a touch screen (``pointer: coarse``) at the tablet's size; fails the test
    on any uncaught page error, as ``browser_page`` does."""
    context = browser_page.context.browser.new_context(viewport=TABLET, has_touch=True)
    page = context.new_page()
    errors: list[str] = []
    page.on("pageerror", lambda error: errors.append(str(error)))
    try:
        yield page
    finally:
        context.close()
    assert not errors, f"page errors: {errors}"


def _open_as_technician(page: Page, live_server, login, order) -> None:
    login(page, live_server, "technician", "pw-technician-123456")
    page.goto(live_server.url + order.get_absolute_url())


def _tick_posts(page: Page) -> list[str]:
    """The tick requests the page sends, as they are sent."""
    sent: list[str] = []
    page.on("request", lambda request: sent.append(request.url)
            if request.method == "POST" and request.url.endswith("/tick/") else None)
    return sent


@pytest.mark.browser
def test_a_double_tap_on_a_steps_words_records_one_tick_and_a_later_tap_takes_it_back(
    tablet, live_server, login, underway
):
    from observatory_ops.workorders.models import ChecklistTick

    page = tablet
    page.clock.install()
    _open_as_technician(page, live_server, login, underway)
    page.clock.pause_at(page.evaluate("Date.now()") / 1000 + 60)  # no timer fires until the test moves the clock
    sent = _tick_posts(page)
    words = page.locator("#step-1 form.tick > label")
    box = page.locator("#step-1 input[type=checkbox]")

    words.tap()
    words.tap()  # the second tap of the double tap: the tick is in flight or has just been recorded
    expect(page.locator("#step-1 .tick-note")).to_contain_text("ticked by technician")
    expect(box).to_be_checked()
    assert [t.ticked for t in ChecklistTick.objects.filter(work_order=underway, step_index=0)] == [True]

    page.clock.run_for(SETTLE_MS + 500)
    words.tap()  # a deliberate untick, a moment later
    expect(page.locator("#step-1 .tick-note")).to_contain_text("tick taken back by technician")
    expect(box).not_to_be_checked()
    rows = ChecklistTick.objects.filter(work_order=underway, step_index=0).order_by("pk")
    assert [t.ticked for t in rows] == [True, False]
    assert len(sent) == 2, sent


@pytest.mark.browser
def test_the_lines_still_to_do_stand_out_and_a_ticked_line_is_quieter_but_readable(
    tablet, live_server, login, underway
):
    page = tablet
    _open_as_technician(page, live_server, login, underway)
    page.locator("#step-1 input[type=checkbox]").check()
    expect(page.locator("#step-1 .tick-note")).to_contain_text("ticked by technician")
    expect(page.locator("#step-1")).to_have_class(re.compile(r"\bticked\b"))

    def looks(anchor: str) -> dict:
        return page.locator(f"#{anchor} form.tick > label").evaluate(
            """label => {
              const hex = c => "#" + c.match(/\\d+/g).slice(0, 3).map(n => Number(n).toString(16).padStart(2, "0"))
                                                          .join("");
              let under = label;  // the first ancestor with a background of its own
              while (getComputedStyle(under).backgroundColor === "rgba(0, 0, 0, 0)") { under = under.parentElement; }
              return {weight: Number(getComputedStyle(label).fontWeight), colour: hex(getComputedStyle(label).color),
                      background: hex(getComputedStyle(under).backgroundColor)};
            }"""
        )

    done, to_do = looks("step-1"), looks("step-2")
    assert to_do["weight"] > done["weight"] == 400, (to_do, done)
    assert done["colour"] != to_do["colour"]
    assert contrast(done["colour"], done["background"]) >= 4.5, done  # WCAG 2.1 SC 1.4.3
    expect(page.locator("#step-1 input[type=checkbox]")).to_be_checked()  # the box says it too, not colour alone


@pytest.mark.browser
def test_the_lockout_asks_nothing_while_an_isolation_point_is_unticked_and_the_refusal_names_it(
    tablet, live_server, login, underway
):
    from observatory_ops.workorders.models import ChecklistTick, IsolationPoint

    page = tablet
    point = IsolationPoint.objects.get(telescope=underway.telescope)
    _open_as_technician(page, live_server, login, underway)
    asked: list[str] = []

    def answer(dialog) -> None:
        asked.append(dialog.message)
        dialog.accept()

    page.on("dialog", answer)
    lockout = page.locator("#step-4 input[type=checkbox]")
    lockout.click()  # not check(): the refusal unticks it again
    expect(page.locator("#step-4 .tick-note.refused")).to_contain_text("Not recorded:")
    expect(page.locator("#step-4 .tick-note.refused")).to_contain_text("'Mount isolator'")
    expect(lockout).not_to_be_checked()
    assert asked == []
    assert not ChecklistTick.objects.filter(work_order=underway).exists()

    # With every point ticked the question comes back, once.
    page.locator(f"#point-{point.pk} input[type=checkbox]").check()
    expect(page.locator(f"#point-{point.pk} .tick-note")).to_contain_text("ticked by technician")
    lockout.check()
    expect(page.locator("#step-4 .tick-note")).to_contain_text("ticked by technician")
    assert len(asked) == 1 and asked[0].startswith("Record the lockout")


# The work order list's box, and each number's lines of text (a number broken at its hyphen reads on two).
_ORDER_LIST = """() => {
  const box = document.querySelector(".table-container");
  const lines = el => { const r = document.createRange(); r.selectNodeContents(el); return r.getClientRects().length; };
  return {scrollWidth: box.scrollWidth, clientWidth: box.clientWidth,
          numbers: [...box.querySelectorAll("tbody td:first-child a")].map(a => [a.innerText, lines(a)]),
          headers: [...box.querySelectorAll("thead th")].filter(th => th.offsetParent !== null)
                   .map(th => th.innerText.trim())};
}"""
# Each word of the due list's visible cells that runs over two lines (a hyphen is a break of its own).
_BROKEN_WORDS = """() => {
  const broken = [];
  for (const td of document.querySelectorAll("table.due-table tbody td")) {
    if (td.offsetParent === null) { continue; }
    const walk = document.createTreeWalker(td, NodeFilter.SHOW_TEXT);
    for (let node = walk.nextNode(); node; node = walk.nextNode()) {
      for (const word of node.data.matchAll(/[^\\s\\-\\/]+/g)) {
        const r = document.createRange();
        r.setStart(node, word.index); r.setEnd(node, word.index + word[0].length);
        const tops = new Set([...r.getClientRects()].map(rect => Math.round(rect.top)));
        if (tops.size > 1) { broken.push(word[0]); }
      }
    }
  }
  return broken;
}"""
_TICK_CELLS = """els => els.map(el => { const r = el.getBoundingClientRect(); return [r.width, r.height]; })"""


def _lists_at_the_tablets_width(page: Page, live_server, login, demo) -> None:
    from observatory_ops.registry.models import Site

    # A longer word than the demo's own: the review read "Observator" / "y" in a font wider than the test's.
    Site.objects.filter(pk=demo.site.pk).update(name="Vestal Ridge Astrophysical Observatory")
    technician = demo.usernames["technician"]
    login(page, live_server, technician, demo.passwords[technician])

    page.goto(live_server.url + reverse("workorder-list") + "?state=all")
    shown = page.evaluate(_ORDER_LIST)
    assert shown["scrollWidth"] <= shown["clientWidth"], f"the list scrolls sideways at 800 px: {shown}"
    assert shown["numbers"] and all(lines == 1 for _, lines in shown["numbers"]), shown["numbers"]
    assert "Assignee" in shown["headers"] and "Number" in shown["headers"][0], shown["headers"]

    page.goto(live_server.url + reverse("due-list"))
    assert page.evaluate(_BROKEN_WORDS) == []
    box = page.locator(".table-scroll").evaluate("el => [el.scrollWidth, el.clientWidth]")
    assert box[0] <= box[1], f"the due list scrolls sideways at 800 px: {box}"
    cells = page.locator(".due-table td.tick label").evaluate_all(_TICK_CELLS)
    assert cells and all(width >= TARGET_PX and height >= TARGET_PX for width, height in cells), cells


@pytest.mark.browser
def test_on_a_touch_tablet_the_lists_fit_with_numbers_and_words_whole(tablet, live_server, login, demo):
    assert tablet.evaluate("matchMedia('(pointer: coarse)').matches")
    _lists_at_the_tablets_width(tablet, live_server, login, demo)


@pytest.mark.browser
def test_on_a_tablet_with_a_fine_pointer_the_lists_fit_and_the_due_ticks_are_44_px(browser_page, live_server, login,
                                                                                   demo):
    """A tablet with its keyboard cover on reports a fine pointer: the tick cells stay finger-sized."""
    browser_page.set_viewport_size(TABLET)
    assert not browser_page.evaluate("matchMedia('(pointer: coarse)').matches")
    _lists_at_the_tablets_width(browser_page, live_server, login, demo)
