"""Work orders drafted or issued whose planned date has passed (workorders.selectors.late_orders). A year's review found
a draft held for a missing isolation point still listed in December for a planned date in January, with nothing on the
dashboard saying it was late or why, and the due digest never naming it."""
from __future__ import annotations

import datetime as dt

import pytest
from django.core import mail
from test_workorders import PLANNED, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.planning.digest import due_digest
from observatory_ops.planning.services import recoats_in_hand, site_today
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


def test_a_recoat_past_its_last_day_with_orders_still_to_do_is_said_running_late(users, client, telescope):
    """A year's review: on 31 Mar all four orders of a recoat planned for 15 to 26 Mar were still open, and the
    dashboard said "Downtime planned: No recoat planned"."""
    from conftest import mains_isolator

    from observatory_ops.calc.windows import RECOAT_PHASES
    from observatory_ops.mirrors import services as mirror_services
    from observatory_ops.mirrors.models import Mirror
    from observatory_ops.registry.models import Subsystem

    primary = Subsystem.objects.create(telescope=telescope, kind="primary_mirror", name="Primary mirror")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    mains_isolator(telescope)
    site = telescope.site
    today = site_today(site)
    plan = mirror_services.recoat_plan_create(mirror, today + dt.timedelta(days=3), list(RECOAT_PHASES), 3.5,
                                              users["engineer"])
    assert recoats_in_hand(site, today) == [plan]
    later = plan.ends_on + dt.timedelta(days=4)  # its window over, its orders still drafts
    assert recoats_in_hand(site, later) == [plan]
    # Time passes: the window and its orders' days are three weeks back, the orders still drafts.
    back = plan.starts_on - (today - dt.timedelta(days=20))
    type(plan).objects.filter(pk=plan.pk).update(starts_on=plan.starts_on - back, ends_on=plan.ends_on - back)
    for phase_order in plan.work_orders.all():
        type(phase_order).objects.filter(pk=phase_order.pk).update(planned_date=phase_order.planned_date - back)
    client.force_login(users["viewer"])
    page = client.get(site.get_absolute_url()).content.decode()
    assert ("Running late: the days its work orders are planned for have passed and some of them are still to do."
            in page)
    assert "Its mirror is not out, so the forecasts count its telescope in service" in page


def test_only_the_first_late_orders_are_read_for_what_holds_them(order, users, monkeypatch):  # noqa: F811
    """About five queries an order: a site of hundreds of forgotten drafts would cost its dashboard a thousand (a diff
    review). Beyond ``LATE_ORDERS_SAID`` they are said late without what holds them, and the digest counts them."""
    site = order.site
    today = site_today(site)
    monkeypatch.setattr(selectors, "LATE_ORDERS_SAID", 1)
    second = services.work_order_from_due(list(order.items.first().plan.subsystem.plans.all()), users["engineer"],
                                          PLANNED)
    IsolationPoint.objects.filter(telescope=order.telescope).delete()
    first, other = selectors.late_orders(site, today)
    assert "it cannot be issued" in first.text and other.text.endswith("ago, not issued")
    message = due_digest(site, today, ["engineer@example.org"])
    assert "... and 1 more late: " in message.body and second.number not in message.body
