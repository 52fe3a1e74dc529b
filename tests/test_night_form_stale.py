"""The night form never puts its figures over a stored night it did not show (a bad-input review): a correction
made on a page loaded before someone else saved the night, or a blank form typed as a night already stored, is
shown the stored figures first, and a second save stores the form's. And the form keeps the night it was asked for."""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.logbook import services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.registry.models import Telescope


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    return recomputes_recorded


@pytest.fixture
def technician(client, users):
    client.force_login(users["technician"])
    return users["technician"]


@pytest.fixture
def two_telescopes(site):
    return [Telescope.objects.create(site=site, name=name, aperture_m=0.4, mount="fork") for name in ("R40", "T2")]


@pytest.fixture
def night(site):
    return services.site_today(site) - dt.timedelta(days=3)


def _url(site, **asked) -> str:
    query = "&".join(f"{key}={value}" for key, value in asked.items())
    return f"/sites/{site.slug}/nights/new/" + (f"?{query}" if query else "")


def _as_shown(response, **typed) -> dict:
    """What the browser sends back from the page ``response`` made: every field as the page shows it, and ``typed``."""
    form = response.context["form"]
    return {name: "" if form[name].value() is None else form[name].value() for name in form.fields} | typed


def _messages(response) -> list[str]:
    return [str(m) for m in response.context["messages"]]


def _figures(site, night) -> tuple:
    stored = NightUsage.objects.get(site=site, night=night, telescope=None)
    return stored.open_hours, stored.slews, stored.pm10_ugm3


def test_a_correction_loaded_before_another_save_is_refused_with_the_changes_then_saved_the_second_time(
    client, site, technician, users, night
):
    NightUsage.objects.create(site=site, night=night, open_hours=5, slews=4, pm10_ugm3=4.0)
    page = client.get(_url(site, night=night.isoformat()))
    # Meanwhile the engineer saves the same night with other figures.
    services.nights_ingest(site, [{"night": night.isoformat(), "open_hours": 5, "slews": 33, "pm10_ugm3": 77}],
                           source=NightUsage.Source.FORM, by=users["engineer"])
    refused = client.post(_url(site), _as_shown(page, open_hours="6"))
    assert refused.status_code == 200
    assert _figures(site, night) == (5, 33, 77.0)  # nothing stored
    form = refused.context["form"]
    [error] = form.non_field_errors()
    assert error.startswith(f"The night of {night} ({services.WHOLE_SITE}) was changed since this page was loaded, "
                            "or was logged already.")
    # The engineer's figures, which the technician left as the page showed them, are filled in as stored now (a
    # walk-through's second save put back the engineer's corrections); the technician's own change is named.
    assert ("Changed meanwhile, and now filled in below as stored: Number of slews: 4 on this page, 33 now; Mean PM10 "
            "dust while open (µg/m³): 4 on this page, 77 now.") in error
    assert (f"Saving again stores this form's figures over the stored ones: {form.fields['open_hours'].label}: 5 "
            "stored → 6 in this form.") in error
    assert (form["open_hours"].value(), form["slews"].value(), form["pm10_ugm3"].value()) == ("6", "33", "77")
    # The page now carries the night as stored: saving again is the confirmation.
    assert form["loaded_as"].value() == services.night_stored_token(site, night, "")
    assert f"Correct the night of {night:%a %d %b %Y}" in refused.content.decode()  # still the stored night's page
    saved = client.post(_url(site), _as_shown(refused))
    assert saved.status_code == 302
    assert _figures(site, night) == (6, 33, 77.0)


def test_a_blank_form_typed_as_a_night_already_stored_shows_its_figures_before_storing_over_them(
    client, site, technician, night
):
    NightUsage.objects.create(site=site, night=night, open_hours=5, slews=33, pm10_ugm3=77.0)
    page = client.get(_url(site))
    assert page.context["form"]["loaded_as"].value() == ""  # a blank form shows nothing stored
    refused = client.post(_url(site), _as_shown(page, night=night.isoformat(), open_hours="6", slews="4"))
    assert refused.status_code == 200
    assert _figures(site, night) == (5, 33, 77.0)
    [error] = refused.context["form"].non_field_errors()
    assert "Number of slews: 33 stored → 4 in this form" in error and "5 stored → 6 in this form" in error
    assert "PM10" not in error  # left empty: the stored figure is kept, not changed
    assert client.post(_url(site), _as_shown(refused)).status_code == 302
    assert _figures(site, night) == (6, 4, 77.0)


def test_a_correction_nobody_changed_meanwhile_saves_at_once(client, site, technician, two_telescopes, night):
    r40 = two_telescopes[0]
    NightUsage.objects.create(site=site, night=night, open_hours=5, slews=4, pm10_ugm3=4.0)
    NightUsage.objects.create(site=site, telescope=r40, night=night, open_hours=4, slews=20)
    page = client.get(_url(site, night=night.isoformat()))
    assert client.post(_url(site), _as_shown(page, open_hours="6")).status_code == 302
    assert _figures(site, night) == (6, 4, 4.0)
    page = client.get(_url(site, night=night.isoformat(), telescope="R40"))
    assert page.context["form"]["telescope"].value() == "R40"
    assert client.post(_url(site), _as_shown(page, slews="21")).status_code == 302
    assert NightUsage.objects.get(telescope=r40, night=night).slews == 21


def test_a_night_asked_for_that_is_not_stored_is_kept_and_said_to_be_new(client, site, technician, two_telescopes,
                                                                         night):
    page = client.get(_url(site, night=night.isoformat(), telescope="R40"))
    form = page.context["form"]
    assert (form["night"].value(), form["telescope"].value()) == (night.isoformat(), "R40")
    assert _messages(page) == [f"No night of {night} (R40) is stored yet: this form logs it as a new night."]
    whole = client.get(_url(site, night=night.isoformat()))
    assert _messages(whole) == [
        f"No night of {night} ({services.WHOLE_SITE}) is stored yet: this form logs it as a new night."]
    # Still not stored when saved: it is stored at once, as the R40's night.
    assert client.post(_url(site), _as_shown(page, open_hours="3")).status_code == 302
    assert NightUsage.objects.get(night=night).telescope == two_telescopes[0]


def test_a_telescope_the_site_does_not_have_is_named_with_the_sites_telescopes(client, site, technician,
                                                                                 two_telescopes, night):
    page = client.get(_url(site, night=night.isoformat(), telescope="NOPE"))
    assert _messages(page) == [
        f'{site.name} has no telescope "NOPE" (its telescopes are R40, T2): choose whose night this is below.']
    form = page.context["form"]
    assert form["night"].value() == night.isoformat()  # the night asked is kept
    assert form["telescope"].value() is None and form["loaded_as"].value() == ""  # nobody's night chosen for them


def test_a_well_formed_date_that_does_not_exist_is_called_no_such_date(client, site, technician):
    page = client.get(_url(site, night="2026-02-30"))
    # February 2026 has 28 days: 2026 is not divisible by 4 (Gregorian calendar rule).
    assert _messages(page) == ["2026-02-30 is no such date (February 2026 has 28 days): a blank form instead."]
    assert page.context["form"]["night"].value() == (services.site_today(site) - dt.timedelta(days=1)).isoformat()
    assert not NightUsage.objects.exists()
