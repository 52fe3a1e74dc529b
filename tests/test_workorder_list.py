"""The work-order list opens on the work still to do. A technician looking for today's work on a tablet saw eleven
countersigned orders first; finished, countersigned and withdrawn ones are a choice of the State filter away."""
from __future__ import annotations

import pytest
from test_workorders import PLANNED, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.workorders import services
from observatory_ops.workorders.models import WorkOrder

pytestmark = pytest.mark.django_db


def _numbers(client, query: str = "") -> set[str]:
    page = client.get("/workorders/" + query).content.decode()
    return {o.number for o in WorkOrder.objects.all() if f">{o.number}<" in page}


def test_the_list_shows_the_work_still_to_do_unless_asked_for_more(order, drive, users, client):  # noqa: F811
    gone = services.work_order_from_due(list(drive.plans.all()), users["engineer"], PLANNED)
    services.work_order_move(gone, "withdraw", users["engineer"], reason="drafted twice")
    client.force_login(users["technician"])
    assert _numbers(client) == {order.number}
    assert 'selected>still to do (draft, issued, underway)</option>' in client.get("/workorders/").content.decode()
    assert _numbers(client, "?state=all") == {order.number, gone.number}
    assert _numbers(client, "?state=withdrawn") == {gone.number}
    assert _numbers(client, "?state=draft") == {order.number}
