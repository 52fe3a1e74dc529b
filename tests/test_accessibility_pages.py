"""A WCAG 2.2 AA review of the pages: what each finding asked for, as the HTML and the stylesheet carry it.

1. A figure the finish form questions is tied to its field (its message has an id the field's aria-describedby names,
   the field is aria-invalid) and the error summary links to the field (SC 1.3.1, 3.3.1).
2. The isolation answer's fieldset names its problem when it has one (SC 3.3.1).
3. No header hidden from screen readers where its column's words still show; the tick column has a header; the sort
   arrow is not read as part of the header (SC 1.3.1).
4. The dashboard's links under the open work orders are targets of at least 24 px, 44 px on a touch screen
   (SC 2.5.8; SC 2.5.5), and the weekly PDF says what it holds in words one can see, not in its tooltip only.
5., 6. The recoat calendar's Moon symbols and the mirror chart's key for cleanings read at 4.5:1 (SC 1.4.3).
7. Success and warning messages are in a status region; errors keep their alert (SC 4.1.3).
8. Titles that tell pages apart (SC 2.4.2).
9. Cautions present when a page loads are plain blocks, not alerts: an alert is for what a page adds after it loads
   (SC 4.1.3; WAI-ARIA 1.2, role alert).
10. No empty header cell (SC 1.3.1).

Outside sources: WCAG 2.2 (W3C Recommendation, 2023): SC 1.3.1, 1.4.3, 2.4.2, 2.5.5, 2.5.8, 3.3.1, 4.1.3, and its
definitions of contrast ratio and relative luminance, computed by hand in tests/test_accessible_pages.py; CSS Generated
Content Level 3 for the alternative text of ``content`` (``content: " x" / ""``). Orders are those of
tests/test_workorders.py (an axis drive with one AC isolation point).
"""
from __future__ import annotations

import datetime as dt
import html
import re
from pathlib import Path

import pytest
from crew_calendar import mirror_under_a_flat_sky
from test_accessible_pages import contrast, over
from test_work_alongside import fans_order  # noqa: F401  (fixture, used by name)
from test_workorder_finish import _post, _started
from test_workorders import drive, order  # noqa: F401  (fixtures, used by name)

import observatory_ops
from observatory_ops import charts
from observatory_ops.mirrors.plots import CLEANING
from observatory_ops.workorders import services

pytestmark = pytest.mark.django_db

PACKAGE = Path(observatory_ops.__file__).parent
CSS = (PACKAGE / "static" / "observatory_ops" / "site.css").read_text()


def _text(page: str) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", page)).split())


def _title(page: str) -> str:
    return html.unescape(re.search(r"<title>(.*?)</title>", page, flags=re.S).group(1)).strip()


# --- 1, 2. The finish form --------------------------------------------------------------------------------------------

def _settle_reading(order):  # noqa: F811
    return order.required_readings.get(quantity="settle_time_s")


def test_a_questioned_figure_is_named_by_its_field_and_linked_from_the_summary(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    settle = _settle_reading(order)
    # 400 h against an estimate of 2 h, and 5 s against a settle-time limit of at most 1 s: both questioned.
    page = client.post(f"/workorders/{order.pk}/finish/",
                       _post(order, actual_hours="400", **{f"reading_{settle.pk}": "5"})).content.decode()
    for name in ("actual_hours", f"reading_{settle.pk}"):
        message = re.search(rf'<strong class="beyond-limit" id="id_{name}_questioned">([^<]+)</strong>', page)
        assert message, name
        field = re.search(rf'<input[^>]*name="{name}"[^>]*>', page).group(0)
        assert 'aria-invalid="true"' in field
        described = re.search(r'aria-describedby="([^"]+)"', field).group(1).split()
        assert described == [f"id_{name}_helptext", f"id_{name}_questioned"]
        summary = re.search(r'<div class="error-summary" id="error-summary".*?</div>', page, flags=re.S).group(0)
        assert re.search(rf'<li><a href="#id_{name}">[^<]+</a>: ', summary), name
    assert "Not finished yet: 2 figures are questioned beside their fields" in html.unescape(page)
    # A field not questioned is not marked.
    assert 'aria-invalid' not in re.search(r'<input[^>]*name="crew"[^>]*>', page).group(0)


def test_the_isolation_answer_fieldset_names_its_problem_only_when_it_has_one(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    fieldset = r'<fieldset class="confirm isolation-answer" id="id_isolation_answer"[^>]*>'
    asked = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    assert "aria-describedby" not in re.search(fieldset, asked).group(0)
    data = _post(order)
    del data["isolation_answer"]
    page = client.post(f"/workorders/{order.pk}/finish/", data).content.decode()
    assert 'aria-describedby="id_isolation_answer_error"' in re.search(fieldset, page).group(0)
    assert '<ul class="errorlist" id="id_isolation_answer_error">' in page


# --- 3, 10. Headers ---------------------------------------------------------------------------------------------------

def _media_block(query: str) -> str:
    """The rules inside the stylesheet's first ``@media <query> {`` block."""
    start = CSS.index(f"@media {query} {{")
    depth, i = 0, CSS.index("{", start)
    for j in range(i, len(CSS)):
        depth += {"{": 1, "}": -1}.get(CSS[j], 0)
        if depth == 0:
            return CSS[i + 1:j]
    raise AssertionError(query)


def test_the_due_lists_why_header_stays_for_screen_readers_on_a_tablet():
    tablet = _media_block("(min-width: 601px) and (max-width: 1080px)")
    hiding = [rule for rule in re.findall(r"([^{}]+)\{([^}]*)\}", tablet) if "th:nth-child(10)" in rule[0]]
    assert hiding, "the Why header has a rule of its own"
    for _, body in hiding:
        assert "display:none" not in body.replace(" ", "")
        assert "position:absolute" in body and "clip-path:inset(50%)" in body


def test_the_due_lists_tick_column_has_a_header_for_screen_readers(users, client):
    client.force_login(users["technician"])
    page = client.get("/due/").content.decode()
    first = re.search(r'<thead role="rowgroup"><tr role="row">\s*(<th[^>]*>.*?</th>)', page, flags=re.S).group(1)
    assert first == '<th role="columnheader"><span class="visually-hidden">Tick for a work order</span></th>'


def test_the_sort_arrow_is_drawn_and_not_read():
    for arrow in ("25B2", "25BC"):
        rule = re.search(rf"th\.orderable\.\w+ a::after \{{([^}}]*\\{arrow}[^}}]*)\}}", CSS).group(1)
        # The old form first: a browser without alternative text for content keeps the arrow.
        assert rule.index(f'content:" \\{arrow}";') < rule.index(f'content:" \\{arrow}" / "";')


def test_the_subsystem_and_mirror_tables_name_their_link_columns(telescope, users, client):
    mirror = mirror_under_a_flat_sky(telescope, dt.date(2026, 12, 1), 5)
    client.force_login(users["technician"])
    subsystem_page = client.get(f"/subsystems/{mirror.subsystem.pk}/").content.decode()
    mirror_page = client.get(f"/mirrors/{mirror.pk}/").content.decode()
    for page in (subsystem_page, mirror_page):
        assert not re.search(r"<th>\s*</th>", page)
    assert '<th>By</th><th><span class="visually-hidden">Correct</span></th>' in subsystem_page  # Service history
    assert '<th>Note</th><th><span class="visually-hidden">Withdraw</span></th>' in subsystem_page  # Readings
    assert '<th>Source</th><th><span class="visually-hidden">Withdraw</span></th>' in mirror_page  # Measurements


# --- 4. The dashboard's links -----------------------------------------------------------------------------------------

def test_the_dashboards_work_order_links_are_targets_of_24_px_and_44_on_a_touch_screen(site, users, client):
    client.force_login(users["technician"])
    page = client.get(f"/sites/{site.slug}/").content.decode()
    links = re.search(r'<p class="panel-links">(.*?)</p>', page, flags=re.S).group(1)
    assert "New work order (fault, ad hoc)</a>" in links and "This week's work orders to do as one PDF</a>" in links
    # What the PDF holds, in words beside it as well as in its tooltip.
    assert 'as one PDF</a> <span class="muted">(issued or underway, planned from today to six days on)</span>' in links
    everywhere = re.search(r"\.panel-links a \{([^}]*)\}", CSS).group(1)
    assert "min-height:1.5rem" in everywhere  # 24 px at the page's 16 px
    touch = _media_block("(pointer: coarse)")
    rule = next(body for selectors, body in re.findall(r"([^{}]+)\{([^}]*)\}", touch) if ".panel-links a" in selectors)
    assert "min-height:2.75rem" in rule  # 44 px


# --- 5, 6. Contrast ---------------------------------------------------------------------------------------------------

def test_the_moon_symbols_read_on_the_darkest_night_and_on_the_hatching():
    # The darkest night is the accent at full strength (recoat.html: rgba(46,93,122,shade), shade at most 1,
    # mirrors.services); a booked night is hatched in white and --overdue.
    assert "rgba(46,93,122," in (PACKAGE / "mirrors" / "templates" / "mirrors" / "recoat.html").read_text()
    badge = re.search(r"\.calendar \.night :is\(\.day, \.moon\) \{([^}]*)\}", CSS).group(1)
    assert "background:rgba(255,255,255,.8)" in badge
    assert re.search(r"\.calendar \.night \{[^}]*color:#000;", CSS)
    for night in ("#2e5d7a", "#a3261b", "#ffffff"):
        assert contrast("#000000", over("#ffffff", 0.8, night)) >= 4.5, night
    assert contrast("#000000", "#2e5d7a") < 3  # as the review found it, without the badge


def test_the_cleanings_key_reads_at_4_5_to_1_on_the_chart_and_stays_apart_from_the_other_lines():
    # WCAG 2.2, 1.4.3 and the relative luminance definition: the key "dashed verticals: cleanings" is text.
    background = re.search(r'fill="(#[0-9a-f]{6})" stroke', Path(charts.__file__).read_text()).group(1)
    assert background == "#fbfbfa"
    assert contrast(CLEANING, background) >= 4.5
    assert contrast("#5f8a8a", background) < 4.5  # the colour the review measured at 3.69:1
    assert CLEANING not in {charts.INK, charts.MUTED, charts.ACCENT, charts.ALERT, charts.BAND, "#4a6b4a"}


# --- 7. Messages ------------------------------------------------------------------------------------------------------

def test_a_success_message_is_in_a_status_region(order, users, client):  # noqa: F811
    _started(order, users)
    client.force_login(users["technician"])
    page = client.post(f"/workorders/{order.pk}/finish/", _post(order), follow=True).content.decode()
    assert re.search(r'<div role="status"><ul class="messages"><li class="msg-success">', page)
    assert 'role="alert"' not in page[:page.index("<h1")]


# --- 8. Titles --------------------------------------------------------------------------------------------------------

def test_the_mirror_page_and_its_subsystem_page_have_titles_of_their_own(telescope, users, client):
    mirror = mirror_under_a_flat_sky(telescope, dt.date(2026, 12, 1), 5)
    client.force_login(users["viewer"])
    subsystem = _title(client.get(f"/subsystems/{mirror.subsystem.pk}/").content.decode())
    mirror_title = _title(client.get(f"/mirrors/{mirror.pk}/").content.decode())
    assert subsystem == "T1: Primary · observatory_ops"
    assert mirror_title == "T1: Primary: reflectance and recoating · observatory_ops"


def test_a_work_order_page_is_titled_with_its_title_and_state(order, users, client):  # noqa: F811
    client.force_login(users["viewer"])
    title = _title(client.get(f"/workorders/{order.pk}/").content.decode())
    assert title == f"{order.number}: {order.title} (draft) · observatory_ops"


# --- 9. Cautions present on load are not alerts -----------------------------------------------------------------------

def test_the_cautions_of_an_order_underway_are_plain_blocks(order, fans_order, drive, users, client):  # noqa: F811
    services.work_order_move(fans_order, "start", users["technician"])
    _started(order, users)
    drive.hazards = [*drive.hazards, "height"]  # gained after the order was made: the order lacks it
    drive.save()
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/").content.decode()
    for caution in ('<div class="caution" id="work-alongside">', '<div class="caution" id="hazards-missing">'):
        assert caution in page
    # The one alert left is the live region the tick script fills (ticks.js).
    assert re.findall(r'<[^>]*role="alert"[^>]*>', page) == [
        '<div id="tick-said" role="alert" style="position:absolute;left:-10000px;width:1px;height:1px;'
        'overflow:hidden">']
    finish = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    assert '<div class="caution" id="isolation-unticked">' in finish and 'id="hazards-lacking"' in finish
    assert 'role="alert"' not in finish


def test_the_telescope_out_notices_are_plain_blocks():
    # Shown on the dashboard, the due list and an order's page when the page loads (workorders.selectors).
    templates = PACKAGE / "workorders" / "templates" / "workorders"
    assert '<div class="caution telescope-out">' in (templates / "_telescopes_out.html").read_text()
    detail = (templates / "detail.html").read_text()
    assert '<div class="caution telescope-out"><p>' in detail
    assert "role=\"alert\"" not in (templates / "_telescopes_out.html").read_text()
