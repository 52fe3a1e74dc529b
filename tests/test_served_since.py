"""An order still to do whose plan was served since it was made says so beside that item: its work may be done already
(a recoat review's cleaning order still read "limit reached" after the new coating had restarted the cleaning plan,
and nothing on it said so)."""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.logbook.services import service_record_log
from observatory_ops.planning.services import site_today
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services

pytestmark = pytest.mark.django_db


def test_an_item_served_since_the_order_was_made_is_said_so_on_its_page(telescope, users, client):
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    plan = fans.plans.first()
    order = services.work_order_from_due([plan], users["engineer"])
    items = list(order.items.all())
    assert selectors.served_since(order, items) == {}
    today = site_today(telescope.site)
    # Done two days before the order was made, entered from paper after it (a diff review: dated before, missed).
    record = service_record_log(fans, plan, today - dt.timedelta(days=2), users["technician"],
                                "Done by hand on the night shift")
    assert selectors.served_since(order, items) == {items[0].pk: record}
    client.force_login(users["viewer"])
    page = client.get(order.get_absolute_url()).content.decode()
    assert (f"Logged since this order was made: \"Done by hand on the night shift\", dated "
            f"{today - dt.timedelta(days=2):%d %b %Y}, restarted this plan. This item may be done already") in page


def test_a_record_entered_before_the_order_was_made_is_not_said(telescope, users):
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=dt.date(2026, 1, 1))
    plan = fans.plans.first()
    service_record_log(fans, plan, site_today(telescope.site), users["technician"], "This morning, before the order")
    order = services.work_order_from_due([plan], users["engineer"])
    assert selectors.served_since(order, list(order.items.all())) == {}
