"""Refusals a screen reader must hear (an accessibility review, keyboard and screen reader): a checklist tick refused by
the page's script is said in one live region present from the start, each box is described by its note; a refusal
said as a message ("Not done: ...") puts "Error:" in the page's title and is an alert, as a form's problems are
(WCAG 2.1 SC 3.3.1 and 4.1.3)."""
from __future__ import annotations

import re

import pytest
from test_work_alongside import _issued
from test_workorders import drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.workorders import services

pytestmark = pytest.mark.django_db


def test_each_tick_box_is_described_by_its_note_and_the_page_has_one_live_region(order, users, client):  # noqa: F811
    underway = _issued(order, users)
    services.work_order_move(underway, "start", users["technician"])
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{underway.pk}/").content.decode()
    boxes = re.findall(r'<input type="checkbox" name="ticked" value="1"[^>]*aria-describedby="(note-[^"]+)"', page)
    assert boxes and all(f'id="{note}"' in page for note in boxes)
    assert page.count('id="tick-said" role="alert"') == 1
    assert 'aria-live="polite"' not in page  # the notes are described, not each a region of its own


def test_a_refusal_said_as_a_message_is_an_error_in_the_title_and_an_alert(order, users, client):  # noqa: F811
    client.force_login(users["engineer"])
    response = client.post(f"/workorders/{order.pk}/move/withdraw/", {"reason": "  "}, follow=True)
    page = response.content.decode()
    assert "Not done: say why the work order is withdrawn" in page
    assert re.search(r"<title>Error: ", page)
    assert re.search(r'<li class="msg-error[^"]*" tabindex="-1"><span role="alert">Not done: say why', page)
    success = client.post(f"/workorders/{order.pk}/move/withdraw/", {"reason": "drafted twice"}, follow=True)
    assert not re.search(r"<title>Error: ", success.content.decode())
