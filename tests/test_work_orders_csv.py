"""The work-order list's finished work for a report: "Done from" and "Done to" choose orders by the day their work was
done, and the CSV gives every order the filters choose with that day and its hours (a manager's review opened each
order to find last month's work and hours)."""
from __future__ import annotations

import csv
import datetime as dt
import io

import pytest
from test_workorders import _confirmed, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.planning.services import site_today
from observatory_ops.workorders import services

pytestmark = pytest.mark.django_db


def _finished(order, users, day: dt.date, hours: float):  # noqa: F811
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    services.work_order_finish(order, users["technician"], hours, "done", {r.pk: 0.9 for r in
                               order.required_readings.all()}, work_done_on=day, **_confirmed(order))


def test_the_csv_gives_the_finished_work_of_a_period_with_its_day_and_hours(order, users, client):  # noqa: F811
    done = site_today(order.site)  # not before the day it was issued
    _finished(order, users, done, 2.5)
    client.force_login(users["viewer"])
    query = {"state": "all", "done_from": done.isoformat(), "done_to": done.isoformat()}
    page = client.get("/workorders/", query).content.decode()
    assert order.number in page and "These orders as CSV" in page
    response = client.get("/workorders.csv", query)
    rows = list(csv.DictReader(io.StringIO(response.content.decode("utf-8-sig"))))
    assert [(r["number"], r["state"], r["work_done_on"], r["actual_hours"]) for r in rows] == [
        (order.number, "finished, awaiting countersignature", done.isoformat(), "2.5")]
    assert rows[0]["subsystems"].endswith(order.items.first().subsystem.name)
    before = {"state": "all", "done_to": (done - dt.timedelta(days=1)).isoformat()}
    assert list(csv.DictReader(io.StringIO(client.get("/workorders.csv", before).content.decode("utf-8-sig")))) == []
    refused = client.get("/workorders.csv", {"done_from": "2026-02-30"})
    assert refused.status_code == 400
    # Named by its label, on the list too, which it leaves empty (a walk-through's empty list said nothing).
    why = "Done from &#x27;2026-02-30&#x27;: 2026-02-30 is no such date: February 2026 has 28 days"
    assert f"The filters cannot be applied: {why}" in refused.content.decode()
    listed = client.get("/workorders/", {"done_from": "2026-02-30"}).content.decode()
    assert f"No orders are listed: {why}" in listed
    assert order.number not in listed  # a diff review saw every order listed under it
