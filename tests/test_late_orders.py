"""Work orders drafted or issued whose planned date has passed (workorders.selectors.late_orders). A year's review found
a draft held for a missing isolation point still listed in December for a planned date in January, with nothing on the
dashboard saying it was late or why, and the due digest never naming it."""
from __future__ import annotations

import datetime as dt

import pytest
from django.core import mail
from test_workorders import PLANNED, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.planning.digest import due_digest
from observatory_ops.planning.services import site_today
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.models import IsolationPoint

pytestmark = pytest.mark.django_db


def test_a_late_order_held_for_a_missing_point_says_how_late_and_why_on_the_dashboard_and_in_the_digest(
    order, users, client  # noqa: F811
):
    site = order.site
    today = site_today(site)
    assert PLANNED < today
    IsolationPoint.objects.filter(telescope=order.telescope).delete()  # its electricity has no point now
    days = (today - PLANNED).days
    [late] = selectors.late_orders(site, today)
    assert late.order == order
    assert late.text.startswith(f"late: planned {PLANNED:%d %b %Y}, {days} days ago, not issued; it cannot be "
                                "issued: ")
    client.force_login(users["viewer"])
    page = client.get(site.get_absolute_url()).content.decode()
    assert f'<div class="caution late-order"><strong>late: planned {PLANNED:%d %b %Y}, {days} days ago' in page
    message = due_digest(site, today, ["engineer@example.org"])
    assert "work order late" in message.subject and "WORK ORDERS LATE" in message.body
    assert f"* {order.number} {order.title}\n  late: planned {PLANNED:%d %b %Y}" in message.body


def test_an_order_on_time_or_started_is_not_late(order, users):  # noqa: F811
    site = order.site
    today = site_today(site)
    services.work_order_move(order, "issue", users["engineer"])
    assert selectors.late_orders(site, PLANNED) == []  # on its planned day it is not late yet
    assert [late.order for late in selectors.late_orders(site, PLANNED + dt.timedelta(days=1))] == [order]
    services.work_order_move(order, "start", users["technician"])
    assert selectors.late_orders(site, today) == []
    assert not mail.outbox
