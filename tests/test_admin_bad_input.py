"""Bad input on the mirror's admin pages gets a message beside its field and stores nothing, never a server error: a
band typed in micrometres, or outside the optical data the fresh value is computed from; a dust sensitivity or a
mirror's size beyond any real one (the lift form's bounds); and a stored measurement's page, read only, opens.
Our own rules of the admin (the project's: bad input gets a clear message naming the field, stores nothing)."""
from __future__ import annotations

import html
import re

import pytest

from observatory_ops.calc.coating import Layer, coating_curve
from observatory_ops.calc.exposure import DUST_SENSITIVITY_MAX
from observatory_ops.logbook.quantities import reflectance_text
from observatory_ops.mirrors.forms import MEASURABLE_NM
from observatory_ops.mirrors.models import CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Subsystem
from observatory_ops.workorders.forms import (
    LIFTED_MASS_MAX_KG,
    MIRROR_DIAMETER_MAX_MM,
    MIRROR_THICKNESS_MAX_MM,
    LiftForm,
)
from tests.conftest import site_in_use

pytestmark = pytest.mark.django_db

BARE_AL = []
AL_SIO2 = [{"material": "SiO2", "thickness_nm": 100}]


def _text(page) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", page.content.decode())).split())


@pytest.fixture(params=[BARE_AL, AL_SIO2], ids=["bare Al", "Al + SiO2"])
def mirror(request) -> Mirror:
    """A primary mirror of an invented site in use, coated today with aluminium, bare or under silica."""
    site = site_in_use("bad-input-hill", kinds=("primary_mirror",))
    primary = Subsystem.objects.get(telescope__site=site, kind="primary_mirror")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, material="borosilicate",
                                   cell_mass_kg=30)
    CoatingEvent.objects.create(mirror=mirror, coated_on=site_today(site), metal="al", layers=request.param)
    return mirror


def _stored(mirror: Mirror) -> tuple[list[dict], int, list[dict]]:
    """The mirror's row, its history's length and its coatings: what a refused post leaves as it was."""
    return (list(Mirror.objects.filter(pk=mirror.pk).values()), Mirror.history.filter(id=mirror.pk).count(),
            list(CoatingEvent.objects.filter(mirror=mirror).values()))


def _post(client, mirror: Mirror, **changed):
    """Post the mirror's admin change form as it stands, its coating row included, with ``changed`` figures."""
    page = client.get(f"/admin/mirrors/mirror/{mirror.pk}/change/")
    data = {name: ("" if value is None else value) for name, value in page.context["adminform"].form.initial.items()}
    data["subsystem"] = mirror.subsystem_id
    for formset in page.context["inline_admin_formsets"]:
        prefix = formset.formset.prefix
        data.update({f"{prefix}-{k}": v for k, v in formset.formset.management_form.initial.items()})
        for i, form in enumerate(formset.formset.forms):
            data.update({f"{prefix}-{i}-{name}": ("" if form[name].value() is None else form[name].value())
                         for name in form.fields})
    data.update(changed)
    return client.post(f"/admin/mirrors/mirror/{mirror.pk}/change/", data)


# --- the band ----------------------------------------------------------------------------------------------------


def test_the_band_is_bounded_by_where_the_optical_data_of_every_coating_material_overlap():
    # Al2O3's Sellmeier formula from 265.2 nm (Malitson 1962) and silver's table to 1937 nm (Johnson and Christy 1972),
    # as the files in calc/optical_data give them.
    assert MEASURABLE_NM == (265.2, 1937.0)


@pytest.mark.parametrize(("changed", "message"), [
    ({"band_from_nm": "0.4", "band_to_nm": "1.0"}, "Band from: 0.4 looks like micrometres: 400 nm. The band is in "
     "nanometres, 265.2 to 1,937 nm, where the optical data of every coating material overlap, so that the fresh "
     "value of any coating can be computed over the band."),
    ({"band_from_nm": "0.4", "band_to_nm": "1.0"}, "Band to: 1 looks like micrometres: 1000 nm."),
    ({"band_from_nm": "5"}, "Band from: 5 nm is outside 265.2 to 1,937 nm, where the optical data of every coating "
     "material overlap, so that the fresh value of any coating can be computed over the band. The band is in "
     "nanometres."),
    ({"band_from_nm": "7"}, "Band from: 7 nm is outside 265.2 to 1,937 nm"),
    ({"band_from_nm": "10"}, "Band from: 10 nm is outside 265.2 to 1,937 nm"),
    ({"band_from_nm": "-0"}, "Band from: -0 nm is outside 265.2 to 1,937 nm"),
    ({"band_from_nm": "-1"}, "Band from: -1 nm is outside 265.2 to 1,937 nm"),
    ({"band_from_nm": "265.1"}, "Band from: 265.1 nm is outside 265.2 to 1,937 nm"),
    ({"band_to_nm": "1e300"}, "Band to: 1e+300 nm is outside 265.2 to 1,937 nm"),
    ({"band_to_nm": "1937.1"}, "Band to: 1937.1 nm is outside 265.2 to 1,937 nm"),
    ({"band_to_nm": "1e999"}, "Enter a number."),
    # the dust sensitivity and the mirror's size
    ({"dust_sensitivity": "1e300"}, "Dust sensitivity: 1e+300 is out of bounds: enter a value at least 0 and at most "
     f"{DUST_SENSITIVITY_MAX} (0: dust does not matter; 1: an hour at twice the clean-air PM10 counts as two)."),
    ({"dust_sensitivity": "-1"}, "Dust sensitivity: -1 is out of bounds"),
    ({"diameter_mm": "1e300"}, f"Diameter (mm): 1e+300 is out of bounds: enter a value above 0 and at most "
     f"{MIRROR_DIAMETER_MAX_MM:,} (no single telescope mirror is that large"),
    ({"thickness_mm": "1e300"}, f"Thickness (mm): 1e+300 is out of bounds: enter a value above 0 and at most "
     f"{MIRROR_THICKNESS_MAX_MM:,} (the thickest mirror blanks are under 1,000 mm)."),
    ({"cell_mass_kg": "1e300"}, f"Cell mass (kg): 1e+300 is out of bounds: enter a value at least 0 and at most "
     f"{LIFTED_MASS_MAX_KG:,} (more than 100 t is no mirror lift)."),
])
def test_a_band_or_figure_out_of_bounds_is_refused_beside_its_field_and_nothing_is_stored(
    mirror, engineer_in_admin, changed, message
):
    before = _stored(mirror)
    response = _post(engineer_in_admin, mirror, **changed)
    assert response.status_code == 200
    assert message in _text(response)
    assert _stored(mirror) == before


def test_a_band_at_the_edges_of_the_optical_data_is_stored_and_its_fresh_value_computed(mirror, engineer_in_admin):
    low, high = MEASURABLE_NM
    response = _post(engineer_in_admin, mirror, band_from_nm=f"{low:g}", band_to_nm=f"{high:g}")
    assert response.status_code == 302, _text(response)[:2000]
    mirror.refresh_from_db()
    assert (mirror.band_from_nm, mirror.band_to_nm) == (low, high)
    layers = [Layer(x["material"], x["thickness_nm"]) for x in mirror.coatings.get().layers]
    fresh = coating_curve("al", layers, from_nm=low, to_nm=high, step_nm=5)["band_mean"]
    assert fresh > 0.8  # aluminium reflects about 0.9 over the visible and near infrared (from memory)
    page = _text(engineer_in_admin.get(mirror.get_absolute_url()))
    assert f"Computed fresh band reflectance {reflectance_text(fresh)}" in page


def test_the_band_field_says_its_unit_and_range(mirror, engineer_in_admin):
    page = _text(engineer_in_admin.get(f"/admin/mirrors/mirror/{mirror.pk}/change/"))
    assert "both edges in nanometres from 265.2 to 1,937 nm" in page


# --- dust sensitivity and the mirror's size ----------------------------------------------------------------------




@pytest.mark.parametrize(("field", "lift_field", "highest"), [
    ("diameter_mm", "diameter_mm", MIRROR_DIAMETER_MAX_MM), ("thickness_mm", "thickness_mm", MIRROR_THICKNESS_MAX_MM),
    ("cell_mass_kg", "fixture_kg", LIFTED_MASS_MAX_KG),
])
def test_the_admin_takes_a_mirrors_size_up_to_the_lift_forms_bound_and_refuses_it_above_as_the_lift_form_does(
    mirror, engineer_in_admin, field, lift_field, highest
):
    lift = {"diameter_mm": 500, "thickness_mm": 50, "hole_mm": 0, "material": "borosilicate",
            "lightweighting_fraction": 0, "fixture_kg": 30, "legs": 2, "angle_deg": 60}
    assert LiftForm({**lift, lift_field: highest}).is_valid()
    assert not LiftForm({**lift, lift_field: highest + 1}).is_valid()
    before = _stored(mirror)
    assert _post(engineer_in_admin, mirror, **{field: str(highest + 1)}).status_code == 200
    assert _stored(mirror) == before
    assert _post(engineer_in_admin, mirror, **{field: str(highest)}).status_code == 302
    assert getattr(Mirror.objects.get(pk=mirror.pk), field) == highest


def test_a_dust_sensitivity_at_its_bound_is_stored(mirror, engineer_in_admin):
    assert _post(engineer_in_admin, mirror, dust_sensitivity=str(DUST_SENSITIVITY_MAX)).status_code == 302
    assert Mirror.objects.get(pk=mirror.pk).dust_sensitivity == DUST_SENSITIVITY_MAX


# --- a stored measurement's page ---------------------------------------------------------------------------------


def test_a_stored_measurements_admin_page_opens_read_only_and_a_post_to_it_changes_nothing(
    mirror, users, engineer_in_admin
):
    measurement = ReflectanceMeasurement.objects.create(
        mirror=mirror, measured_on=site_today(mirror.subsystem.telescope.site), value=0.86, wavelength_nm=550,
        taken_by=users["engineer"],
    )
    url = f"/admin/mirrors/reflectancemeasurement/{measurement.pk}/change/"
    page = engineer_in_admin.get(url)
    assert page.status_code == 200
    assert "0.86" in _text(page) and "550" in _text(page)
    assert 'name="value"' not in page.content.decode()  # shown, not offered for change
    assert "Value confirmed" not in _text(page) and "Questioned" not in _text(page)  # the add page's question only
    before = list(ReflectanceMeasurement.objects.values())
    assert engineer_in_admin.post(url, {"value": "0.5", "measured_on": "2020-01-01"}).status_code == 403
    assert list(ReflectanceMeasurement.objects.values()) == before


def test_the_measurement_add_page_still_gives_the_wavelengths_bounds(mirror, admin_client):
    page = _text(admin_client.get("/admin/mirrors/reflectancemeasurement/add/"))
    assert "Otherwise the one wavelength measured, 265.2 to 1937 nm." in page


@pytest.mark.parametrize("diameter, thickness", [(0.7, 0.07), (27.56, 2.76)])  # metres; inches
def test_a_mirror_typed_in_metres_or_inches_is_refused_on_the_lift_form_naming_millimetres(diameter, thickness):
    """A bad-input review typed a 0.7 m mirror as 0.7 / 0.07 and in inches: the lift's mass came out 0.0 kg, the sling
    check held nothing and the work could start. Our own bounds (common practice, no published source): 50 mm across,
    3 mm thick."""
    from observatory_ops.workorders.forms import MIRROR_DIAMETER_MIN_MM, MIRROR_THICKNESS_MIN_MM, LiftForm

    assert (MIRROR_DIAMETER_MIN_MM, MIRROR_THICKNESS_MIN_MM) == (50, 3)
    form = LiftForm({"diameter_mm": diameter, "thickness_mm": thickness, "hole_mm": 0, "material": "borosilicate",
                     "lightweighting_fraction": 0, "fixture_kg": 0, "legs": 2, "angle_deg": 60, "wll_kg": 20})
    assert not form.is_valid()
    assert form.errors["diameter_mm"] == [
        f"Mirror diameter (mm): {diameter:g} mm is under 50 mm, smaller than any mirror a lift is planned for. It "
        f"reads millimetres: {diameter:g} m is {diameter * 1000:,.0f} mm, {diameter:g} in is "
        f"{diameter * 25.4:,.0f} mm. With a figure in another unit the mass, and the sling check, come out near "
        "nothing."]
    assert "Edge thickness (mm): " in form.errors["thickness_mm"][0]
    right = LiftForm({"diameter_mm": 700, "thickness_mm": 70, "hole_mm": 160, "material": "borosilicate",
                      "lightweighting_fraction": 0, "fixture_kg": 0, "legs": 2, "angle_deg": 60, "wll_kg": 20})
    assert right.is_valid(), right.errors


def test_a_plans_dust_sensitivity_is_held_to_the_same_bound(telescope):
    """calc.exposure.DUST_SENSITIVITY_MAX holds a plan's sensitivity as it holds a mirror's (1e300 counted 1e303
    dust-weighted hours); our own bound, no published source."""
    import datetime as dt

    from django.core.exceptions import ValidationError

    from observatory_ops.planning.models import ServicePlan

    fans = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name="Fans")
    plan = ServicePlan(subsystem=fans, name="Filters", counting_from=dt.date(2026, 1, 1), dust_sensitivity=1e300)
    with pytest.raises(ValidationError) as refused:
        plan.full_clean()
    assert "dust_sensitivity" in refused.value.message_dict
    plan.dust_sensitivity = DUST_SENSITIVITY_MAX
    plan.full_clean()
