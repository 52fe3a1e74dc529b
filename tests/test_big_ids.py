"""An id too large for the database (a number beyond the 64-bit id column, typed into an address or sent by hand) is
answered as an unknown id is: the due list's filter "not applied", the ad hoc order's "not a valid choice", the order
from due items "select at least one", the isolation point's admin page "not a valid choice"; never a server error,
and nothing stored. Our own rule of the pages (the project's: bad input gets a message, never a 500).

The range of the id column: SQLite's INTEGER is a signed 8-byte number, -2**63 to 2**63 - 1 (sqlite.org, "Datatypes
In SQLite", section 2), as is PostgreSQL's bigint (postgresql.org, "Numeric Types"); Django's BigAutoField is stored
in it."""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest

from observatory_ops.planning.models import ServicePlan
from observatory_ops.registry.forms import possible_id
from observatory_ops.registry.models import Site, Subsystem
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders.models import IsolationPoint, WorkOrder
from tests.conftest import mains_isolator

pytestmark = pytest.mark.django_db

LARGEST_ID = 2**63 - 1  # the largest signed 8-byte integer (sqlite.org, "Datatypes In SQLite")
TOO_LARGE = [str(LARGEST_ID + 1), "99999999999999999999999", "9" * 5000]  # the last beyond Python's int() of text
START = dt.date(2026, 1, 1)


def _text(page) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", page.content.decode())).split())


def _messages(page) -> list[str]:
    return [str(message) for message in page.context["messages"]]


# --- what can be an id -----------------------------------------------------------------------------------------


@pytest.mark.parametrize(("given", "expected"), [
    ("1", 1), ("0", 0), (str(LARGEST_ID), LARGEST_ID), (7, 7),
    (str(LARGEST_ID + 1), None), ("99999999999999999999999", None), ("9" * 5000, None),
    ("zzz", None), ("", None), ("-1", None), ("+5", None), (" 5", None), ("١٢", None), ("None", None),
])
def test_an_id_is_whole_ascii_digits_within_the_id_column(given, expected):
    assert possible_id(Site, given) == expected


# --- the due list's filters ------------------------------------------------------------------------------------


@pytest.mark.parametrize("field", ["site", "telescope"])
@pytest.mark.parametrize("value", TOO_LARGE)
def test_a_due_filter_of_an_id_too_large_is_not_applied_as_an_unknown_id_is(users, client, telescope, field, value):
    client.force_login(users["viewer"])
    unknown = client.get(f"/due/?{field}=999")
    assert unknown.status_code == 200
    page = client.get(f"/due/?{field}={value}")
    assert page.status_code == 200
    label = field.capitalize()
    assert f"{label} '{value}' not applied: Select a valid choice." in " ".join(_messages(page))
    assert f"{label} '999' not applied: Select a valid choice." in " ".join(_messages(unknown))
    download = client.get(f"/due/?{field}={value}&export=csv")
    assert download.status_code == 400 and b"not applied" in download.content


def test_a_site_too_large_with_a_telescope_still_names_the_telescope_filter_alone(users, client, telescope):
    client.force_login(users["viewer"])
    page = client.get(f"/due/?site={TOO_LARGE[0]}&telescope={telescope.pk}")
    assert page.status_code == 200
    said = _messages(page)
    assert len(said) == 1 and f"Site '{TOO_LARGE[0]}' not applied" in said[0]


# --- an ad hoc work order --------------------------------------------------------------------------------------


@pytest.fixture
def box(telescope) -> Subsystem:
    return subsystem_create(telescope, "other", "Eyepiece box", counting_from=START, no_hazards_found=True)


@pytest.mark.parametrize("value", [*TOO_LARGE, "zzz", "999"])
def test_an_ad_hoc_order_for_a_subsystem_id_too_large_is_refused_as_not_a_valid_choice(
    users, client, site, box, value
):
    client.force_login(users["engineer"])
    response = client.post(f"/sites/{site.slug}/workorders/new/", {
        "title": "Sort the eyepieces", "order_type": "corrective", "subsystems": [box.pk, value], "steps": "Sort.",
    })
    assert response.status_code == 200
    shown = value if len(value) < 100 else value[:20]
    assert f"Select a valid choice. {shown}" in _text(response)
    assert "is not one of the available choices" in _text(response)
    assert not WorkOrder.objects.exists()


# --- an order from due items -----------------------------------------------------------------------------------


@pytest.mark.parametrize("value", [*TOO_LARGE, "999"])
def test_an_order_from_a_plan_id_too_large_is_refused_as_one_from_no_plan_is(users, client, box, value):
    client.force_login(users["engineer"])
    page = client.post("/workorders/from-due/", {"plans": [value]}, follow=True)
    assert page.status_code == 200
    assert "No work order made: select at least one due item." in _messages(page)
    assert not WorkOrder.objects.exists()


def test_a_plan_id_too_large_beside_a_known_one_is_left_out_as_an_unknown_one_is(users, client, box):
    """The unknown id is dropped, as an id of no plan is found in none: the order holds the known plan."""
    client.force_login(users["engineer"])
    plan = ServicePlan.objects.filter(subsystem=box).first() or ServicePlan.objects.create(
        subsystem=box, name="Check the box", counting_from=START,
    )
    page = client.post("/workorders/from-due/", {"plans": [TOO_LARGE[1], plan.pk]}, follow=True)
    assert page.status_code == 200
    order = WorkOrder.objects.get()
    assert [item.plan_id for item in order.items.all()] == [plan.pk]


# --- an isolation point's admin page ---------------------------------------------------------------------------


@pytest.mark.parametrize("value", ["zzz", *TOO_LARGE, "999"])
def test_an_isolation_point_posted_with_a_subsystem_no_id_can_be_is_refused_and_unchanged(
    telescope, engineer_in_admin, value
):
    point = mains_isolator(telescope)
    before = list(IsolationPoint.objects.values())
    history = IsolationPoint.history.count()
    response = engineer_in_admin.post(f"/admin/workorders/isolationpoint/{point.pk}/change/", {
        "telescope": telescope.pk, "subsystem": value, "energy": "ac", "label": "Mount isolator moved",
        "location": "",
    })
    assert response.status_code == 200
    assert "Select a valid choice. That choice is not one of the available choices." in _text(response)
    assert list(IsolationPoint.objects.values()) == before
    assert IsolationPoint.history.count() == history
