"""The periodic inspection of each telescope's energy control procedure, at least once a year, by an authorised person
other than those using it, certified with the equipment, the date, the employees observed and the inspector (OSHA 29
CFR 1910.147(c)(6)). An auditor's review found nowhere to keep it: recorded in the admin, said on the site's dashboard
with when the next is due."""
from __future__ import annotations

import datetime as dt
import html
import io
import re

import pytest
from conftest import mains_isolator
from django.urls import reverse

from observatory_ops.planning.services import site_today
from observatory_ops.workorders import selectors
from observatory_ops.workorders.models import EnergyControlInspection

pytestmark = pytest.mark.django_db


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def test_a_telescope_with_a_lockout_is_due_its_first_inspection_then_a_year_after_each(site, telescope, users):
    today = site_today(site)
    assert selectors.energy_control_inspections(site, today) == []  # no isolation point: no procedure here
    mains_isolator(telescope)
    [due] = selectors.energy_control_inspections(site, today)
    assert due.last is None and due.overdue
    EnergyControlInspection.objects.create(telescope=telescope, inspected_on=today - dt.timedelta(days=364),
                                           inspector=users["engineer"], employees="technician", findings="none found",
                                           recorded_by=users["engineer"])
    [due] = selectors.energy_control_inspections(site, today)
    assert due.due_by == today + dt.timedelta(days=1) and not due.overdue
    [due] = selectors.energy_control_inspections(site, today + dt.timedelta(days=2))
    assert due.overdue


def test_the_dashboard_says_when_and_by_whom_and_when_next(site, telescope, users, engineer_in_admin):
    from django.test import Client

    mains_isolator(telescope)
    client = Client()  # the viewer's: engineer_in_admin is the test's own client
    client.force_login(users["viewer"])
    assert "T1 : no inspection recorded : due now" in _text(client.get(site.get_absolute_url()))
    today = site_today(site)
    answer = engineer_in_admin.post(reverse("admin:workorders_energycontrolinspection_add"), {
        "telescope": telescope.pk, "inspected_on": today.isoformat(), "inspector": users["engineer"].pk,
        "employees": "technician", "findings": "Lockout watched on the drive order; followed as written."})
    assert answer.status_code == 302, re.findall(r'class="errorlist[^"]*"[^>]*>(.*?)</ul>', answer.content.decode())
    inspection = EnergyControlInspection.objects.get()
    assert inspection.recorded_by == users["engineer"]
    page = _text(client.get(site.get_absolute_url()))
    assert (f"T1 : last inspected {today:%d %b %Y} by engineer (observed: technician); the next by "
            f"{today + dt.timedelta(days=365):%d %b %Y}") in page
    assert "take precedence" in page


def test_the_admin_refuses_an_inspection_in_the_future_or_by_someone_observed(site, telescope, users,
                                                                             engineer_in_admin):
    mains_isolator(telescope)
    today = site_today(site)
    form = {"telescope": telescope.pk, "inspected_on": (today + dt.timedelta(days=1)).isoformat(),
            "inspector": users["technician"].pk, "employees": "Technician, someone else", "findings": "none found"}
    page = _text(engineer_in_admin.post(reverse("admin:workorders_energycontrolinspection_add"), form))
    assert "is after today at Test Hill" in page and "technician is among those observed" in page
    assert not EnergyControlInspection.objects.exists()


def test_the_admin_names_the_inspector_as_the_employees_observed_are_typed(site, telescope, users,
                                                                           engineer_in_admin):
    """The last session's walk: the inspector list named people by user name, while those observed are typed as full
    names. Both the choice and the list name people as the pages do."""
    users["engineer"].first_name, users["engineer"].last_name = "Oda", "Ferrin"  # invented
    users["engineer"].save()
    mains_isolator(telescope)
    add_page = engineer_in_admin.get(reverse("admin:workorders_energycontrolinspection_add")).content.decode()
    assert f'<option value="{users["engineer"].pk}">Oda Ferrin</option>' in add_page
    assert '>viewer</option>' not in add_page and '>technician</option>' in add_page  # the viewer is not authorised
    EnergyControlInspection.objects.create(telescope=telescope, inspected_on=site_today(site),
                                           inspector=users["engineer"], employees="Technician", findings="none found",
                                           recorded_by=users["engineer"])
    listed = _text(engineer_in_admin.get(reverse("admin:workorders_energycontrolinspection_changelist")))
    assert "Oda Ferrin Technician Oda Ferrin" in listed


def test_the_demo_shows_an_inspection_made_and_one_due(client):
    """The demo's invented site: T70 inspected ten months ago, R40 never (both states on its dashboard)."""
    from django.contrib.auth.models import User
    from django.core.management import call_command

    from fixtures_demo.generator import SITE_SLUG
    from observatory_ops.registry.models import Site

    call_command("demo", "--no-serve", stdout=io.StringIO())
    client.force_login(User.objects.get(username="viewer"))
    page = _text(client.get(Site.objects.get(slug=SITE_SLUG).get_absolute_url()))
    assert "R40 : no inspection recorded : due now" in page
    assert "T70 : last inspected" in page and "(observed: Pavo Linnet); the next by" in page
