"""Deleting from an admin list ("delete selected") does what deleting one record from its own page does: the due states
of every site the deleted records were at are recomputed, each site once, and the admin says so. What stops a single
delete (records that keep the chosen ones by a protected key: a telescope's subsystems, a plan's service records, a
mirror's measurements) stops the list's delete alike, and Django's page names those records (not a permission the
account lacks), deleting nothing. Deleting plans, mirrors and telescopes is the administrator's
(``access.admin_permissions``); the sites and their records are invented."""
from __future__ import annotations

import html
import re

import pytest

from observatory_ops.logbook.models import ServiceRecord
from observatory_ops.mirrors.models import Mirror, ReflectanceMeasurement
from observatory_ops.planning import admin as planning_admin
from observatory_ops.planning.models import PlanStatus, ServicePlan
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Subsystem, Telescope
from tests.conftest import site_in_use

pytestmark = pytest.mark.django_db

STALE = "left stale by hand"


@pytest.fixture
def two_sites():
    """Two sites in use, each with a primary mirror (and its mirror record) and a telescope with nothing registered,
    their due states stored, then marked stale: a recompute writes them afresh."""
    sites = site_in_use("east-hill"), site_in_use("west-hill")
    for site in sites:
        Mirror.objects.create(subsystem=Subsystem.objects.get(telescope__site=site, kind="primary_mirror"),
                              diameter_mm=500, thickness_mm=60, material="borosilicate")
        Telescope.objects.create(site=site, name="Spare", aperture_m=0.3, mount="altaz")
        site_recompute(site)
    PlanStatus.objects.update(reason=STALE)
    return sites


@pytest.fixture
def recomputed(monkeypatch) -> list[str]:
    """The sites the admin recomputes, by name, in turn (each recompute runs as it would)."""
    names: list[str] = []

    def recompute(site, **options):
        names.append(site.name)
        return site_recompute(site, **options)

    monkeypatch.setattr(planning_admin, "site_recompute", recompute)
    return names


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def _delete_selected(client, url: str, pks: list[int]):
    """The list's "delete selected", confirmed."""
    return client.post(url, {"action": "delete_selected", "_selected_action": pks, "post": "yes"}, follow=True)


def _chosen(kind: str, sites) -> list[int]:
    """Two records of ``kind`` at the first site and one at the second, none with records that keep them."""
    east, west = sites
    if kind == "plans":  # plans of the fans and of the limits, which nothing else names
        east_plans = ServicePlan.objects.filter(subsystem__telescope__site=east, subsystem__kind="cooling_fans")
        west_plans = ServicePlan.objects.filter(subsystem__telescope__site=west, subsystem__kind="limits")
        return [*east_plans.values_list("pk", flat=True)[:2], west_plans.values_list("pk", flat=True).first()]
    if kind == "mirrors":
        return [*Mirror.objects.filter(subsystem__telescope__site=east).values_list("pk", flat=True),
                *Mirror.objects.filter(subsystem__telescope__site=west).values_list("pk", flat=True)]
    return list(Telescope.objects.filter(name="Spare").values_list("pk", flat=True))


LISTS = {"plans": ("/admin/planning/serviceplan/", ServicePlan),
         "mirrors": ("/admin/mirrors/mirror/", Mirror),
         "telescopes": ("/admin/registry/telescope/", Telescope)}


@pytest.mark.parametrize("kind", list(LISTS))
def test_deleting_from_the_list_recomputes_each_site_of_the_records_once(
    two_sites, administrator_in_admin, recomputed, kind
):
    url, model = LISTS[kind]
    chosen = _chosen(kind, two_sites)
    assert len(chosen) >= 2
    response = _delete_selected(administrator_in_admin, url, chosen)
    assert not model.objects.filter(pk__in=chosen).exists()
    assert recomputed == ["Site east-hill", "Site west-hill"]
    assert "Due states of Site east-hill and Site west-hill recomputed." in _text(response)
    # The states left are the recompute's, not those stored before the deletion.
    assert PlanStatus.objects.exists() and not PlanStatus.objects.filter(reason=STALE).exists()


def test_deleting_one_plan_from_its_page_recomputes_its_site_as_the_list_does(
    two_sites, administrator_in_admin, recomputed
):
    plan = ServicePlan.objects.filter(subsystem__telescope__site=two_sites[1]).first()
    response = administrator_in_admin.post(f"/admin/planning/serviceplan/{plan.pk}/delete/", {"post": "yes"},
                                           follow=True)
    assert not ServicePlan.objects.filter(pk=plan.pk).exists()
    assert recomputed == ["Site west-hill"]
    assert "Due states of Site west-hill recomputed." in _text(response)
    assert not PlanStatus.objects.filter(site=two_sites[1], reason=STALE).exists()
    assert PlanStatus.objects.filter(site=two_sites[0], reason=STALE).exists()  # the other site's are untouched


def _kept(kind: str, site, by) -> tuple[int, str]:
    """A record of ``kind`` at ``site`` that another keeps by a protected key, and how Django's page names the other."""
    if kind == "telescopes":  # its subsystems (retired, never deleted)
        return Telescope.objects.get(site=site, name="T1").pk, "Subsystem: T1: Primary mirror"
    if kind == "plans":  # its service record (the log is never deleted)
        plan = ServicePlan.objects.filter(subsystem__telescope__site=site, subsystem__kind="cooling_fans").first()
        ServiceRecord.objects.create(subsystem=plan.subsystem, plan=plan, performed_on=site_today(site),
                                     performed_by=by, summary="Filters changed", created_by=by)
        return plan.pk, "Service record: "
    mirror = Mirror.objects.get(subsystem__telescope__site=site)  # its measurement (evidence, never deleted)
    ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=site_today(site), value=0.86, taken_by=by)
    return mirror.pk, "Reflectance measurement: "


@pytest.mark.parametrize("kind", list(LISTS))
def test_a_record_others_keep_is_refused_naming_them_from_the_list_as_from_its_own_page(
    two_sites, administrator_in_admin, recomputed, users, kind
):
    """Django said only that the account may not delete the records that keep it (which their admin never deletes),
    as if a permission were missing; nothing is deleted, from the list or from its page, and nothing recomputed."""
    url, model = LISTS[kind]
    kept, named = _kept(kind, two_sites[0], users["technician"])
    other = _chosen(kind, two_sites)[-1]  # one nothing keeps, ticked with it: the list deletes all or none
    for page in (
        _text(administrator_in_admin.post(url, {"action": "delete_selected", "_selected_action": [kept, other]})),
        _text(administrator_in_admin.get(f"{url}{kept}/delete/")),
    ):
        assert "would require deleting the following protected related objects" in page
        assert named in page
        assert "doesn't have permission" not in page and "Yes, I’m sure" not in page
    _delete_selected(administrator_in_admin, url, [kept, other])  # confirmed all the same, by hand
    administrator_in_admin.post(f"{url}{kept}/delete/", {"post": "yes"})
    assert model.objects.filter(pk__in=[kept, other]).count() == 2
    assert recomputed == []


def test_an_engineer_deletes_no_plan_from_the_list(two_sites, engineer_in_admin, recomputed):
    """Plans are retired by making them inactive; deleting one is the administrator's."""
    chosen = _chosen("plans", two_sites)
    page = engineer_in_admin.get("/admin/planning/serviceplan/").content.decode()
    assert 'value="delete_selected"' not in page
    _delete_selected(engineer_in_admin, "/admin/planning/serviceplan/", chosen)
    assert ServicePlan.objects.filter(pk__in=chosen).count() == len(chosen)
    assert recomputed == []
