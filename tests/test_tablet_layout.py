"""What the pages give the stylesheet and the checklist's script for an upright tablet (800 x 1280 CSS px), after a
tablet review; the browser checks of the same are in tests/browser/test_e2e_tablet_ticks.py.

Outside source: WCAG 2.1 SC 1.4.3 (text 4.5:1), with the contrast ratio computed from WCAG 2.1's definition in
tests/test_accessible_pages.py.
"""
from __future__ import annotations

import html
import re
from pathlib import Path

import pytest
from test_accessible_pages import CSS, contrast
from test_workorders import PLANNED, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.workorders import services

pytestmark = pytest.mark.django_db


def _colour(name: str) -> str:
    """The stylesheet's colour variable ``--name`` as "#rrggbb" ("#fff" written short)."""
    value = re.search(rf"--{name}:\s*#([0-9a-f]{{6}}|[0-9a-f]{{3}})\b", CSS.read_text()).group(1)
    return "#" + (value if len(value) == 6 else "".join(c * 2 for c in value))


def _rule(selector: str) -> str:
    """The declarations of the stylesheet's one rule for ``selector``."""
    found = re.findall(rf"(?:^|\n)\s*{re.escape(selector)} \{{([^}}]*)\}}", CSS.read_text())
    assert len(found) == 1, f"{selector!r}: {found}"
    return found[0]


def test_an_order_number_is_a_link_on_one_line_and_the_site_column_is_marked_to_leave_out(order, users, client):  # noqa: F811
    client.force_login(users["technician"])
    page = client.get("/workorders/").content.decode()
    assert f'<a class="nowrap" href="{order.get_absolute_url()}">{order.number}</a>' in page
    assert re.search(r'<th [^>]*class="order-site orderable"', page)
    assert re.search(rf'<td data-label="Site" class="order-site">{re.escape(html.escape(order.site.name))}</td>', page)
    assert "white-space:nowrap" in _rule(".nowrap, .on-order a")


def test_the_site_column_is_left_out_only_between_a_phone_and_a_desktop():
    sheet = CSS.read_text()
    tablet = re.search(r"@media screen and \(min-width: 601px\) and \(max-width: 1080px\) \{\n(.*?)\n\}", sheet, re.S)
    assert tablet and tablet.group(1).strip() == ".card-table .order-site { display:none; }"
    assert sheet.count(".order-site") == 1


def test_a_ticked_lines_muted_words_keep_aa_contrast_on_the_page_and_on_the_lockouts_panel():
    ticked = _rule(".checklist li.ticked :is(form.tick > label, .tick > .tick-words)")
    assert "font-weight:400" in ticked and "color:var(--muted)" in ticked
    assert "font-weight:600" in _rule(".checklist :is(form.tick > label, .tick > .tick-words)")
    for background in ("bg", "panel"):  # the page, and the lockout line's own white
        assert contrast(_colour("muted"), _colour(background)) >= 4.5, background


def test_the_checklists_script_finds_the_lockout_and_the_isolation_points_it_looks_at(order, users, client):  # noqa: F811
    """The order page's script (ticks.js) skips the lockout's question while a box under #isolation is unticked, and
    tells the lockout by its line's class lockout-line."""
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    client.force_login(users["technician"])
    page = client.get(order.get_absolute_url()).content.decode()
    assert '<ul class="checklist" id="isolation">' in page
    lockout = re.search(r'<li id="step-\d+" class="[^"]*\blockout-line"><form [^>]*class="tick" data-confirm="([^"]*)"',
                        page)
    assert lockout and html.unescape(lockout.group(1)).startswith("Record the lockout")
    assert "observatory_ops/ticks.js" in page  # the page's script, a static file (observatory_ops/content_policy.py)
    script = (Path(__file__).resolve().parent.parent / "observatory_ops/static/observatory_ops/ticks.js").read_text()
    assert 'form.closest(".lockout-line")' in script and '#isolation input[type=checkbox]:not(:checked)' in script
