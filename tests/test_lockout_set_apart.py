"""The lockout step is set apart from the other steps. A safety review found it looked like any other step on the
page and on paper: on the page it is marked "Lockout:" (its line carries the class ``lockout-line``), on paper it is
marked the same way and printed in bold (see pdf._checklist_line)."""
from __future__ import annotations

import html
import re

import pytest
from test_workorder_pdf import flat, page_texts
from test_workorders import drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.pdf import render_sheet

pytestmark = pytest.mark.django_db


def test_the_lockout_step_is_marked_on_the_page_and_no_other_is(order, users, client):  # noqa: F811
    lockout = [line for line in selectors.checklist(order).steps if line.is_lockout]
    assert len(lockout) == 1 and lockout[0].text == services.LOCKOUT_STEP
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/").content.decode()
    marked = re.findall(r'<li id="(step-\d+)" class="[^"]*lockout-line[^"]*">', page)
    assert marked == [lockout[0].anchor]
    line = html.unescape(page.split(f'id="{lockout[0].anchor}"')[1].split("</li>")[0])
    assert re.search(r"Lockout:</strong> Isolate, lock and tag", line)
    assert page.count("Lockout:</strong>") == 1


def test_the_lockout_step_is_marked_on_paper_as_on_the_page_and_no_other_is(order):  # noqa: F811
    paper = flat(" ".join(page_texts(render_sheet(selectors.sheet(order, "https://ops.example/")))))
    assert paper.count("Lockout:") == 1
    assert f"Lockout: {flat(services.LOCKOUT_STEP)}" in paper
