"""What open work orders plan of a spare part, against what the parts register holds.

Our own rules (no published source): an order still to do (draft, issued, underway) whose part line is not yet
recorded as used counts against the stock; a finished order's use is already taken from the register, and a
withdrawn order's plan is dropped, so neither is counted. Both the order page and the parts register say what the
other open orders plan, naming them, and warn when all of them together plan more than the register holds
("free" = in stock less planned on open orders); the paper, which shows no stock otherwise, says when the register
was short as it was printed. The register page reads them in a fixed number of queries.

Orders are those of tests/test_workorders.py (an axis drive with one AC isolation point); the part and its
quantities are invented.
"""
from __future__ import annotations

import html
import io
import re

import pytest
from conftest import parts_as_planned
from django.db import connection
from django.test.utils import CaptureQueriesContext
from pypdf import PdfReader
from test_workorders import PLANNED, _all_readings, _confirmed, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.workorders import pdf, selectors, services
from observatory_ops.workorders.models import Part, PartUse, WorkOrder

pytestmark = pytest.mark.django_db

CO2 = "CO2 cylinder for snow cleaning"


@pytest.fixture
def cylinder(site):
    """One cylinder held, reorder point 1 (so it reads "low" as on the demo)."""
    return Part.objects.create(site=site, name=CO2, unit="cylinder", quantity_on_hand=1, reorder_point=1)


@pytest.fixture
def two_orders(order, drive, users, cylinder):  # noqa: F811
    """``order`` issued and a second draft over the same plans, each planning 1 cylinder."""
    services.part_add(order, cylinder, 1)
    services.work_order_move(order, "issue", users["engineer"])
    other = services.work_order_from_due(list(drive.plans.all()), users["engineer"], PLANNED)
    services.part_add(other, cylinder, 1)
    return WorkOrder.objects.get(pk=order.pk), other


def _page(client, url: str) -> str:
    text = " ".join(html.unescape(re.sub(r"<[^>]+>", " ", client.get(url).content.decode())).split())
    return re.sub(r" ([,;.)])", r"\1", text)  # the space a tag left before punctuation


def _paper(work_order) -> str:
    document = pdf.render_sheet(selectors.sheet(work_order, "https://ops.example/wo/1/"))
    return " ".join(" ".join(page.extract_text().split()) for page in PdfReader(io.BytesIO(document)).pages)


def _register(client, site) -> str:
    return _page(client, f"/sites/{site.slug}/parts/")


def _register_row(client, site) -> str:
    return re.search(rf"{CO2} .*?(?= Parts used on work orders)", _register(client, site))[0]


def test_two_open_orders_over_one_part_held_once_say_so_on_both_order_pages(two_orders, users, client):
    first, second = two_orders
    client.force_login(users["viewer"])
    page = _page(client, first.get_absolute_url())
    assert (f"1 cylinder (reorder at 1 cylinder); 1 cylinder planned on {second.number} too. 2 cylinders planned on "
            "open orders against 1 cylinder held: order more or re-plan") in page
    page = _page(client, second.get_absolute_url())
    assert f"1 cylinder planned on {first.number} too. 2 cylinders planned on open orders against 1 cylinder" in page


def test_the_register_says_what_open_orders_plan_and_that_the_part_is_short(two_orders, users, client, site):
    first, second = two_orders
    client.force_login(users["viewer"])
    row = _register_row(client, site)
    assert f"2 cylinders (1 on {first.number}, 1 on {second.number}) short by 1 cylinder" in row
    assert "Free = in stock less planned on open orders" in _register(client, site)
    planned = selectors.parts_planned_open(Part.objects.filter(name=CO2))
    (figures,) = planned.values()
    assert (figures.planned, figures.free, figures.short_by) == (2, -1, 1)


def test_own_shortage_stays_and_one_open_order_alone_names_no_other(order, cylinder, users, client, site):  # noqa: F811
    services.part_add(order, cylinder, 2)
    client.force_login(users["viewer"])
    page = _page(client, order.get_absolute_url())
    assert "1 cylinder (short of the planned 2 cylinders)" in page
    assert "too" not in page.split("Parts and tools")[1].split("Tools")[0]
    assert f"2 cylinders (2 on {order.number}) short by 1 cylinder" in _register_row(client, site)


def test_a_finished_orders_use_is_not_counted(two_orders, users, client, site):
    first, second = two_orders
    services.work_order_move(first, "start", users["technician"])
    services.work_order_finish(first, users["technician"], 1.0, "Isolation ticked on the paper.",
                               _all_readings(first, 0.6), parts_as_planned(first), **_confirmed(first))
    client.force_login(users["viewer"])
    # The register held 1 and the finished order took it: the other order's 1 is short by 1 (by 2 were it counted).
    assert f"0 cylinders reorder 1 cylinder (1 on {second.number}) short by 1 cylinder" in _register_row(client, site)
    page = _page(client, second.get_absolute_url())
    assert "0 cylinders (short of the planned 1 cylinder)" in page
    assert "planned on open orders" not in page and f"planned on {first.number}" not in page
    finished = _page(client, first.get_absolute_url())
    assert f"planned on {second.number}" not in finished  # its stock is taken: its row is as it was


def test_a_withdrawn_orders_plan_is_not_counted(two_orders, users, client, site):
    first, second = two_orders
    services.work_order_move(second, "withdraw", users["engineer"], reason="Planned twice.")
    client.force_login(users["viewer"])
    assert f"1 cylinder (1 on {first.number}) 0 cylinders" in _register_row(client, site)
    assert f"planned on {second.number}" not in _page(client, first.get_absolute_url())


def test_a_part_line_already_used_is_not_counted(two_orders, client, users, site):
    first, second = two_orders
    PartUse.objects.filter(work_order=second).update(quantity_used=1)
    client.force_login(users["viewer"])
    assert f"1 cylinder (1 on {first.number}) 0 cylinders" in _register_row(client, site)
    assert f"planned on {second.number}" not in _page(client, first.get_absolute_url())


def _register_queries(client, site) -> int:
    with CaptureQueriesContext(connection) as queries:
        assert client.get(f"/sites/{site.slug}/parts/").status_code == 200
    return len(queries)


def test_the_register_reads_a_fixed_number_of_queries_whatever_the_number_of_orders(
    drive, users, client, site, cylinder  # noqa: F811
):
    client.force_login(users["viewer"])
    services.part_add(services.work_order_from_due(list(drive.plans.all()), users["engineer"], PLANNED), cylinder, 1)
    few = _register_queries(client, site)
    for n in range(4):
        part = Part.objects.create(site=site, name=f"Spare {n}", quantity_on_hand=2)
        for _ in range(2):
            order = services.work_order_from_due(list(drive.plans.all()), users["engineer"], PLANNED)  # noqa: F811
            services.part_add(order, part, 1)
            services.part_add(order, cylinder, 1)
    assert _register_queries(client, site) == few


def test_the_dashboard_lists_a_part_the_open_orders_plan_more_of_than_is_held(two_orders, cylinder, site, users,
                                                                              client):
    """Not only parts at their reorder point: one held above it but planned beyond it is listed, short by how much."""
    Part.objects.filter(pk=cylinder.pk).update(reorder_point=0)  # above its reorder point now: not to reorder
    Part.objects.create(site=site, name="Drive roller wipes", unit="pack", quantity_on_hand=12, reorder_point=5)
    client.force_login(users["viewer"])
    page = _page(client, f"/sites/{site.slug}/")
    panel = page[page.index("Spare parts to reorder"):page.index("All spare parts")].replace(" :", ":")
    assert f"{CO2}: 1 cylinder left; 2 cylinders planned on open orders: short by 1 cylinder" in panel
    assert "Drive roller wipes" not in panel and "reorder at" not in panel
    services.work_order_move(two_orders[1], "withdraw", users["engineer"], reason="Planned twice.")
    panel = _page(client, f"/sites/{site.slug}/")
    assert CO2 not in panel[panel.index("Spare parts to reorder"):panel.index("All spare parts")]


SHORT_ON_PAPER = "Short in stock when printed: check these are to hand before starting, or ask the site engineer."


def test_the_paper_says_the_part_is_short_and_names_the_other_open_orders(two_orders):
    first, second = two_orders
    paper = _paper(first)
    assert SHORT_ON_PAPER in paper
    assert (f"{CO2}: 1 cylinder in stock, 2 cylinders planned on open orders (1 cylinder on this one, 1 cylinder on "
            f"{second.number})") in paper
    assert f"1 cylinder on {first.number})" in _paper(second)


def test_the_paper_says_when_the_order_alone_plans_more_than_is_held(order, cylinder):  # noqa: F811
    services.part_add(order, cylinder, 2)
    assert f"{CO2}: 1 cylinder in stock, 2 cylinders planned on this order" in _paper(order)


def test_the_paper_says_nothing_of_stock_when_there_is_enough_or_the_work_is_finished(two_orders, users, site):
    first, second = two_orders
    Part.objects.filter(name=CO2).update(quantity_on_hand=2)
    assert "Short in stock" not in _paper(first)
    services.work_order_move(first, "start", users["technician"])
    services.work_order_finish(first, users["technician"], 1.0, "Isolation ticked on the paper.",
                               _all_readings(first, 0.6), parts_as_planned(first), **_confirmed(first))
    assert "Short in stock" not in _paper(WorkOrder.objects.get(pk=first.pk))
