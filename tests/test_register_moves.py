"""Moving a telescope or a subsystem to another site in the admin (a network manager's review).

What is recorded of a telescope or a subsystem (its own nights, service records, readings, work orders, mirror
records) belongs to the site where it was made: its log, its totals, its history. A move to another site would take
it along and rewrite that past (a service at the old site counted against the new site's nights, its hours moved to
the other site's maintenance totals, a draft order left under the old site), so such a move is refused with a message
saying what is recorded, and nothing changes. A move of something with nothing recorded yet (a telescope entered
under the wrong site) is allowed: both sites are recomputed in the same transaction, so neither keeps a state of the
moved plans, and every later write at the new site works (a stale state of the old site used to make every recompute
of the new one fail on the one-state-per-plan key until the old site happened to be recomputed).

Both sites are in use (``conftest.site_in_use``: plans, logged nights, a cached sky), so a recompute never waits for
astropy.
"""
from __future__ import annotations

import datetime as dt
import json

import pytest
from django.urls import reverse

from observatory_ops.api.services import api_token_create
from observatory_ops.logbook.models import NightUsage, Reading, ServiceRecord
from observatory_ops.logbook.services import service_record_log
from observatory_ops.mirrors.models import Mirror
from observatory_ops.planning.models import PlanStatus, ServicePlan
from observatory_ops.planning.selectors import due_for_site
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Subsystem, Telescope
from observatory_ops.registry.selectors import records_of
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders.models import IsolationPoint
from observatory_ops.workorders.services import work_order_ad_hoc
from tests.conftest import site_in_use
from tests.test_register_and_plan_bounds import _unchanged

pytestmark = pytest.mark.django_db


@pytest.fixture
def engineer(engineer_in_admin):
    """The engineer in the admin (conftest.py)."""
    return engineer_in_admin


@pytest.fixture
def sites(db):
    return site_in_use("tor-brae"), site_in_use("mesa-norte")


@pytest.fixture
def newcomer(sites):
    """A telescope entered under the first site by mistake, with a subsystem and its plans, and nothing recorded."""
    telescope = Telescope.objects.create(site=sites[0], name="MC-80", aperture_m=0.8, mount="fork")
    today = site_today(sites[0])
    subsystem_create(telescope, "cooling_fans", "Fans", counting_from=today - dt.timedelta(days=30))
    site_recompute(sites[0])
    return telescope


def _states(site) -> set[int]:
    return set(PlanStatus.objects.filter(site=site).values_list("plan_id", flat=True))


def _plans_of(telescope) -> set[int]:
    return set(ServicePlan.objects.filter(subsystem__telescope=telescope).values_list("pk", flat=True))


def _move_telescope(client, telescope, site):
    url = f"/admin/registry/telescope/{telescope.pk}/change/"
    return client.post(url, {**_unchanged(client, url), "site": str(site.pk)}, follow=True)


def _move_subsystem(client, subsystem, telescope):
    url = f"/admin/registry/subsystem/{subsystem.pk}/change/"
    return client.post(url, {**_unchanged(client, url), "telescope": str(telescope.pk)}, follow=True)


def _messages(response) -> list[str]:
    return [str(message) for message in response.context["messages"]]


def _stored(site) -> list[tuple]:
    """What a refused move must leave as it was: the site's telescopes, subsystems and due states."""
    return [
        sorted(Telescope.objects.filter(site=site).values_list("pk", "name")),
        sorted(Subsystem.objects.filter(telescope__site=site).values_list("pk", "telescope_id", "parent_id")),
        sorted(PlanStatus.objects.filter(site=site).values_list("plan_id", "status", "forecast_date")),
    ]


# --- refused: something is recorded --------------------------------------------------------------------------------


@pytest.mark.parametrize("record", ["service", "reading", "draft order", "mirror coating", "own night"])
def test_a_telescope_with_anything_recorded_stays_at_its_site_with_a_message_naming_it(
    engineer, sites, newcomer, users, record
):
    old, new = sites
    fans = newcomer.subsystems.get()
    today = site_today(old)
    said = {
        "service": "1 service record",
        "reading": "1 reading",
        "draft order": "1 work order",
        "mirror coating": "1 mirror coating",
        "own night": "1 night logged of its own",
    }[record]
    if record == "service":
        service_record_log(fans, fans.plans.first(), today - dt.timedelta(days=3), users["technician"], "filters")
    elif record == "reading":
        Reading.objects.create(subsystem=fans, quantity="fan_current_a", unit="A", value=1.2,
                               taken_by=users["technician"], taken_at=dt.datetime(2026, 1, 5, 12, tzinfo=dt.UTC))
    elif record == "draft order":
        work_order_ad_hoc(old, [fans], "Fan noise", users["engineer"])
    elif record == "mirror coating":
        mirror_subsystem = subsystem_create(newcomer, "primary_mirror", "Primary", counting_from=today)
        mirror = Mirror.objects.create(subsystem=mirror_subsystem, diameter_mm=800, thickness_mm=100,
                                       material="borosilicate")
        mirror.coatings.create(coated_on=today - dt.timedelta(days=400), metal="al")
    else:
        NightUsage.objects.create(site=old, telescope=newcomer, night=today - dt.timedelta(days=1), open_hours=5)
    before = [_stored(old), _stored(new)]
    response = _move_telescope(engineer, newcomer, new)
    errors = " ".join(response.context["adminform"].form.errors["site"])
    assert errors == (f"This telescope has records at its site: {said}. They stay in that site's log and history, so "
                      "it cannot move to another site. Register it at the new site as a new telescope.")
    assert [_stored(old), _stored(new)] == before


def test_records_of_counts_each_kind_in_words(newcomer, users):
    """The message lists each kind of record with its count, joined as a sentence."""
    fans = newcomer.subsystems.get()
    day = site_today(newcomer.site) - dt.timedelta(days=2)
    for _ in range(2):
        service_record_log(fans, None, day, users["technician"], "cleaned")
    work_order_ad_hoc(newcomer.site, [fans], "Fan noise", users["engineer"])
    assert records_of([fans.pk], telescope=newcomer) == "2 service records and 1 work order"
    assert records_of([]) == ""


def test_a_subsystem_with_service_records_stays_at_its_site_with_a_message(engineer, sites, newcomer, users):
    old, new = sites
    fans = newcomer.subsystems.get()
    service_record_log(fans, fans.plans.first(), site_today(old) - dt.timedelta(days=3), users["technician"], "filters")
    before = [_stored(old), _stored(new)]
    response = _move_subsystem(engineer, fans, new.telescopes.get())
    errors = " ".join(response.context["adminform"].form.errors["telescope"])
    assert errors == ("This subsystem has records at its site: 1 service record. They stay in that site's log and "
                      "history, so it cannot move to a telescope at another site. Register it there as a new "
                      "subsystem, and retire this one.")
    assert [_stored(old), _stored(new)] == before


def test_a_subsystem_whose_part_has_records_stays_too(engineer, sites, newcomer, users):
    old, new = sites
    fans = newcomer.subsystems.get()
    part = subsystem_create(newcomer, "cooling_fans", "Fan 2", counting_from=site_today(old), parent=fans)
    service_record_log(part, None, site_today(old) - dt.timedelta(days=1), users["technician"], "replaced")
    response = _move_subsystem(engineer, fans, new.telescopes.get())
    assert " ".join(response.context["adminform"].form.errors["telescope"]).startswith(
        "This subsystem and its parts have records at its site: 1 service record.")
    assert Subsystem.objects.get(pk=fans.pk).telescope_id == newcomer.pk


# --- allowed: nothing recorded yet ---------------------------------------------------------------------------------


def test_a_telescope_with_nothing_recorded_moves_and_both_due_lists_are_right(engineer, sites, newcomer):
    old, new = sites
    moved = _plans_of(newcomer)
    assert moved <= _states(old)
    response = _move_telescope(engineer, newcomer, new)
    assert response.status_code == 200 and "adminform" not in response.context
    assert "Due states of Site tor-brae and Site mesa-norte recomputed." in _messages(response)
    assert not moved & _states(old)
    assert moved <= _states(new)
    assert not {s.plan_id for s in due_for_site(old)} & moved


def test_after_a_move_the_new_sites_api_and_service_form_work(engineer, sites, newcomer, users, client):
    """The reviewer's failures: the API's nights POST and the service form at the new site (500s before)."""
    old, new = sites
    _move_telescope(engineer, newcomer, new)
    secret = api_token_create(new, "control computer")[1]
    night = {"night": (site_today(new) - dt.timedelta(days=1)).isoformat(), "open_hours": 4.0}
    response = client.post(reverse("api-nights", args=[new.slug]), data=json.dumps(night),
                           content_type="application/json", HTTP_AUTHORIZATION=f"Bearer {secret}")
    assert response.status_code == 200, response.content
    client.force_login(users["technician"])
    fans = newcomer.subsystems.get()
    response = client.post(reverse("service-log", args=[fans.pk]), {
        "plan": str(fans.plans.first().pk), "performed_on": site_today(new).isoformat(), "hours_spent": "1",
        "summary": "filters changed",
    })
    assert response.status_code == 302
    assert ServiceRecord.objects.filter(subsystem=fans).exists()
    assert _plans_of(newcomer) <= _states(new) and not _plans_of(newcomer) & _states(old)


def test_a_subsystem_moves_to_another_sites_telescope_with_its_parts_and_isolation_points(engineer, sites, newcomer):
    old, new = sites
    fans = newcomer.subsystems.get()
    part = subsystem_create(newcomer, "cooling_fans", "Fan 2", counting_from=site_today(old), parent=fans)
    point = IsolationPoint.objects.create(telescope=newcomer, subsystem=fans, energy="ac", label="Fan breaker")
    target = new.telescopes.get()
    moved = {p.pk for p in ServicePlan.objects.filter(subsystem__in=[fans, part])}
    response = _move_subsystem(engineer, fans, target)
    assert "adminform" not in response.context
    assert "Moved with it to Site mesa-norte: T1 (0.6 m): Fan 2." in _messages(response)
    assert "Due states of Site tor-brae and Site mesa-norte recomputed." in _messages(response)
    part.refresh_from_db()
    point.refresh_from_db()
    assert (part.telescope_id, part.parent_id, point.telescope_id) == (target.pk, fans.pk, target.pk)
    assert not moved & _states(old) and moved <= _states(new)


def test_a_subsystem_with_records_stays_on_its_telescope_at_the_same_site(engineer, sites, newcomer, users):
    """Moved, its counters since its last service would count the other telescope's nights back to that service, as
    if it had always been there (a site review: a cable routing's axis travel since its service went from 39,744 to
    94,260 deg, its reliability hours with it). A part moved is registered anew there; this one stays."""
    old, _ = sites
    fans = newcomer.subsystems.get()
    service_record_log(fans, fans.plans.first(), site_today(old) - dt.timedelta(days=3), users["technician"], "filters")
    before = _stored(old)
    response = _move_subsystem(engineer, fans, old.telescopes.get(name="T1"))
    error = " ".join(response.context["adminform"].form.errors["telescope"])
    assert error.startswith(f"This subsystem has records on {newcomer.name}: 1 service record. Its counters since "
                            "its last service count that telescope's nights;")
    assert "tick 'It was registered on the wrong telescope'" in error
    assert Subsystem.objects.get(pk=fans.pk).telescope_id == newcomer.pk
    assert _stored(old) == before


def test_an_enclosure_all_the_telescopes_share_moves_with_its_records(engineer, sites, newcomer, users):
    """A diff review: it counts the site's nights wherever it is registered (``serves_the_whole_site``), so moving
    its record rewrites nothing and is not refused."""
    old, _ = sites
    old.shared_enclosure = True
    old.save()
    roof = subsystem_create(newcomer, "enclosure", "Roll-off roof", counting_from=site_today(old) - dt.timedelta(30))
    service_record_log(roof, roof.plans.first(), site_today(old) - dt.timedelta(days=3), users["technician"], "rails")
    response = _move_subsystem(engineer, roof, old.telescopes.get(name="T1"))
    assert "adminform" not in response.context, response.context["adminform"].form.errors
    assert Subsystem.objects.get(pk=roof.pk).telescope.name == "T1"


def test_a_subsystem_registered_on_the_wrong_telescope_moves_with_its_records_when_said(
    engineer, sites, newcomer, users
):
    """Registered on the wrong telescope by mistake, its records were always the other one's: the box says so, and
    it moves, its site recomputed."""
    old, _ = sites
    fans = newcomer.subsystems.get()
    service_record_log(fans, fans.plans.first(), site_today(old) - dt.timedelta(days=3), users["technician"], "filters")
    url = f"/admin/registry/subsystem/{fans.pk}/change/"
    response = engineer.post(url, {**_unchanged(engineer, url), "telescope": str(old.telescopes.get(name="T1").pk),
                                   "registered_on_wrong_telescope": "on"}, follow=True)
    assert "adminform" not in response.context
    assert Subsystem.objects.get(pk=fans.pk).telescope.name == "T1"
    assert _plans_of(old.telescopes.get(name="T1")) & _states(old)


def test_a_subsystem_on_a_work_order_not_yet_done_stays_on_its_telescope(engineer, sites, newcomer, users):
    """The order locks out the telescope it was made for: moved, the work would be done on a telescope nobody
    locked out."""
    old, _ = sites
    fans = newcomer.subsystems.get()
    order = work_order_ad_hoc(old, [fans], "Fan noise", users["engineer"])
    response = _move_subsystem(engineer, fans, old.telescopes.get(name="T1"))
    assert " ".join(response.context["adminform"].form.errors["telescope"]) == (
        f"This subsystem has work orders not yet done: {order.number} (draft). Each locks out the telescope it was "
        "made for, so it stays on that one until they are finished or withdrawn."
    )
    assert Subsystem.objects.get(pk=fans.pk).telescope_id == newcomer.pk


def test_a_plan_moved_to_another_sites_subsystem_is_recomputed_at_both(engineer, sites, newcomer):
    """The same key problem for any record the admin moves across sites: the site it left is recomputed first."""
    old, new = sites
    plan = newcomer.subsystems.get().plans.first()
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    target = new.telescopes.get().subsystems.first()
    # Renamed as it moves: the target already has an active plan of that name (two alike are refused).
    response = engineer.post(url, {**_unchanged(engineer, url), "subsystem": str(target.pk),
                                   "name": f"{plan.name}, moved"}, follow=True)
    assert "adminform" not in response.context, response.context["adminform"].form.errors
    assert plan.pk in _states(new) and plan.pk not in _states(old)
