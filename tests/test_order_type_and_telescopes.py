"""How an order from due items is labelled, how an order over two telescopes is judged for isolation points, and
how the work-order list and the recoat orders name their telescope.

Condition-based maintenance is preventive maintenance that follows from an assessment of physical condition
(EN 13306, maintenance terminology): an order is condition-based when a measured reading is what made an item
due, not when a plan merely has a reading trigger among its calendar and usage triggers.
"""
from __future__ import annotations

import datetime as dt

import pytest
from conftest import site_in_use
from django.db import connection
from django.test.utils import CaptureQueriesContext
from django.utils import timezone

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.logbook.services import reading_log
from observatory_ops.mirrors import services as mirror_services
from observatory_ops.mirrors.models import CoatingEvent, Mirror
from observatory_ops.planning.models import PlanStatus
from observatory_ops.planning.services import site_recompute
from observatory_ops.registry.models import Telescope
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import selectors, services
from observatory_ops.workorders.models import IsolationPoint, WorkOrder

START = dt.date(2026, 1, 1)


# --- condition-based or preventive -------------------------------------------------------------------------


@pytest.fixture
def drive_plan(db):
    """The catalogue's axis drive plan (calendar 180 days, axis travel, settle time above 1 s), counted from 100
    days ago at a site in use: due by none of them yet."""
    site = site_in_use("drive-hill", kinds=("axis1_drive",))
    drive = site.telescopes.get().subsystems.get()
    plan = drive.plans.get()
    assert plan.triggers.filter(metric="reading", quantity="settle_time_s").exists()
    return plan


def test_an_item_due_by_its_reading_makes_a_condition_based_order(drive_plan, users):
    reading_log(drive_plan.subsystem, "settle_time_s", 1.6, timezone.now() - dt.timedelta(hours=1),
                users["technician"])  # above its 1 s limit: it recomputes the site
    status = PlanStatus.objects.get(plan=drive_plan)
    assert status.metric == "reading" and status.status in ("due", "overdue")
    order = services.work_order_from_due([drive_plan], users["engineer"])
    assert order.order_type == WorkOrder.Type.CONDITION_BASED


def test_an_item_due_by_the_calendar_makes_a_preventive_order_though_its_plan_has_a_reading_trigger(
    drive_plan, users
):
    drive_plan.triggers.filter(metric="calendar_days").update(limit=90)  # 100 days counted: overdue by the calendar
    site_recompute(drive_plan.subsystem.telescope.site)
    status = PlanStatus.objects.get(plan=drive_plan)
    assert status.metric == "calendar_days" and status.status == "overdue"
    order = services.work_order_from_due([drive_plan], users["engineer"])
    assert order.order_type == WorkOrder.Type.PREVENTIVE


# --- isolation points of an order over two telescopes --------------------------------------------------------


@pytest.fixture
def two_telescopes(site, telescope):
    """T1's brake (compressed air, a moving telescope) and R40's mains (electrical only), each telescope with a
    point for the energy of its own work only."""
    other = Telescope.objects.create(site=site, name="R40", aperture_m=0.4, mount="fork")
    brake = subsystem_create(telescope, "brake", "Axis 1 brake", counting_from=START)
    mains = subsystem_create(other, "ac_power", "Mains", counting_from=START)
    IsolationPoint.objects.create(telescope=telescope, energy="air", label="Brake air valve")
    IsolationPoint.objects.create(telescope=other, energy="ac", label="R40 mains isolator")
    # The distribution's own point, upstream of its boards (a telescope's isolators leave their incoming side live).
    IsolationPoint.objects.create(telescope=other, subsystem=mains, energy="ac", label="R40 mains feeder")
    return brake, mains


def test_each_telescope_of_an_order_is_asked_only_for_the_points_of_its_own_work(two_telescopes, users):
    brake, mains = two_telescopes
    order = services.work_order_from_due([*brake.plans.all(), *mains.plans.all()], users["engineer"])
    assert {"pneumatic", "electrical", "moving_machinery"} <= set(order.hazards)  # the whole order's
    assert selectors.isolation_gaps(order) == []  # R40 has no air point, and needs none


def test_a_telescope_missing_the_point_for_its_own_work_is_still_warned(two_telescopes, telescope, users):
    brake, mains = two_telescopes
    IsolationPoint.objects.filter(telescope=telescope).delete()
    subsystem_create(mains.telescope, "enclosure", "R40 dome", counting_from=START)  # nothing moves at R40
    dome = subsystem_create(telescope, "enclosure", "T1 dome", counting_from=START)  # T1's axis can move
    order = services.work_order_from_due([*brake.plans.all(), *mains.plans.all()], users["engineer"])
    gaps = selectors.isolation_gaps(order)
    assert gaps[0] == ("No compressed-air isolation point is registered for T1. Have an engineer add it to the "
                       "register before work; if the work is already underway, find and lock the supply before going "
                       "on.")
    assert len(gaps) == 2 and f"T1: {dome.name}, which has a supply of its own" in gaps[1]
    assert "R40" not in " ".join(gaps)


def test_a_hazard_given_by_hand_concerns_every_telescope_of_the_order(site, telescope, users):
    other = Telescope.objects.create(site=site, name="R40", aperture_m=0.4, mount="fork")
    mains = [subsystem_create(t, "ac_power", "Mains", counting_from=START) for t in (telescope, other)]
    for t, distribution in zip((telescope, other), mains, strict=True):
        IsolationPoint.objects.create(telescope=t, energy="ac", label=f"{t.name} mains isolator")
        IsolationPoint.objects.create(telescope=t, subsystem=distribution, energy="ac", label=f"{t.name} mains feeder")
    order = services.work_order_ad_hoc(site, mains, "Fit air-cooled contactors", users["engineer"],
                                       steps="Fit them.", hazards=["pneumatic"])  # no item says whose
    gaps = selectors.isolation_gaps(order)
    assert [gap.split(".")[0] for gap in gaps] == [
        f"No compressed-air isolation point is registered for {name}" for name in ("R40", "T1")
    ]


# --- the work-order list and the recoat orders ----------------------------------------------------------------


def _orders(site, telescope, users, count: int) -> None:
    other = Telescope.objects.get_or_create(site=site, name="R40", defaults={"aperture_m": 0.4, "mount": "fork"})[0]
    # Called again, it adds orders over the same fans (a second "Fans" on a telescope is refused).
    here, there = (telescope.subsystems.filter(name="Fans").first()
                   or subsystem_create(telescope, "cooling_fans", "Fans", counting_from=START),
                   other.subsystems.filter(name="Fans").first()
                   or subsystem_create(other, "cooling_fans", "Fans", counting_from=START))
    for _ in range(count):
        services.work_order_ad_hoc(site, [here], "Fans of T1", users["engineer"], steps="Look.")
        services.work_order_ad_hoc(site, [here, there], "Fans of both", users["engineer"], steps="Look.")


def _rows(client) -> list[str]:
    import re

    page = client.get("/workorders/").content.decode()
    return [" ".join(re.sub(r"<[^>]+>", " ", row).split()) for row in re.findall(r"<tr.*?</tr>", page, re.S)[1:]]


def test_the_list_names_each_orders_telescope_or_telescopes(site, telescope, users, client):
    _orders(site, telescope, users, 1)
    client.force_login(users["viewer"])
    rows = _rows(client)
    assert "Telescope" in client.get("/workorders/").content.decode()
    assert any("Fans of both" in row and "R40, T1" in row for row in rows)
    assert any("Fans of T1" in row and " T1 " in f" {row} " and "R40" not in row for row in rows)
    assert client.get("/workorders/?sort=telescope").status_code == 200


def test_the_list_reads_the_telescopes_of_all_its_rows_at_once(site, telescope, users, client):
    client.force_login(users["viewer"])
    _orders(site, telescope, users, 1)
    with CaptureQueriesContext(connection) as few:
        client.get("/workorders/")
    _orders(site, telescope, users, 4)
    with CaptureQueriesContext(connection) as many:
        client.get("/workorders/")
    assert len(_rows(client)) == 10
    assert len(many.captured_queries) == len(few.captured_queries)


def test_recoat_orders_name_the_telescope_and_keep_the_phase_at_the_end(telescope, users):
    primary = subsystem_create(telescope, "primary_mirror", "Primary mirror", counting_from=START)
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=dt.date(2025, 8, 1), metal="al")
    plan = mirror_services.recoat_plan_create(mirror, dt.date(2026, 8, 1), list(RECOAT_PHASES), 3.5,
                                              users["engineer"])
    orders = list(plan.work_orders.order_by("planned_date"))
    assert orders[0].title == "Recoat T1 Primary mirror: removal"
    # Migration workorders 0010 reads the phase from the words after the last ": ".
    name_of = {phase.work: phase.name for phase in RECOAT_PHASES}
    assert [o.title.rsplit(": ", 1)[-1] for o in orders] == [name_of[o.recoat_phase] for o in orders]
