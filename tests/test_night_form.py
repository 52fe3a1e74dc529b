"""Typing in one night on the nightly log page: the rules of the CSV import and the API, nothing of its own."""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning.services import site_today


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    return recomputes_recorded


@pytest.fixture
def technician(client, users):
    client.force_login(users["technician"])
    return users["technician"]


def _rows(site):
    return list(NightUsage.objects.filter(site=site).order_by("night").values())


def test_a_night_typed_in_is_stored_as_typed_in_and_recomputes_the_site(client, site, technician, recomputes):
    night = site_today(site) - dt.timedelta(days=1)
    response = client.post(f"/sites/{site.slug}/nights/new/", {"night": night.isoformat(), "open_hours": "7.25",
                                                               "slews": "40", "pm10_ugm3": "", "dew": "yes"})
    assert response.status_code == 302
    stored = NightUsage.objects.get(site=site, night=night)
    assert (stored.open_hours, stored.slews, stored.pm10_ugm3, stored.dew, stored.source) == (7.25, 40, None, True,
                                                                                                "form")
    assert recomputes == [site.pk]


def test_correcting_one_figure_keeps_the_others(client, site, technician):
    night = site_today(site) - dt.timedelta(days=2)
    NightUsage.objects.create(site=site, night=night, open_hours=6, slews=33, brake_cycles=30, pm10_ugm3=41.0)
    form = client.get(f"/sites/{site.slug}/nights/new/?night={night.isoformat()}")
    assert form.context["form"].initial["slews"] == "33"  # the stored night, ready to correct
    client.post(f"/sites/{site.slug}/nights/new/", {"night": night.isoformat(), "open_hours": "6.5",
                                                    "loaded_as": form.context["form"].initial["loaded_as"]})
    stored = NightUsage.objects.get(site=site, night=night)
    assert (stored.open_hours, stored.slews, stored.brake_cycles, stored.pm10_ugm3) == (6.5, 33, 30, 41.0)


@pytest.mark.parametrize(
    "values, field, words",
    [
        ({"open_hours": "30"}, "open_hours", "24"),
        ({"open_hours": "5", "slews": "4.5"}, "slews", "whole number"),
        ({"open_hours": "5", "humidity_pct": "-3"}, "humidity_pct", "0"),
    ],
)
def test_a_bad_figure_is_named_beside_its_field_and_nothing_is_stored(client, site, technician, values, field, words):
    before = _rows(site)
    night = (site_today(site) - dt.timedelta(days=1)).isoformat()
    response = client.post(f"/sites/{site.slug}/nights/new/", {"night": night, **values})
    assert response.status_code == 200
    assert words in " ".join(response.context["form"].errors[field])
    assert _rows(site) == before


def test_a_night_in_the_future_and_a_malformed_date_are_refused(client, site, technician):
    tomorrow = (site_today(site) + dt.timedelta(days=1)).isoformat()
    response = client.post(f"/sites/{site.slug}/nights/new/", {"night": tomorrow, "open_hours": "5"})
    assert "has not begun yet" in " ".join(response.context["form"].errors["night"])
    assert client.get(f"/sites/{site.slug}/nights/new/?night=yesterday").status_code == 200
    assert not NightUsage.objects.exists()


def test_a_viewer_cannot_log_a_night(client, site, users):
    client.force_login(users["viewer"])
    response = client.post(f"/sites/{site.slug}/nights/new/", {"night": "2026-01-01", "open_hours": "5"})
    assert response.status_code == 403 and not NightUsage.objects.exists()


@pytest.mark.parametrize(("local", "night"), [
    (dt.datetime(2026, 6, 15, 18, 15), dt.date(2026, 6, 14)),  # the afternoon: tonight has not begun
    (dt.datetime(2026, 6, 15, 9, 0), dt.date(2026, 6, 14)),  # the morning after: the night just ended
    (dt.datetime(2026, 6, 16, 1, 0), dt.date(2026, 6, 15)),  # after midnight: the night still going on
])
def test_a_new_night_form_starts_at_the_night_before_the_sites_today(client, site, technician, monkeypatch, local,
                                                                    night):
    """A review logged last night's figures at 18:15 under tonight's date: the form started at the night the present
    moment belongs to (``calc.night_of``, noon to noon), in the afternoon tonight's, not begun. It starts at the night
    before the site's today (the site is in Europe/Madrid; the clock is set there)."""
    from zoneinfo import ZoneInfo

    from django.utils import timezone

    moment = local.replace(tzinfo=ZoneInfo(site.time_zone))
    monkeypatch.setattr(timezone, "now", lambda: moment)
    page = client.get(f"/sites/{site.slug}/nights/new/").content.decode()
    assert f'name="night" value="{night.isoformat()}"' in page


def test_a_figure_refused_beside_its_field_is_named_by_the_fields_label_not_the_columns(client, site, technician):
    """A site engineer's review: "open_hours cannot be below 0" under "Hours the dome was open"."""
    night = (site_today(site) - dt.timedelta(days=1)).isoformat()
    response = client.post(f"/sites/{site.slug}/nights/new/", {"night": night, "open_hours": "-1"})
    label = response.context["form"].fields["open_hours"].label
    assert response.context["form"].errors["open_hours"] == [f"{label}: cannot be below 0 (got -1)"]
    # An impossible night is set apart from its long label, not spliced into the sentence (a bad-input review).
    response = client.post(f"/sites/{site.slug}/nights/new/", {"night": "2023-02-29", "open_hours": "1"})
    night_label = response.context["form"].fields["night"].label
    assert response.context["form"].errors["night"] == [
        f"{night_label}: 2023-02-29 is no such date (February 2023 has 28 days)"]
