"""A reflectance measurement taken at one wavelength: the mirror's measurement form asks for it (empty is the band
mean), refuses a wavelength outside the coating materials' optical data, and the mirror page lists it while the
decline fit and the recoat forecast keep to band means, as they did before the form offered the field."""
from __future__ import annotations

import datetime as dt
import re

import pytest
from conftest import site_in_use
from django.contrib.messages import get_messages
from django.utils.html import strip_tags

from observatory_ops.mirrors import services
from observatory_ops.mirrors.models import CoatingEvent, Mirror, ReflectanceMeasurement
from observatory_ops.planning import metrics
from observatory_ops.planning.models import PlanStatus
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Subsystem


@pytest.fixture
def mirror(db, users):
    """A bare-aluminium primary coated 200 days ago on a site logging 6 open hours a night at PM10 35 ug/m3, with
    three band measurements since, falling 0.01 every 50 days."""
    site = site_in_use("mirror-wavelength", kinds=("primary_mirror",), nights=220)
    primary = Subsystem.objects.get(telescope__site=site, kind="primary_mirror")
    mirror = Mirror.objects.create(subsystem=primary, diameter_mm=500, thickness_mm=50, hole_mm=120,
                                   material="borosilicate", cell_mass_kg=30, band_from_nm=380, band_to_nm=950)
    today = site_today(site)
    CoatingEvent.objects.create(mirror=mirror, coated_on=today - dt.timedelta(days=200), metal="al")
    for days_ago, value in ((150, 0.90), (100, 0.89), (50, 0.88)):
        services.measurement_log(mirror, users["technician"], today - dt.timedelta(days=days_ago), value)
    return mirror


def _url(mirror) -> str:
    return f"/mirrors/{mirror.pk}/measurements/new/"


def _text(response) -> str:
    return re.sub(r"\s+", " ", strip_tags(response.content.decode()))


def test_the_form_asks_for_the_wavelength_and_says_empty_is_the_mirrors_band(mirror, users, client):
    client.force_login(users["technician"])
    text = _text(client.get(_url(mirror)))
    assert "Wavelength (nm)" in text
    # The band is the mirror's own (380 to 950 nm in the fixture), not the 400-1000 nm default.
    assert "Empty: averaged over the mirror's band from 380 to 950 nm." in text
    # 265.2 to 1937 nm: where the sapphire formula (Malitson 1962, 0.2652-5.577 um) and the silver table (Johnson
    # and Christy 1972, to 1.937 um), the narrowest of the embedded optical data, overlap.
    assert "the one wavelength measured, 265.2 to 1937 nm" in text


@pytest.mark.parametrize("typed", ["0.65", "6500", "200"])  # micrometres, angstroms, below the optical data
def test_a_wavelength_outside_the_optical_data_is_refused_naming_the_field(mirror, users, client, typed):
    client.force_login(users["technician"])
    before = list(ReflectanceMeasurement.objects.values_list("pk", "value", "wavelength_nm"))
    response = client.post(_url(mirror), {
        "measured_on": site_today(mirror.subsystem.telescope.site).isoformat(), "value": "0.85", "wavelength_nm": typed,
    })
    assert response.status_code == 200
    assert (f"Wavelength: {float(typed):g} nm is outside 265.2 to 1937 nm, where the optical data of the "
            "coating materials overlap") in _text(response)
    assert list(ReflectanceMeasurement.objects.values_list("pk", "value", "wavelength_nm")) == before


def test_a_single_wavelength_measurement_is_listed_but_leaves_the_fit_and_the_forecast_as_they_were(
    mirror, users, client
):
    today = site_today(mirror.subsystem.telescope.site)
    before = services.mirror_forecast(mirror)
    status_before = PlanStatus.objects.get(plan__subsystem=mirror.subsystem, metric=metrics.RECOAT_LINE)
    client.force_login(users["technician"])
    # Far below the band values: were it fitted as a band mean, R0, the slope and the crossing would all move.
    response = client.post(_url(mirror), {"measured_on": today.isoformat(), "value": "0.70", "wavelength_nm": "650",
                                          "position": "centre", "instrument": "handheld reflectometer"})
    assert response.status_code == 302
    assert [str(m) for m in get_messages(response.wsgi_request)] == [
        "Measurement at 650 nm logged. It is listed below but not fitted: the decline is fitted to band means, so "
        "the fit and the recoat forecast are unchanged."
    ]
    stored = ReflectanceMeasurement.objects.get(wavelength_nm__isnull=False)
    assert (stored.value, stored.wavelength_nm, stored.position) == (0.70, 650.0, "centre")
    after = services.mirror_forecast(mirror)
    assert (after.fit.n_points, after.fit.r0, after.fit.rate_per_hour, after.crossing) == (
        before.fit.n_points, before.fit.r0, before.fit.rate_per_hour, before.crossing
    )
    status_after = PlanStatus.objects.get(plan__subsystem=mirror.subsystem, metric=metrics.RECOAT_LINE)
    assert (status_after.value, status_after.forecast_date) == (status_before.value, status_before.forecast_date)

    page = client.get(mirror.get_absolute_url()).content.decode()
    assert "<td>0.7000</td><td>650 nm</td><td>centre</td><td>handheld reflectometer</td>" in page
    assert page.count("<td>band mean</td>") == 3  # the three band measurements of the fixture
    assert "Measurements at one wavelength are listed but not fitted" in page


def test_a_band_measurement_typed_in_still_joins_the_fit(mirror, users, client):
    today = site_today(mirror.subsystem.telescope.site)
    before = services.mirror_forecast(mirror).fit.n_points
    client.force_login(users["technician"])
    response = client.post(_url(mirror), {"measured_on": today.isoformat(), "value": "0.87", "wavelength_nm": ""})
    assert [str(m) for m in get_messages(response.wsgi_request)] == ["Measurement logged; the decline fit is updated."]
    assert ReflectanceMeasurement.objects.get(measured_on=today).wavelength_nm is None
    assert services.mirror_forecast(mirror).fit.n_points == before + 1
