"""A real site set up from an empty database: the pages point an engineer to what to register next and to the site's
settings, and never offer the demo (whose logins' passwords are published) beside real users."""
from __future__ import annotations

import html
import re

import pytest
from django.contrib.auth.models import User

from fixtures_demo.generator import DEMO_USERS, demo_users, load_refusal
from observatory_ops.registry.models import Telescope
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


@pytest.fixture
def engineer(users, client):
    users["engineer"].is_staff = True  # the admin ("Register and plans") needs staff status
    users["engineer"].save()
    client.force_login(users["engineer"])
    return client


# --- the dashboard of a site being set up --------------------------------------------------------------------


def test_a_site_with_no_telescope_shows_an_engineer_where_to_add_one_its_subsystems_and_isolation_points(
    engineer, site
):
    page = engineer.get(site.get_absolute_url())
    assert "No telescope is registered at this site yet." in _text(page)
    body = page.content.decode()
    for link in (f"/admin/registry/telescope/add/?site={site.pk}", "/admin/registry/subsystem/add/",
                 "/admin/workorders/isolationpoint/add/"):
        assert f'href="{link}"' in body
    # The telescope link opens the add page with the site chosen.
    assert engineer.get(f"/admin/registry/telescope/add/?site={site.pk}").context["adminform"].form.initial == {
        "site": str(site.pk)}


def test_a_telescope_without_subsystems_gets_links_for_it_and_one_with_subsystems_none(engineer, site, telescope,
                                                                                    today):
    bare = Telescope.objects.create(site=site, name="T2", aperture_m=0.3, mount="altaz")
    subsystem_create(telescope, "cooling_fans", "Fans", counting_from=today)
    page = engineer.get(site.get_absolute_url())
    assert "T2 has no subsystem in service: add its subsystems" in _text(page)
    body = page.content.decode()
    assert f'href="/admin/registry/subsystem/add/?telescope={bare.pk}"' in body
    assert f'href="/admin/workorders/isolationpoint/add/?telescope={bare.pk}"' in body
    assert f"?telescope={telescope.pk}" not in body
    subsystem_create(bare, "cooling_fans", "Fans", counting_from=today)
    assert "Subsystems to register" not in _text(engineer.get(site.get_absolute_url()))


def test_a_viewer_is_told_who_registers_the_telescopes_and_gets_no_admin_links(users, client, site):
    client.force_login(users["viewer"])
    page = client.get(site.get_absolute_url())
    assert "An engineer registers them under Register and plans." in _text(page)
    assert "/admin/" not in page.content.decode()


def test_an_engineer_without_staff_status_is_told_to_ask_for_it(users, client, site):
    client.force_login(users["engineer"])
    text = _text(client.get(site.get_absolute_url()))
    assert "Your account needs staff status to open Register and plans" in text
    assert "Site settings" not in text


def test_the_dashboard_links_an_engineer_to_the_sites_settings(engineer, users, client, site):
    page = engineer.get(site.get_absolute_url())
    assert f'href="/admin/registry/site/{site.pk}/change/">Site settings</a>' in page.content.decode()
    assert "(position, time zone, crew working days and days off, look-ahead)" in _text(page)
    assert engineer.get(f"/admin/registry/site/{site.pk}/change/").status_code == 200
    client.force_login(users["technician"])
    assert "Site settings" not in _text(client.get(site.get_absolute_url()))


def test_the_admin_list_of_sites_gives_the_id_a_task_run_by_hand_takes(engineer, site):
    """README, "A task can be run by hand": ``celery call`` takes a site's id, which an operator found said nowhere."""
    page = _text(engineer.get("/admin/registry/site/"))
    assert "Site id (a task run by hand takes it)" in page
    assert re.search(rf"{re.escape(site.slug)} .* {site.pk}\b", page)


# --- the demo is never offered beside real users ------------------------------------------------------------


def test_a_fresh_install_home_page_does_not_offer_the_demo_to_its_own_administrator(client):
    admin = User.objects.create_superuser("admin", password="a-strong-password-of-their-own")
    client.force_login(admin)
    text = _text(client.get("/"))
    assert "No site is registered yet. Add one in the admin" in text
    assert "manage.py demo" not in text


def test_the_home_page_offers_the_demo_only_where_the_demo_command_would_load_it(client):
    demo_users()  # what `demo` makes before it loads the site: nothing but its own logins
    assert load_refusal() == ""
    client.force_login(User.objects.get(username="engineer"))
    assert "or load the demo with python manage.py demo" in _text(client.get("/"))
    User.objects.create_user("rsalgado", password="their-own-password-123")
    assert load_refusal().startswith("this database already has users of its own (rsalgado)")
    assert "manage.py demo" not in _text(client.get("/"))


def test_a_demo_username_with_a_real_persons_name_is_not_the_demos(db):
    """createsuperuser often names the first account "admin": it is the installation's, not the demo's."""
    User.objects.create_superuser("admin", password="a-strong-password-of-their-own")
    assert "(admin)" in load_refusal()
    assert {username for username, *_ in DEMO_USERS} >= {"admin"}
