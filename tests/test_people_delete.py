"""Deleting a person in the admin (a network manager's review).

Records keep who did what: their keys to the person refuse the deletion (PROTECT). The admin used to answer that
deleting the person "would result in deleting related objects, but your account doesn't have permission to delete
... service record", when nothing would have been deleted. Now the single and the bulk delete say who is named on
what, delete nobody, and say what to do instead (untick Active). A person named on nothing is deleted as before.
"""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from django.contrib.auth.models import User

from observatory_ops.access.selectors import protecting_fields, records_naming
from observatory_ops.logbook.services import service_record_log
from observatory_ops.planning.services import HORIZON_DAYS, site_today
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders.services import work_order_ad_hoc
from tests.conftest import constant_sky

pytestmark = pytest.mark.django_db


@pytest.fixture
def admin_client(administrator_in_admin):
    """The administrator in the admin (conftest.py)."""
    return administrator_in_admin


@pytest.fixture
def ana(users, telescope):
    """A technician who logged two services and is named on one work order."""
    ana = User.objects.create_user("ana", first_name="Ana", last_name="Ruiz", password="pw-ana-123456")
    today = site_today(telescope.site)
    constant_sky(telescope.site, today - dt.timedelta(days=30), today + dt.timedelta(days=HORIZON_DAYS + 1))
    fans = subsystem_create(telescope, "cooling_fans", "Fans", counting_from=today - dt.timedelta(days=30))
    day = today - dt.timedelta(days=2)
    for summary in ("filters changed", "bearing greased"):
        service_record_log(fans, None, day, users["engineer"], summary, performed_by=ana)
    order = work_order_ad_hoc(telescope.site, [fans], "Fan noise", users["engineer"])
    order.assignee = ana
    order.save()
    return ana


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def test_the_records_that_keep_a_person_are_found_from_the_models():
    """Every foreign key to the user that refuses the person's deletion, as the models declare today."""
    found = {model._meta.label: fields for model, fields in protecting_fields().items()}
    assert found == {
        "logbook.Reading": ["taken_by", "withdrawn_by"],
        "logbook.ServiceRecord": ["performed_by", "created_by"],
        "workorders.WorkOrder": ["assignee", "created_by", "finished_by", "countersigned_by"],
        "workorders.EnergyControlInspection": ["inspector", "recorded_by"],
        "workorders.ChecklistTick": ["recorded_by"],
        "workorders.CrewMember": ["person"],
        "mirrors.ReflectanceMeasurement": ["taken_by", "withdrawn_by"],
        "mirrors.RecoatPlan": ["created_by"],
        "api.ApiToken": ["created_by"],
    }


def test_records_naming_counts_each_record_once_per_person(ana, users):
    """The engineer wrote Ana's two records and the order: named on them as writer, Ana as performer and assignee."""
    named = records_naming([ana.pk, users["engineer"].pk, users["viewer"].pk])
    assert named == {ana.pk: "2 service records and 1 work order", users["engineer"].pk: "2 service records and 1 "
                     "work order"}


def test_the_delete_page_of_a_person_with_records_says_why_and_deletes_nobody(admin_client, ana):
    response = admin_client.get(f"/admin/auth/user/{ana.pk}/delete/", follow=True)
    assert response.redirect_chain == [(f"/admin/auth/user/{ana.pk}/change/", 302)]
    text = _text(response)
    assert ("Ana Ruiz (ana) is named on 2 service records and 1 work order. A person named on records stays on them "
            "and is not deleted: untick Active on their page instead, so they can no longer sign in.") in text
    assert "doesn't have permission" not in text
    assert admin_client.post(f"/admin/auth/user/{ana.pk}/delete/", {"post": "yes"}).status_code == 302
    assert User.objects.filter(pk=ana.pk).exists()


def test_the_bulk_delete_names_each_person_kept_and_deletes_nobody(admin_client, ana, users):
    chosen = [ana.pk, users["viewer"].pk]
    response = admin_client.post("/admin/auth/user/", {"action": "delete_selected", "_selected_action": chosen},
                                 follow=True)
    text = _text(response)
    assert ("Ana Ruiz (ana) is named on 2 service records and 1 work order. A person named on records stays on them "
            "and is not deleted: untick Active on their page instead, so they can no longer sign in. Nobody was "
            "deleted: tick the others again to delete them.") in text
    assert "Are you sure" not in text
    response = admin_client.post("/admin/auth/user/", {"action": "delete_selected", "_selected_action": chosen,
                                                       "post": "yes"})
    assert User.objects.filter(pk__in=chosen).count() == 2


def test_a_person_named_on_nothing_is_deleted_as_before(admin_client, users):
    viewer = users["viewer"]
    assert "Are you sure" in _text(admin_client.get(f"/admin/auth/user/{viewer.pk}/delete/"))
    admin_client.post(f"/admin/auth/user/{viewer.pk}/delete/", {"post": "yes"})
    assert not User.objects.filter(pk=viewer.pk).exists()
    technician = users["technician"]
    admin_client.post("/admin/auth/user/", {"action": "delete_selected", "_selected_action": [technician.pk],
                                            "post": "yes"})
    assert not User.objects.filter(pk=technician.pk).exists()
