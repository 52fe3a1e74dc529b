"""The mirror's admin page as an engineer setting up a real site meets it: a cleaning added there restarts the
cleaning plans as the mirror page does (one service), coating layers are typed as the `coating` command takes them,
a mirror record goes only on a mirror subsystem, and a mirror subsystem without one says so on its page."""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from conftest import site_in_use
from django.core.exceptions import ValidationError
from django.core.management import call_command
from django.core.management.base import CommandError

from observatory_ops.calc.coating import Layer
from observatory_ops.logbook.models import ServiceRecord
from observatory_ops.mirrors import layers_text, services
from observatory_ops.mirrors.models import CleaningEvent, CoatingEvent, Mirror
from observatory_ops.planning import metrics
from observatory_ops.planning.models import PlanStatus, ServicePlan
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Subsystem
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db


@pytest.fixture
def primary(db) -> Subsystem:
    """A primary mirror subsystem with its catalogue plans (a recoat plan, a CO2-snow cleaning plan counting
    dust-weighted hours), on an invented site in use, and a dome beside it."""
    site = site_in_use("mirror-admin", kinds=("primary_mirror", "enclosure"))
    return Subsystem.objects.get(telescope__site=site, kind="primary_mirror")


@pytest.fixture
def mirror(primary) -> Mirror:
    return Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")


def _today(mirror) -> dt.date:
    return site_today(mirror.subsystem.telescope.site)


def _cleaning_plan(mirror) -> ServicePlan:
    return ServicePlan.objects.get(subsystem=mirror.subsystem, triggers__metric=metrics.DUST_HOURS)


def _text(page) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", page.content.decode())).split())


def _admin_post(client, mirror, coatings=(), cleanings=()):
    """Post the mirror's admin change form as it stands, with new rows in its coatings and cleanings inlines."""
    page = client.get(f"/admin/mirrors/mirror/{mirror.pk}/change/")
    form = page.context["adminform"].form
    data = {name: ("" if value is None else value) for name, value in form.initial.items()}
    data["subsystem"] = mirror.subsystem_id
    for formset in page.context["inline_admin_formsets"]:
        management, prefix = formset.formset.management_form, formset.formset.prefix
        data.update({f"{prefix}-{k}": v for k, v in management.initial.items()})
        rows = {CoatingEvent: coatings, CleaningEvent: cleanings}[formset.formset.model]
        data[f"{prefix}-TOTAL_FORMS"] = management.initial["INITIAL_FORMS"] + len(rows)
        for i, row in enumerate(rows, start=management.initial["INITIAL_FORMS"]):
            data.update({f"{prefix}-{i}-{k}": v for k, v in row.items()})
    return client.post(f"/admin/mirrors/mirror/{mirror.pk}/change/", data)


# --- a cleaning added in the admin goes the mirror page's way -----------------------------------------------


def test_a_cleaning_added_in_the_admin_restarts_the_cleaning_plan_as_one_logged_on_the_mirror_page(
    mirror, engineer_in_admin
):
    cleaned_on = _today(mirror) - dt.timedelta(days=4)
    response = _admin_post(engineer_in_admin, mirror,
                           cleanings=[{"cleaned_on": cleaned_on.isoformat(), "method": "co2_snow", "note": ""}])
    assert response.status_code == 302, _text(response)[:2000]
    plan = _cleaning_plan(mirror)
    record = ServiceRecord.objects.get(plan=plan)
    # The same record the mirror page's cleaning writes (tests/test_mirror_record.py): dated the cleaning, so named.
    assert (record.performed_on, record.summary) == (cleaned_on, "Cleaning: CO2 snow")
    assert PlanStatus.objects.get(plan=plan).last_service_on == cleaned_on


def test_a_cleanings_work_order_is_not_chosen_in_the_admin(mirror, users, engineer_in_admin):
    """Set by the finish of the order that did it, never chosen: a site review linked a cleaning to another site's
    work order from the admin's list of every site's orders."""
    from observatory_ops.registry.models import Site, Telescope
    from observatory_ops.workorders.services import work_order_ad_hoc

    other = Site.objects.create(name="Far Knoll", slug="far-knoll", latitude_deg=-31.0, longitude_deg=116.0,
                                elevation_m=400, time_zone="Australia/Perth")
    roof = subsystem_create(Telescope.objects.create(site=other, name="K1", aperture_m=0.4, mount="fork"), "other",
                            "Roof", counting_from=dt.date(2026, 1, 1), no_hazards_found=True)
    elsewhere = work_order_ad_hoc(other, [roof], "Roof check", users["engineer"], steps="Look.")
    page = engineer_in_admin.get(f"/admin/mirrors/mirror/{mirror.pk}/change/").content.decode()
    assert 'name="cleanings-__prefix__-work_order"' not in page
    cleaned_on = _today(mirror) - dt.timedelta(days=4)
    response = _admin_post(engineer_in_admin, mirror, cleanings=[
        {"cleaned_on": cleaned_on.isoformat(), "method": "co2_snow", "note": "", "work_order": elsewhere.pk}])
    assert response.status_code == 302, _text(response)[:2000]
    assert CleaningEvent.objects.get(mirror=mirror, cleaned_on=cleaned_on).work_order is None


def test_the_mirror_page_and_the_admin_restart_a_cleaning_through_one_service(monkeypatch, mirror, users):
    """One path: the admin's cleaning rows call the service the mirror page's ``cleaning_log`` calls, as its coating
    rows call the one ``coating_log`` calls."""
    from observatory_ops.mirrors.admin import CleaningFormSet, CoatingFormSet

    assert CleaningFormSet.restart is services.cleaning_service_records_log
    assert CoatingFormSet.restart is services.coating_service_records_log
    calls = []
    monkeypatch.setattr(services, "cleaning_service_records_log", lambda cleaning, by: calls.append(cleaning))
    cleaning = services.cleaning_log(mirror, users["technician"], _today(mirror) - dt.timedelta(days=9), "wash")
    assert calls == [cleaning]


def test_a_cleaning_redated_in_the_admin_restarts_the_plan_from_its_new_date(mirror, users, engineer_in_admin):
    first = _today(mirror) - dt.timedelta(days=10)
    cleaning = services.cleaning_log(mirror, users["technician"], first, "co2_snow")
    page = engineer_in_admin.get(f"/admin/mirrors/mirror/{mirror.pk}/change/")
    data = {name: ("" if value is None else value) for name, value in page.context["adminform"].form.initial.items()}
    for formset in page.context["inline_admin_formsets"]:
        data.update({f"{formset.formset.prefix}-{k}": v for k, v in formset.formset.management_form.initial.items()})
    redated = first + dt.timedelta(days=3)
    data.update({"cleanings-0-id": cleaning.pk, "cleanings-0-mirror": mirror.pk,
                 "cleanings-0-cleaned_on": redated.isoformat(), "cleanings-0-method": "co2_snow",
                 "cleanings-0-note": ""})
    response = engineer_in_admin.post(f"/admin/mirrors/mirror/{mirror.pk}/change/", data)
    assert response.status_code == 302, _text(response)[:2000]
    assert sorted(ServiceRecord.objects.filter(plan=_cleaning_plan(mirror)).values_list("performed_on", flat=True)) \
        == [first, redated]


def test_a_future_cleaning_in_the_admin_is_refused_naming_it_and_nothing_is_stored(mirror, engineer_in_admin):
    tomorrow = _today(mirror) + dt.timedelta(days=1)
    response = _admin_post(engineer_in_admin, mirror,
                           cleanings=[{"cleaned_on": tomorrow.isoformat(), "method": "wash", "note": ""}])
    assert response.status_code == 200
    assert "The cleaning restarts the mirror's cleaning plans from this date, and" in _text(response)
    assert "cannot be in the future" in _text(response)
    assert not CleaningEvent.objects.exists() and not ServiceRecord.objects.exists()


# --- coating layers typed as the coating command takes them --------------------------------------------------


@pytest.mark.parametrize(
    ("typed", "stored"),
    [
        ("SiO2:100", [{"material": "SiO2", "thickness_nm": 100.0}]),
        ("Al2O3:30, SiO2:80", [{"material": "Al2O3", "thickness_nm": 30.0},
                               {"material": "SiO2", "thickness_nm": 80.0}]),
        ("Al2O3:30\nsio2 : 80\n", [{"material": "Al2O3", "thickness_nm": 30.0},
                                   {"material": "SiO2", "thickness_nm": 80.0}]),
        ("", []),
    ],
)
def test_a_coating_added_in_the_admin_takes_the_layers_as_the_coating_command_does(
    mirror, engineer_in_admin, typed, stored
):
    coated_on = _today(mirror) - dt.timedelta(days=5)
    response = _admin_post(engineer_in_admin, mirror,
                           coatings=[{"coated_on": coated_on.isoformat(), "metal": "al", "layers": typed, "note": ""}])
    assert response.status_code == 302, _text(response)[:2000]
    assert CoatingEvent.objects.get(mirror=mirror).layers == stored


@pytest.mark.parametrize(
    ("typed", "message"),
    [
        ("SiO2:100, Unobtainium:50", "Layer 'Unobtainium:50': 'Unobtainium' is not a known material; known "
                                     "materials: al, ag, SiO2, MgF2, Al2O3."),
        ("SiO2", "Layer 'SiO2': write MATERIAL:THICKNESS_NM, e.g. SiO2:100."),
        ("SiO2:-5", "Layer 'SiO2:-5': the thickness must be a number of nanometres, 0 or more."),
        ('[{"material": "SiO2", "thickness_nm": 100}]', "is not a known material; known materials: al, ag, SiO2"),
    ],
)
def test_a_bad_layer_in_the_admin_is_named_with_the_materials_known_and_nothing_is_stored(
    mirror, engineer_in_admin, typed, message
):
    coated_on = _today(mirror) - dt.timedelta(days=5)
    response = _admin_post(engineer_in_admin, mirror,
                           coatings=[{"coated_on": coated_on.isoformat(), "metal": "al", "layers": typed, "note": ""}])
    assert response.status_code == 200
    assert message in _text(response)
    assert not CoatingEvent.objects.exists() and not ServiceRecord.objects.exists()


def test_the_layers_format_is_written_under_the_field_not_only_in_a_tooltip(mirror, users, engineer_in_admin):
    services.coating_log(mirror, users["technician"], _today(mirror) - dt.timedelta(days=30), "al",
                         [{"material": "Al2O3", "thickness_nm": 30.0}, {"material": "SiO2", "thickness_nm": 80.0}])
    page = engineer_in_admin.get(f"/admin/mirrors/mirror/{mirror.pk}/change/").content.decode()
    # Django's stacked inline writes each field's help in a visible <div class="help">; a tabular one only in a title.
    assert re.search(r'<div class="help"[^>]*>\s*<div>Overcoats as MATERIAL:THICKNESS_NM from the metal outward, one '
                     r"layer per line or comma-separated, e.g. SiO2:100\. Empty: bare metal\.</div>", page)
    # A stored coating shows its layers in the same typed form, ready to be saved again unchanged.
    assert ">\nAl2O3:30\nSiO2:80</textarea>" in page


def test_the_command_the_mirror_page_and_the_admin_read_layers_with_one_parser(mirror, users, client):
    assert layers_text.parse("Al2O3:30, SiO2:80") == [Layer("Al2O3", 30.0), Layer("SiO2", 80.0)]
    with pytest.raises(CommandError, match="--layer: layer 'Unobtainium:50': 'Unobtainium' is not a known material"):
        call_command("coating", "--metal", "al", "--layer", "Unobtainium:50")
    client.force_login(users["technician"])
    response = client.post(f"/mirrors/{mirror.pk}/coatings/new/", {
        "coated_on": (_today(mirror) - dt.timedelta(days=1)).isoformat(), "metal": "al", "layers": "SiO2:x",
    })
    assert "Layer 'SiO2:x': the thickness must be a number of nanometres, 0 or more." in _text(response)


def test_a_comma_separated_layer_list_gives_the_command_the_same_curve_as_repeated_layers(capsys):
    call_command("coating", "--metal", "al", "--layer", "Al2O3:30,SiO2:80", "--json")
    listed = capsys.readouterr().out
    call_command("coating", "--metal", "al", "--layer", "Al2O3:30", "--layer", "SiO2:80", "--json")
    assert listed == capsys.readouterr().out


# --- the plan's readings help ---------------------------------------------------------------------------------


def test_a_recoat_plans_readings_help_names_the_mirrors_quantities_not_brake_pressure(mirror, engineer_in_admin):
    recoat = ServicePlan.objects.filter(subsystem=mirror.subsystem, triggers__metric=metrics.RECOAT_LINE).first()
    text = _text(engineer_in_admin.get(f"/admin/planning/serviceplan/{recoat.pk}/change/"))
    assert "brake_pressure_bar" not in text
    assert ("The codes usual on its subsystem's kind (Primary mirror): reflectance (Band reflectance, fraction)."
            in text)


def test_a_plan_on_a_kind_where_nothing_is_usually_measured_says_any_code_may_be_given(mirror, engineer_in_admin):
    other = Subsystem.objects.create(telescope=mirror.subsystem.telescope, kind="other", name="Weather mast")
    plan = ServicePlan.objects.create(subsystem=other, name="Inspect the mast", counting_from=_today(mirror))
    text = _text(engineer_in_admin.get(f"/admin/planning/serviceplan/{plan.pk}/change/"))
    assert "brake_pressure_bar" not in text
    assert ('Readings its work orders ask for, as a JSON list of {"quantity": code, "limit": "in words"}; [] for '
            "none. Nothing is usually measured on its subsystem's kind (Other): any code of the reading form.") in text


# --- a mirror record only on a mirror subsystem ---------------------------------------------------------------


def test_the_mirror_add_page_offers_only_mirror_subsystems_in_service_without_a_record(mirror, engineer_in_admin):
    telescope = mirror.subsystem.telescope
    secondary = subsystem_create(telescope, "secondary_mirror", "Secondary mirror", counting_from=_today(mirror))
    retired = subsystem_create(telescope, "secondary_mirror", "Old secondary", counting_from=_today(mirror))
    retired.retired_on = _today(mirror)
    retired.save()
    page = engineer_in_admin.get("/admin/mirrors/mirror/add/")
    offered = {pk for pk, _label in page.context["adminform"].form.fields["subsystem"].choices if pk}
    assert {int(str(pk)) for pk in offered} == {secondary.pk}  # not the dome, the retired one, nor the recorded primary
    change = engineer_in_admin.get(f"/admin/mirrors/mirror/{mirror.pk}/change/")
    offered = {int(str(pk)) for pk, _ in change.context["adminform"].form.fields["subsystem"].choices if pk}
    assert offered == {secondary.pk, mirror.subsystem_id}  # its own stays offered


def test_a_mirror_record_on_a_dome_is_refused_by_its_clean_naming_the_field(primary):
    dome = Subsystem.objects.get(telescope=primary.telescope, kind="enclosure")
    with pytest.raises(ValidationError) as refused:
        Mirror(subsystem=dome, diameter_mm=500, thickness_mm=50, material="borosilicate").full_clean()
    assert refused.value.message_dict["subsystem"] == [
        "T1: Enclosure is of the kind Enclosure (dome, shutter, roof): a mirror record belongs only to a primary "
        "mirror or secondary mirror subsystem, since it joins the telescope's optical train and sets the recoat line."
    ]


def test_a_mirror_posted_in_the_admin_for_a_dome_is_refused_and_not_stored(primary, engineer_in_admin):
    dome = Subsystem.objects.get(telescope=primary.telescope, kind="enclosure")
    response = engineer_in_admin.post("/admin/mirrors/mirror/add/", {
        "subsystem": dome.pk, "diameter_mm": "500", "thickness_mm": "50", "hole_mm": "0", "material": "borosilicate",
        "lightweighting_fraction": "0", "cell_mass_kg": "0", "recoat_loss": "0.08", "band_from_nm": "400",
        "band_to_nm": "1000", "dust_sensitivity": "1",
        "coatings-TOTAL_FORMS": "0", "coatings-INITIAL_FORMS": "0",
        "cleanings-TOTAL_FORMS": "0", "cleanings-INITIAL_FORMS": "0",
    })
    assert response.status_code == 200
    assert "Select a valid choice" in _text(response)
    assert not Mirror.objects.exists()


# --- a mirror subsystem without its record says so ------------------------------------------------------------


def test_a_primary_without_a_mirror_record_says_its_reflectance_trigger_is_not_judged(primary, users, client):
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    page = client.get(primary.get_absolute_url())
    assert "No mirror record: this mirror's reflectance is not followed, so its recoat-line trigger is not judged" \
        in _text(page)
    link = f'/admin/mirrors/mirror/add/?subsystem={primary.pk}'
    assert f'href="{link}"' in page.content.decode()
    # The link opens the add page with the subsystem chosen.
    add = client.get(link)
    assert add.context["adminform"].form.initial["subsystem"] == str(primary.pk)


def test_a_viewer_is_told_who_adds_the_record_and_a_recorded_mirror_shows_no_such_note(primary, users, client):
    client.force_login(users["viewer"])
    text = _text(client.get(primary.get_absolute_url()))
    assert "No mirror record" in text and "An engineer adds it under Register and plans, Mirrors." in text
    Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate")
    assert "No mirror record" not in _text(client.get(primary.get_absolute_url()))
    dome = Subsystem.objects.get(telescope=primary.telescope, kind="enclosure")
    assert "No mirror record" not in _text(client.get(dome.get_absolute_url()))


# --- a retired mirror takes no cleaning or measurement in the admin either -------------------------------------------


def test_the_admin_refuses_a_cleaning_or_a_measurement_after_the_mirrors_retire_day(mirror, administrator_in_admin):
    """As the mirror page does (``registry.services.retired_work_problem``); on or before the retire day it is its
    history entered late, and kept. The administrator, who may add measurements in the admin (an engineer may not)."""
    client = administrator_in_admin
    retired_on = _today(mirror) - dt.timedelta(days=5)
    Subsystem.objects.filter(pk=mirror.subsystem_id).update(retired_on=retired_on)
    mirror.refresh_from_db()
    after = retired_on + dt.timedelta(days=1)
    response = _admin_post(client, mirror,
                           cleanings=[{"cleaned_on": after.isoformat(), "method": "co2_snow", "note": ""}])
    assert response.status_code == 200
    assert (f"was retired on {retired_on:%d %b %Y}, so it was no longer in service on {after:%d %b %Y}: a cleaning "
            "dated after its retire day is refused") in _text(response)
    assert not CleaningEvent.objects.filter(mirror=mirror).exists()
    response = _admin_post(client, mirror,
                           cleanings=[{"cleaned_on": retired_on.isoformat(), "method": "co2_snow", "note": ""}])
    assert response.status_code == 302, _text(response)[:2000]
    response = client.post("/admin/mirrors/reflectancemeasurement/add/", {
        "mirror": mirror.pk, "measured_on": after.isoformat(), "value": "0.85", "wavelength_nm": "", "position": "",
        "taken_by": "", "notes": ""})
    assert response.status_code == 200
    assert "a measurement dated after its retire day is refused" in _text(response)
    assert not mirror.measurements.exists()
