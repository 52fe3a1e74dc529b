"""A part used that the order did not plan is recorded when the work is finished.

A reviewer's technician replaced a fan on an inspection order and could not say so: the finish form listed only the
planned parts, and only an engineer adds lines, while the order is a draft or issued. The finish form has a few rows
for other parts of the site's register; each used part gets a line of its own (planned 0) and is taken from the
register as the planned ones are, with a shortfall kept when the register held too few.
"""
# ruff: noqa: F811  (the fixtures imported by name below are the tests' parameters)
from __future__ import annotations

import pytest
from test_workorder_finish import _nothing_stored, _post, _text  # noqa: F401
from test_workorder_finish_record import filters  # noqa: F401  (a fixture, used by name)
from test_workorders import _all_readings, _confirmed, drive, order  # noqa: F401

from observatory_ops.registry.models import Site
from observatory_ops.workorders import services
from observatory_ops.workorders.models import Part, PartUse, State, WorkOrder
from tests.conftest import parts_as_planned

pytestmark = pytest.mark.django_db


@pytest.fixture
def fan(site):
    return Part.objects.create(site=site, name="Cell fan 80 mm", part_number="FAN-80", quantity_on_hand=2,
                               reorder_point=1)


def test_an_unplanned_part_is_recorded_on_finishing_and_taken_from_the_register(order, filters, fan, users,
                                                                                 client):
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    assert "Other part used (1)" in page and "Cell fan 80 mm" in page
    planned = PartUse.objects.get(part=filters)
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, **{f"part_{planned.pk}": "1"},
                                                                   other_part_1=fan.pk, other_quantity_1="3"))
    assert response.status_code == 302, _text(response)[-1500:]
    added = PartUse.objects.get(work_order=order, part=fan)
    assert (added.quantity_planned, added.quantity_used, added.quantity_short) == (0, 3, 1)  # the register held 2
    fan.refresh_from_db()
    assert fan.quantity_on_hand == 0
    assert WorkOrder.objects.get(pk=order.pk).state == State.FINISHED


def test_a_part_without_how_many_or_how_many_without_a_part_is_named_and_nothing_is_stored(order, filters, fan, users,
                                                                                            client):
    client.force_login(users["technician"])
    shown = _text(client.post(f"/workorders/{order.pk}/finish/", _post(order, other_part_1=fan.pk)))
    assert "How many (1): enter how many of Cell fan 80 mm were used." in shown
    shown = _text(client.post(f"/workorders/{order.pk}/finish/", _post(order, other_quantity_2="1")))
    assert "Other part used (2): choose the part, or leave how many empty." in shown
    _nothing_stored(order)
    assert not PartUse.objects.filter(part=fan).exists()


def test_the_service_refuses_a_part_already_on_the_order_another_sites_or_given_twice(order, filters, fan,
                                                                                      users):
    elsewhere = Site.objects.create(name="Other Mesa", slug="other-mesa", latitude_deg=-30.0, longitude_deg=20.0,
                                    time_zone="Africa/Johannesburg")
    foreign = Part.objects.create(site=elsewhere, name="Cell fan 80 mm", part_number="FAN-80", quantity_on_hand=5)
    for added, message in (
        ([(filters, 1)], "Filter is on the order already: give how many were used on its own line"),
        ([(foreign, 1)], "Cell fan 80 mm is a part of another site's register"),
        ([(fan, 1), (fan, 1)], "Cell fan 80 mm is given twice among the other parts used"),
        ([(fan, 0)], "Cell fan 80 mm used: enter a number above 0"),
    ):
        with pytest.raises(services.Refused, match=message):
            services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6),
                                       parts_as_planned(order), parts_added=added, **_confirmed(order))
        _nothing_stored(order)
    assert not PartUse.objects.filter(part__in=[fan, foreign]).exists()


def test_the_parts_used_of_a_period_download_as_csv(order, filters, fan, users, client):
    """For the year-end review: each part line of finished work, dated by the day the work was done."""
    import csv
    import io

    from observatory_ops.planning.services import site_today

    use = PartUse.objects.get(part=filters)
    services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), {use.pk: 2},
                               parts_added=[(fan, 1)], **_confirmed(order))
    client.force_login(users["viewer"])
    today = site_today(order.site)
    rows = list(csv.DictReader(io.StringIO(
        client.get(f"/sites/{order.site.slug}/parts/used.csv").content.decode("utf-8-sig"))))
    assert [(r["work_done_on"], r["work_order"], r["part"], r["planned"], r["used"], r["short_of_the_register"])
            for r in rows] == [
        (today.isoformat(), order.number, "Filter", "1.0", "2.0", "1.0"),
        (today.isoformat(), order.number, "Cell fan 80 mm", "0.0", "1.0", "0.0"),
    ]
    before = client.get(f"/sites/{order.site.slug}/parts/used.csv?to=2020-01-01&from=2019-01-01").content.decode()
    assert before.splitlines()[1:] == []
    assert client.get(f"/sites/{order.site.slug}/parts/used.csv?from=yesterday").status_code == 400


def test_a_part_counted_in_whole_units_takes_no_fraction(order, filters, fan, users):
    """A reviewer finished an order with 1.5 filters "each": the register then held "0.50 each". A part whose unit
    counts whole parts (each, set, pair ...; our own list) takes whole numbers; a part sold by the metre takes any."""
    from observatory_ops.workorders.models import COUNTED_UNITS

    assert "each" in COUNTED_UNITS and "m" not in COUNTED_UNITS
    use = PartUse.objects.get(part=filters)
    with pytest.raises(services.Refused, match="Filter used: 1.5 is not a whole number, and Filter is counted in"):
        services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), {use.pk: 1.5},
                                   **_confirmed(order))
    with pytest.raises(services.Refused, match="is not a whole number"):
        services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), {use.pk: 1},
                                   parts_added=[(fan, 0.5)], **_confirmed(order))
    _nothing_stored(order)
    cable = Part.objects.create(site=order.site, name="Drag chain cable", unit="m", quantity_on_hand=10)
    services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), {use.pk: 1},
                               parts_added=[(cable, 2.5)], **_confirmed(order))
    cable.refresh_from_db()
    assert cable.quantity_on_hand == 7.5
