"""A band-mean reflectance well above the fresh value of the mirror's coating is asked about, not stored at once: a
coating does not get better with use, so such a value is more often another band or another scale. The margin
(``forms.ABOVE_FRESH_MARGIN``, 0.02) is our own, twice the about 0.01 repeatability of hand-held reflectometers (from
memory); the fresh value is the characteristic-matrix band mean checked against tmm in tests/test_calc_coating.py."""
from __future__ import annotations

import re

from django.utils.html import strip_tags
from test_measurement_wavelength import mirror  # noqa: F401  (the fixture, used by name)

from observatory_ops.mirrors import services
from observatory_ops.mirrors.forms import ABOVE_FRESH_MARGIN
from observatory_ops.mirrors.models import ReflectanceMeasurement
from observatory_ops.planning.services import site_today


def _post(client, mirror, value, **more):  # noqa: F811
    day = site_today(mirror.subsystem.telescope.site)
    return client.post(f"/mirrors/{mirror.pk}/measurements/new/",
                       {"measured_on": day.isoformat(), "value": value, **more})


def test_a_band_mean_well_above_fresh_is_asked_about_and_nothing_is_stored(mirror, users, client):  # noqa: F811
    fresh, coating = services.fresh_band_on(mirror, site_today(mirror.subsystem.telescope.site))
    assert 0.85 < fresh < 0.93  # bare aluminium over 380-950 nm
    client.force_login(users["technician"])
    before = list(ReflectanceMeasurement.objects.values_list("pk", "value"))
    response = _post(client, mirror, round(fresh + ABOVE_FRESH_MARGIN + 0.01, 4))
    text = re.sub(r"\s+", " ", strip_tags(response.content.decode()))
    assert response.status_code == 200
    assert f"is above the fresh value of the coating of {coating.coated_on:%d %b %Y}" in text
    assert f"{fresh:.4f} as a band mean over 380-950 nm, by more than 0.02" in text
    assert 'tick "The value is right as measured"' in text.replace("&quot;", '"')
    assert list(ReflectanceMeasurement.objects.values_list("pk", "value")) == before


def test_ticked_it_is_stored_and_a_value_within_the_margin_is_not_asked(mirror, users, client):  # noqa: F811
    fresh, _ = services.fresh_band_on(mirror, site_today(mirror.subsystem.telescope.site))
    client.force_login(users["technician"])
    high = round(fresh + ABOVE_FRESH_MARGIN + 0.01, 4)
    asked = re.search(r'name="questioned" value="([^"]*)"', _post(client, mirror, high).content.decode()).group(1)
    assert _post(client, mirror, high + 0.001, value_confirmed="on", questioned=asked).status_code == 200  # not its
    assert not ReflectanceMeasurement.objects.filter(value__gt=high - 0.0001).exists()
    assert _post(client, mirror, high, value_confirmed="on", questioned=asked).status_code == 302
    assert _post(client, mirror, round(fresh + ABOVE_FRESH_MARGIN - 0.005, 4)).status_code == 302
    assert ReflectanceMeasurement.objects.filter(value=high).exists()


def test_a_single_wavelength_value_is_not_compared_with_the_band_mean(mirror, users, client):  # noqa: F811
    fresh, _ = services.fresh_band_on(mirror, site_today(mirror.subsystem.telescope.site))
    client.force_login(users["technician"])
    assert _post(client, mirror, round(fresh + 0.05, 4), wavelength_nm=550).status_code == 302


def test_a_reflectance_reading_of_the_mirror_is_asked_about_too(mirror, users, client):  # noqa: F811
    """Logged as a reading on the subsystem's page it joins the same decline fit (logbook.services.reading_log ->
    mirrors.services.measurement_from_reading), so the reading form asks the same question."""
    from observatory_ops.logbook.models import Reading

    site = mirror.subsystem.telescope.site
    fresh, coating = services.fresh_band_on(mirror, site_today(site))
    client.force_login(users["technician"])
    high = round(fresh + ABOVE_FRESH_MARGIN + 0.01, 4)
    import datetime as dt

    from django.utils import timezone

    taken = f"{timezone.localtime(timezone.now() - dt.timedelta(hours=1), site.zone):%Y-%m-%dT%H:%M}"  # site's time
    url = f"/subsystems/{mirror.subsystem.pk}/readings/new/"
    before = (list(Reading.objects.values_list("pk")), list(ReflectanceMeasurement.objects.values_list("pk")))
    response = client.post(url, {"quantity": "reflectance", "value": high, "taken_at": taken})
    text = re.sub(r"\s+", " ", strip_tags(response.content.decode())).replace("&quot;", '"')
    assert response.status_code == 200
    assert f"is above the fresh value of the coating of {coating.coated_on:%d %b %Y}" in text
    assert 'tick "The value is right as typed" and log it again' in text
    assert (list(Reading.objects.values_list("pk")), list(ReflectanceMeasurement.objects.values_list("pk"))) == before
    asked = re.search(r'name="questioned" value="([^"]*)"', response.content.decode()).group(1)
    assert client.post(url, {"quantity": "reflectance", "value": high, "taken_at": taken,
                             "value_confirmed": "on", "questioned": asked}).status_code == 302
    assert ReflectanceMeasurement.objects.filter(value=high, mirror=mirror).exists()


def test_a_reading_dated_in_the_future_is_refused_beside_its_field(mirror, users, client):  # noqa: F811
    """The service refused it as "a reading cannot be taken in the future" at the top of the form, naming no field."""
    import datetime as dt

    from django.utils import timezone

    from observatory_ops.logbook.models import Reading

    site = mirror.subsystem.telescope.site
    client.force_login(users["technician"])
    later = timezone.localtime(timezone.now() + dt.timedelta(days=1), site.zone)
    response = client.post(f"/subsystems/{mirror.subsystem.pk}/readings/new/",
                           {"quantity": "reflectance", "value": 0.8, "taken_at": f"{later:%Y-%m-%dT%H:%M}"})
    text = re.sub(r"\s+", " ", strip_tags(response.content.decode()))
    assert response.status_code == 200 and not Reading.objects.exists()
    assert f"Taken at: {later:%d %b %Y %H:%M} is in the future (it is " in text
    assert "at the site): enter when the reading was taken." in text
    assert response.context["form"].errors["taken_at"]


def test_a_decimal_comma_is_answered_with_the_point_to_use(mirror, users, client):  # noqa: F811
    """A reviewer typed 0,87 and read only "Enter a number."."""
    import datetime as dt

    from django.utils import timezone

    site = mirror.subsystem.telescope.site
    client.force_login(users["technician"])
    taken = f"{timezone.localtime(timezone.now() - dt.timedelta(hours=1), site.zone):%Y-%m-%dT%H:%M}"
    response = client.post(f"/subsystems/{mirror.subsystem.pk}/readings/new/",
                           {"quantity": "reflectance", "value": "0,87", "taken_at": taken})
    assert response.context["form"].errors["value"] == ["Enter a number, with a point for decimals (0.87, not 0,87)."]


def test_a_band_mean_far_below_what_a_coated_mirror_reflects_is_asked_about_on_both_forms(mirror, users, client):  # noqa: F811,E501
    """A bad-input review: a reflectance of 0 (a field left at 0) was stored at once and made the recoat overdue. A
    band mean under LOWEST_FRACTION_OF_FRESH (0.6, our own bound: a dirty aluminium mirror still reflects about 0.7 of a
    fresh 0.9, from memory) of its coating's fresh value is asked about on the mirror's form and on the reading form,
    and stored only once the box is ticked."""
    import datetime as dt

    from django.utils import timezone

    from observatory_ops.logbook.models import Reading
    from observatory_ops.mirrors.forms import LOWEST_FRACTION_OF_FRESH

    assert LOWEST_FRACTION_OF_FRESH == 0.6
    fresh, _ = services.fresh_band_on(mirror, site_today(mirror.subsystem.telescope.site))
    client.force_login(users["technician"])
    before = (list(Reading.objects.values_list("pk")), list(ReflectanceMeasurement.objects.values_list("pk")))
    for value in ("0", "-0", "0.3"):
        text = re.sub(r"\s+", " ", strip_tags(_post(client, mirror, value).content.decode()))
        assert (f"is far below what this mirror reflects (under 60% of the fresh value of its coating, {fresh:.4f} "
                "over 380-950 nm; a dirty aluminium mirror still reflects about 0.7)") in text, value
    site = mirror.subsystem.telescope.site
    taken = f"{timezone.localtime(timezone.now() - dt.timedelta(hours=1), site.zone):%Y-%m-%dT%H:%M}"
    url = f"/subsystems/{mirror.subsystem.pk}/readings/new/"
    response = client.post(url, {"quantity": "reflectance", "value": "0", "taken_at": taken})
    assert "0 is far below what this mirror reflects" in strip_tags(response.content.decode())
    assert (list(Reading.objects.values_list("pk")), list(ReflectanceMeasurement.objects.values_list("pk"))) == before
    asked = re.search(r'name="questioned" value="([^"]*)"', _post(client, mirror, "0.3").content.decode()).group(1)
    assert _post(client, mirror, "0.3", value_confirmed="on", questioned=asked).status_code == 302
    # Kept, it bends the straight line's fresh value R0 above 1: the recoat line is then drawn from the computed
    # fresh value, not above 1 (the site's recompute had stopped on it), and the page says why.
    state = services.mirror_forecast(mirror)
    assert state.fit is not None and state.fit.r0 > 1 and 0 < state.threshold < 1
    assert state.threshold_basis.endswith("is no reflectance")
    assert "is no reflectance, so check the measurements" in client.get(f"/mirrors/{mirror.pk}/").content.decode()
    assert _post(client, mirror, f"{0.6 * fresh + 0.01:.4f}").status_code == 302  # above the bound: not asked


def test_a_percentage_on_the_measurement_form_is_told_as_a_fraction(mirror, users, client):  # noqa: F811
    client.force_login(users["technician"])
    text = strip_tags(_post(client, mirror, "87").content.decode())
    assert "A reflectance is a fraction between 0 and 1: 87 % is 0.87." in text
    assert not ReflectanceMeasurement.objects.filter(value=87).exists()
