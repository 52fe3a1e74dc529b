"""Every record names itself. The admin's deletion pages list the records a deletion takes along, or that stop it, by
their names, and count them by kind: a reviewer read "Plan status: PlanStatus object (47)", "CleaningEvent object (5)",
"ReflectanceMeasurement object (16)" and the plural "Plan statuss". Each record now says what it is, of which
subsystem, mirror or site, and when; each kind is counted in a plural that is English. The sites, people and records
are invented."""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from django.apps import apps
from django.db import models
from django.utils import timezone

from observatory_ops.mirrors.models import CleaningEvent, Mirror, RecoatPlan, ReflectanceMeasurement
from observatory_ops.planning.models import DigestSent, NightSky, PlanStatus, ServicePlan
from observatory_ops.planning.services import site_recompute
from observatory_ops.registry.services import subsystem_create
from tests.conftest import constant_sky, site_in_use

pytestmark = pytest.mark.django_db

def _project_models() -> list[type[models.Model]]:
    """The project's own models, the change history's copies aside (django-simple-history names those itself)."""
    return [model for model in apps.get_models()
            if model.__module__.startswith("observatory_ops.") and not model.__name__.startswith("Historical")]


@pytest.mark.parametrize("model", _project_models(), ids=lambda model: model._meta.label)
def test_every_model_of_the_project_names_its_records(model):
    """Not Django's "<Model> object (<id>)": a ``__str__`` of the model's own (or of a model of the project it derives
    from)."""
    own = next(cls for cls in model.__mro__ if "__str__" in vars(cls))
    assert own is not models.Model


@pytest.mark.parametrize("model", _project_models(), ids=lambda model: model._meta.label)
def test_no_kind_is_counted_in_a_plural_django_got_wrong(model):
    """Django's plural adds an "s", wrong after s, x, z, ch, sh and a consonant's y ("plan statuss", "night skys"):
    such a kind gives its own. (A plural wrong otherwise, "digest sents", is read on its deletion page below.)"""
    name, plural = str(model._meta.verbose_name), str(model._meta.verbose_name_plural)
    if re.search(r"(s|x|z|ch|sh|[^aeiou]y)$", name):
        assert plural != f"{name}s"


# --- the deletion pages --------------------------------------------------------------------------------------------


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def test_deleting_a_plan_names_its_due_state_and_counts_it(administrator_in_admin):
    site = site_in_use("tor-brae", kinds=("cooling_fans",))
    site_recompute(site)
    plan = ServicePlan.objects.get(subsystem__telescope__site=site, name="Replace fan filters")
    state = PlanStatus.objects.get(plan=plan)
    page = _text(administrator_in_admin.get(f"/admin/planning/serviceplan/{plan.pk}/delete/"))
    computed = f"{state.computed_at.astimezone(dt.UTC):%d %b %Y %H:%M}"
    assert f"Plan status: T1: Cooling fans: Replace fan filters: {state.status}, computed {computed} UTC" in page
    assert "Plan statuses: 1" in page
    assert "object (" not in page


@pytest.fixture
def mirror_with_its_record(telescope, users):
    """A primary mirror with a cleaning, two reflectance measurements (one at a wavelength, withdrawn) and a recoat
    plan: the records that keep it (protected keys)."""
    primary = subsystem_create(telescope, "primary_mirror", "Primary mirror", counting_from=dt.date(2025, 1, 1))
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=60, material="borosilicate")
    CleaningEvent.objects.create(mirror=mirror, cleaned_on=dt.date(2025, 6, 1), method="co2_snow")
    ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=dt.date(2025, 6, 2), value=0.86,
                                          taken_by=users["technician"])
    ReflectanceMeasurement.objects.create(mirror=mirror, measured_on=dt.date(2025, 6, 3), value=0.83217,
                                          wavelength_nm=550, taken_by=users["technician"], withdrawn_at=timezone.now(),
                                          withdrawn_by=users["engineer"], withdrawn_reason="sensor not zeroed")
    RecoatPlan.objects.create(mirror=mirror, starts_on=dt.date(2026, 9, 7), ends_on=dt.date(2026, 9, 18),
                              phases=[], cost=12.5, created_by=users["engineer"])
    return mirror


def test_a_mirror_kept_by_its_record_names_each_cleaning_measurement_and_recoat_plan(
    mirror_with_its_record, administrator_in_admin
):
    page = _text(administrator_in_admin.get(f"/admin/mirrors/mirror/{mirror_with_its_record.pk}/delete/"))
    assert "would require deleting the following protected related objects" in page
    for named in (
        "Cleaning event: T1: Primary mirror: cleaned 01 Jun 2025 (CO2 snow)",
        "Reflectance measurement: T1: Primary mirror: reflectance 0.8600 over its band, 02 Jun 2025",
        "Reflectance measurement: T1: Primary mirror: reflectance 0.8322 at 550 nm, 03 Jun 2025 (withdrawn)",
        "Recoat plan: T1: Primary mirror: recoat from 07 Sep 2026 to 18 Sep 2026",
    ):
        assert named in page, named
    assert "object (" not in page


def test_deleting_a_site_names_its_cached_nights_and_the_digests_sent_and_counts_them(site, administrator_in_admin):
    """A site with nothing registered (nothing keeps it): its nights' sky, cached, and the people mailed its digest go
    with it."""
    constant_sky(site, dt.date(2026, 6, 15), dt.date(2026, 6, 16))
    DigestSent.objects.create(site=site, day=dt.date(2026, 6, 15), address="duty.engineer@example.org")
    page = _text(administrator_in_admin.get(f"/admin/registry/site/{site.pk}/delete/"))
    assert "Night sky: Test Hill: night of Mon 15 Jun 2026 (10.0 h dark)" in page
    assert "Night sky: Test Hill: night of Tue 16 Jun 2026 (10.0 h dark)" in page
    assert "Digest sent: Test Hill: due digest of 15 Jun 2026 sent to duty.engineer@example.org" in page
    assert "Night skies: 2" in page and "Digests sent: 1" in page
    assert "object (" not in page
    assert NightSky.objects.filter(site=site).count() == 2  # only asked: nothing is deleted before it is confirmed
