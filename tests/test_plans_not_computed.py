"""Service plans that cannot be computed are not accepted silently, and those already stored are named where people
look.

A reviewer setting up a new site saved, on a subsystem of the kind Other, a plan with no trigger and a plan whose only
trigger was the mirror's reflectance: both were accepted, the due list showed fewer rows than plans, the dashboard's
counts left them out, and the subsystem page blamed a recompute. Now the admin refuses both (a plan needs a trigger;
only a mirror subsystem takes a mirror record, ``mirrors.models.Mirror.clean``), a plan on a mirror subsystem whose
record is not entered yet is saved with a warning, and the subsystem page and the dashboard say why each stored plan
has no due state (``planning.selectors.not_computed_reason``). No figure is computed here: the checks are of what is
refused, stored and said.
"""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from conftest import site_in_use

from observatory_ops.logbook.models import Reading
from observatory_ops.mirrors.models import CoatingEvent, Mirror
from observatory_ops.planning import metrics
from observatory_ops.planning.admin import NO_TRIGGER_REFUSAL
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.planning.selectors import (
    NO_TRIGGER,
    NOT_RECOMPUTED,
    not_computed_counts,
    not_computed_reason,
    plans_not_computed,
    status_counts,
)
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db

#: The reason of a plan whose only trigger is the reflectance of a mirror not entered yet, as the pages say it.
NO_MIRROR_RECORD = ("its only trigger reads the mirror's reflectance and this subsystem has no mirror record: add the "
                    "mirror and its coating in the admin (Mirrors)")


@pytest.fixture
def site():
    """An invented site in use with a primary mirror (its catalogue plans, no mirror record yet) and a dome."""
    return site_in_use("plans-not-computed", kinds=("primary_mirror", "enclosure"))


@pytest.fixture
def wheel(site) -> Subsystem:
    """A filter wheel, of the kind Other (no hazards found), registered today with no plan: as the reviewer's."""
    return subsystem_create(site.telescopes.get(), "other", "Filter wheel", counting_from=site_today(site),
                            no_hazards_found=True)


@pytest.fixture
def primary(site) -> Subsystem:
    return Subsystem.objects.get(telescope__site=site, kind="primary_mirror")


@pytest.fixture
def dull(primary) -> ServicePlan:
    """A plan on the primary whose only trigger is its reflectance (the catalogue's recoat plan has a calendar
    trigger beside it): it waits for the mirror record."""
    plan = ServicePlan.objects.create(subsystem=primary, name="Recoat when dull", counting_from=site_today(
        primary.telescope.site))
    Trigger.objects.create(plan=plan, metric=metrics.RECOAT_LINE, limit=1)
    return plan


def _text(page) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", page.content.decode())).split())


def _plan_form(subsystem: Subsystem, name: str, triggers: list[tuple[str, str]]) -> dict:
    """The admin's add form of a plan on ``subsystem`` with ``triggers`` (metric, limit) as its rows; with none, the
    one row the page shows left blank."""
    data = {
        "subsystem": subsystem.pk, "name": name, "task": "", "steps_powered": "", "steps": "", "steps_restore": "",
        "tools": "", "parts": "", "readings": "[]", "estimated_hours": "1", "dust_sensitivity": "0", "basis": "",
        "active": "on", "counting_from": site_today(subsystem.telescope.site).isoformat(), "counting_from_given": "on",
        "triggers-TOTAL_FORMS": str(max(len(triggers), 1)), "triggers-INITIAL_FORMS": "0",
        "triggers-MIN_NUM_FORMS": "1", "triggers-MAX_NUM_FORMS": "1000",
    }
    for i, (metric, limit) in enumerate(triggers or [("", "")]):
        data.update({f"triggers-{i}-metric": metric, f"triggers-{i}-limit": limit, f"triggers-{i}-quantity": "",
                     f"triggers-{i}-direction": "above"})
    return data


def _trigger_messages(response) -> tuple[list[str], list[str]]:
    """(the trigger rows' messages on their metric, the messages of the rows as a whole) of a refused save."""
    assert response.status_code == 200, "saved, not refused"
    formset = response.context["inline_admin_formsets"][0].formset
    return [e for form in formset.forms for e in form.errors.get("metric", [])], list(formset.non_form_errors())


# --- 1: the admin refuses what could never be computed -------------------------------------------------------------


def test_a_plan_with_no_trigger_is_refused_saying_what_to_add_and_nothing_is_stored(wheel, engineer_in_admin):
    page = engineer_in_admin.get("/admin/planning/serviceplan/add/")
    assert page.context["inline_admin_formsets"][0].formset.total_form_count() == 1  # the one row it needs
    response = engineer_in_admin.post("/admin/planning/serviceplan/add/", _plan_form(wheel, "Clean the wheel", []))
    _, whole = _trigger_messages(response)
    assert whole == [NO_TRIGGER_REFUSAL]
    assert NO_TRIGGER_REFUSAL.startswith(
        "Add a trigger: a plan without one is never computed, so it would be left out of the due list and the site's "
        "counts.")
    assert html.escape(NO_TRIGGER_REFUSAL) in response.content.decode()  # shown on the page, not only in the form
    assert not ServicePlan.objects.filter(subsystem=wheel).exists()


def test_an_inactive_plan_is_saved_without_a_trigger(wheel, engineer_in_admin):
    """Not counted, so never missing from the due list: an old plan without a trigger can be made inactive as it is."""
    data = _plan_form(wheel, "Old wheel plan", [])
    del data["active"]
    response = engineer_in_admin.post("/admin/planning/serviceplan/add/", data)
    assert response.status_code == 302, _trigger_messages(response)
    assert ServicePlan.objects.get(subsystem=wheel, name="Old wheel plan").active is False


def test_deleting_every_trigger_of_a_stored_plan_is_refused_and_its_triggers_stay(
    site, primary, administrator_in_admin
):
    """Deleting is the administrator's (the engineer's rows offer no deletion)."""
    client = administrator_in_admin
    plan = ServicePlan.objects.filter(subsystem=primary).exclude(triggers__metric=metrics.RECOAT_LINE).first()
    before = list(plan.triggers.values_list("pk", flat=True))
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    page = client.get(url)
    assert page.context["inline_admin_formsets"][0].formset.can_delete
    data = {k: ("" if v is None else v) for k, v in page.context["adminform"].form.initial.items()
            if not isinstance(v, list | dict) or k == "readings"}
    data.update({"subsystem": primary.pk, "counting_from": plan.counting_from.isoformat(), "readings": "[]"})
    formset = page.context["inline_admin_formsets"][0].formset
    data.update({f"triggers-{k}": v for k, v in formset.management_form.initial.items()})
    data["triggers-TOTAL_FORMS"] = len(before)
    for i, form in enumerate(formset.initial_forms):
        data.update({f"triggers-{i}-{name}": "" if value is None else value for name, value in form.initial.items()})
        data.update({f"triggers-{i}-id": form.instance.pk, f"triggers-{i}-plan": plan.pk, f"triggers-{i}-DELETE": "on"})
    _, whole = _trigger_messages(client.post(url, data))
    assert whole == [NO_TRIGGER_REFUSAL]
    assert list(plan.triggers.values_list("pk", flat=True)) == before


def test_a_reflectance_trigger_on_a_subsystem_that_cannot_have_a_mirror_is_refused_on_its_row(
    wheel, engineer_in_admin
):
    response = engineer_in_admin.post("/admin/planning/serviceplan/add/",
                                      _plan_form(wheel, "Clean the wheel", [(metrics.RECOAT_LINE, "1")]))
    on_row, _ = _trigger_messages(response)
    assert on_row == [
        f"{wheel} is of the kind Other, which has no mirror record and cannot have one (only a primary mirror or "
        "secondary mirror subsystem does): a trigger on the mirror's reflectance could never be computed, and its "
        "plan would be left out of the due list. Choose another trigger, or put the plan on the mirror's own "
        "subsystem."
    ]
    assert not ServicePlan.objects.filter(subsystem=wheel).exists()


def test_a_plan_with_a_trigger_it_can_count_is_saved_on_the_same_subsystem(wheel, engineer_in_admin):
    response = engineer_in_admin.post("/admin/planning/serviceplan/add/", _plan_form(
        wheel, "Clean the wheel", [(metrics.CALENDAR_DAYS, "180")]))
    assert response.status_code == 302
    plan = ServicePlan.objects.get(subsystem=wheel)
    assert PlanStatus.objects.filter(plan=plan).exists()


def test_a_mirror_subsystem_without_its_record_takes_the_trigger_and_the_save_says_it_waits_for_the_record(
    primary, engineer_in_admin
):
    """A primary mirror whose record is simply not entered yet is not refused: the plan is saved and the engineer is
    told it waits for the record."""
    response = engineer_in_admin.post("/admin/planning/serviceplan/add/", _plan_form(
        primary, "Recoat when dull", [(metrics.RECOAT_LINE, "1")]), follow=True)
    plan = ServicePlan.objects.get(subsystem=primary, name="Recoat when dull")
    said = [str(m) for m in response.context["messages"]]
    assert ("Recoat when dull is left out of the due list and the site's counts until it can be computed. Its only "
            "trigger reads the mirror's reflectance and this subsystem has no mirror record: add the mirror and its "
            "coating in the admin (Mirrors).") in said
    assert not PlanStatus.objects.filter(plan=plan).exists()


def test_the_row_check_refuses_only_where_no_mirror_record_can_be(site):
    """The same check on the model (``Trigger.clean``), for every kind of the catalogue: only the mirror kinds
    (``mirrors.models.TRAIN_KINDS``) take a reflectance trigger without a mirror record."""
    from django.core.exceptions import ValidationError

    from observatory_ops.mirrors.models import TRAIN_KINDS

    for code in KINDS:
        subsystem = Subsystem(telescope=site.telescopes.get(), kind=code, name="x")
        trigger = Trigger(plan=ServicePlan(subsystem=subsystem, name="p"), metric=metrics.RECOAT_LINE, limit=1)
        if code in TRAIN_KINDS:
            trigger.clean()
        else:
            with pytest.raises(ValidationError, match="cannot have one"):
                trigger.clean()


# --- the catalogue's plans always have triggers --------------------------------------------------------------------


def test_every_catalogue_plan_has_a_trigger_and_is_computed_even_before_a_mirror_record(site):
    """Every kind's plans, as a subsystem registered with them brings them: each has a trigger, and after a recompute
    each has a due state, the primary's recoat plan too while its mirror record is not entered (a calendar trigger
    beside its reflectance one)."""
    assert all(template.triggers for kind in KINDS.values() for template in kind.plans)
    telescope = site.telescopes.get()
    for code in KINDS:
        if code not in ("primary_mirror", "enclosure"):
            subsystem_create(telescope, code, f"{code} here", counting_from=site_today(site) - dt.timedelta(days=100),
                             no_hazards_found=code == "other")
    plans = ServicePlan.objects.filter(subsystem__telescope__site=site)
    assert plans.count() == sum(len(kind.plans) for kind in KINDS.values())
    assert not plans.filter(triggers__isnull=True).exists()
    site_recompute(site)
    assert plans_not_computed(site) == []
    assert PlanStatus.objects.filter(site=site).count() == plans.count()


# --- 2: stored plans that cannot be computed, said where people look -----------------------------------------------


def test_each_reason_a_stored_plan_has_no_due_state(site, primary, dull, wheel, users):
    """Plans stored before the admin refused them, or waiting for a record or a reading, each with its reason."""
    no_trigger = ServicePlan.objects.create(subsystem=wheel, name="No trigger", counting_from=site_today(site))
    reflectance = ServicePlan.objects.create(subsystem=wheel, name="Reflectance", counting_from=site_today(site))
    Trigger.objects.create(plan=reflectance, metric=metrics.RECOAT_LINE, limit=1)
    started = site_today(site) - dt.timedelta(days=10)
    reading = ServicePlan.objects.create(subsystem=wheel, name="Settle", counting_from=started)
    Trigger.objects.create(plan=reading, metric=metrics.READING, quantity="settle_time_s", limit=1.2)
    recoat = dull
    site_recompute(site)

    assert not_computed_reason(no_trigger) == NO_TRIGGER == "no trigger: add one in the admin (Service plans)"
    assert not_computed_reason(reflectance) == (
        "its only trigger reads the mirror's reflectance and a subsystem of the kind Other has no mirror record (only "
        "a primary mirror or secondary mirror subsystem does): replace the trigger in the admin (Service plans) with "
        "one this subsystem can count")
    assert not_computed_reason(reading) == (
        f"its only trigger watches readings of settle time after a slew and none is logged since the plan's start "
        f"({started:%d %b %Y}): log one (Log a reading, on the subsystem's page)")
    assert not_computed_reason(recoat) == NO_MIRROR_RECORD

    # A mirror record without a coating: still no fresh value, so no recoat line.
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    recoat = ServicePlan.objects.get(pk=recoat.pk)
    assert not_computed_reason(recoat) == ("its only trigger reads the mirror's reflectance and its mirror has no "
                                           "coating recorded: add the coating in the admin (Mirrors)")
    # Its coating and a reading: both computed at the next recompute, and no reason given.
    CoatingEvent.objects.create(mirror=mirror, coated_on=site_today(site) - dt.timedelta(days=50), metal="al",
                                layers=[])
    Reading.objects.create(subsystem=wheel, quantity="settle_time_s", unit="s", value=0.8, taken_by=users["technician"],
                           taken_at=dt.datetime.combine(site_today(site), dt.time(1), tzinfo=dt.UTC))
    for plan in (recoat, reading):
        assert not_computed_reason(ServicePlan.objects.get(pk=plan.pk)) == NOT_RECOMPUTED
    site_recompute(site)
    for plan in (recoat, reading):
        assert not_computed_reason(ServicePlan.objects.get(pk=plan.pk)) is None


def test_a_plan_not_counted_has_no_reason_and_a_plan_saved_after_the_recompute_waits_for_it(site, wheel):
    plan = ServicePlan.objects.create(subsystem=wheel, name="Calendar", counting_from=site_today(site))
    Trigger.objects.create(plan=plan, metric=metrics.CALENDAR_DAYS, limit=90)
    assert not_computed_reason(plan) == NOT_RECOMPUTED
    plan.active = False
    assert not_computed_reason(plan) is None  # inactive: "Not counted" on its page, not missing


def test_the_subsystem_page_says_which_reason_applies(site, primary, dull, wheel, users, client):
    no_trigger = ServicePlan.objects.create(subsystem=wheel, name="No trigger", counting_from=site_today(site))
    site_recompute(site)
    client.force_login(users["viewer"])
    wheel_page = _text(client.get(wheel.get_absolute_url()))
    assert ("Left out of the due list and the site's counts. No trigger: add one in the admin (Service plans)."
            in wheel_page)
    assert "the site has not been recomputed" not in wheel_page
    mirror_page = client.get(primary.get_absolute_url())
    assert f'id="plan-{dull.pk}-not-computed"' in mirror_page.content.decode()
    assert ("Left out of the due list and the site's counts. Its only trigger reads the mirror's reflectance and this "
            "subsystem has no mirror record: add the mirror and its coating in the admin (Mirrors)."
            ) in _text(mirror_page)
    # Saved after the recompute (no page of today recomputes a site computed today): said as such.
    ServicePlan.objects.filter(pk=no_trigger.pk).update(name="Calendar now")
    Trigger.objects.create(plan=no_trigger, metric=metrics.CALENDAR_DAYS, limit=90)
    assert ("Left out of the due list and the site's counts. Not computed yet: the site has not been recomputed since "
            "the plan was saved.") in _text(client.get(wheel.get_absolute_url()))


def test_the_dashboard_names_the_plans_left_out_of_its_counts_with_links(site, primary, dull, wheel, users, client):
    no_trigger = ServicePlan.objects.create(subsystem=wheel, name="Clean the wheel", counting_from=site_today(site))
    ServicePlan.objects.create(subsystem=wheel, name="Old plan", counting_from=site_today(site), active=False)
    site_recompute(site)
    counted = ServicePlan.objects.filter(subsystem__telescope__site=site, active=True).count()
    assert sum(status_counts(site).values()) == counted - 2  # the two below are missing from the counts

    client.force_login(users["viewer"])
    page = client.get(site.get_absolute_url())
    body = page.content.decode()
    assert f'href="{wheel.get_absolute_url()}#plan-{no_trigger.pk}"' in body
    assert f'href="{primary.get_absolute_url()}#plan-{dull.pk}"' in body
    text = _text(page).replace(" .", ".")  # the link's end tag read as a space
    assert "2 service plans not computed, so left out of the counts above and the due list:" in text
    assert f"{wheel}: Clean the wheel. No trigger: add one in the admin (Service plans)." in text
    assert (f"{primary}: Recoat when dull. Its only trigger reads the mirror's reflectance and this subsystem has no "
            "mirror record: add the mirror and its coating in the admin (Mirrors).") in text
    assert "Old plan" not in text  # inactive: not counted, so not missing


def test_a_dashboard_with_every_plan_computed_shows_no_such_notice(site, primary, dull, users, client):
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    CoatingEvent.objects.create(mirror=mirror, coated_on=site_today(site) - dt.timedelta(days=50), metal="al",
                                layers=[])
    site_recompute(site)
    assert plans_not_computed(site) == []
    client.force_login(users["viewer"])
    assert 'id="not-computed"' not in client.get(site.get_absolute_url()).content.decode()


def test_the_due_list_says_how_many_plans_it_cannot_list_and_where_they_are_named(site, primary, dull, wheel, users,
                                                                                   client):
    ServicePlan.objects.create(subsystem=wheel, name="Clean the wheel", counting_from=site_today(site))
    site_recompute(site)
    client.force_login(users["viewer"])
    text = _text(client.get("/due/"))
    assert (f"Not listed: 2 service plans at {site.name} cannot be computed yet. The site's dashboard names them and "
            "says what to do.") in text
    assert f'href="{site.get_absolute_url()}#not-computed"' in client.get(f"/due/?site={site.slug}").content.decode()
    assert not_computed_counts([site]) == [(site, 2)]


def test_the_due_list_reads_them_in_two_queries_whatever_the_number_of_sites(site, wheel, users, client):
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    from observatory_ops.registry.models import Site, Telescope

    for n in range(3):
        other = Site.objects.create(name=f"Other {n}", slug=f"other-{n}", latitude_deg=40, longitude_deg=-3,
                                    elevation_m=800, time_zone="UTC")
        scope = Telescope.objects.create(site=other, name="T1", aperture_m=0.5, mount="fork")
        ServicePlan.objects.create(subsystem=subsystem_create(scope, "other", "Wheel", counting_from=site_today(other),
                                                              no_hazards_found=True),
                                   name="Clean the wheel", counting_from=site_today(other))
    with CaptureQueriesContext(connection) as queries:
        found = not_computed_counts()
    assert len(queries) == 2  # the counts by site, and those sites
    assert [(found_site.slug, count) for found_site, count in found] == [
        ("other-0", 1), ("other-1", 1), ("other-2", 1), (site.slug, 3)]  # the fixture's site, not recomputed
