"""A subsystem's "in service since" date: optional, never after the site's today (in the site's own time zone),
never before 1900, never after the day it was retired; refused with the field named, and stored data left as it
was. Edited where subsystems are edited (the admin) and shown on the subsystem page. What the reliability page
does with it is in tests/test_reliability_page.py."""
from __future__ import annotations

import datetime as dt
from zoneinfo import ZoneInfo

import pytest
from django.core.exceptions import ValidationError
from django.utils import timezone

from observatory_ops.registry.models import Site, Subsystem, Telescope
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db

# 15 Jun 2026 11:30 UTC. Offsets from the IANA tz database: Pacific/Kiritimati is UTC+14 (since 1995), so its
# local date is already 16 Jun (01:30); Pacific/Pago_Pago is UTC-11, so it is still 15 Jun (00:30).
NOW_UTC = dt.datetime(2026, 6, 15, 11, 30, tzinfo=dt.UTC)


def test_the_hand_worked_local_dates_agree_with_the_tz_database():
    assert NOW_UTC.astimezone(ZoneInfo("Pacific/Kiritimati")).date() == dt.date(2026, 6, 16)
    assert NOW_UTC.astimezone(ZoneInfo("Pacific/Pago_Pago")).date() == dt.date(2026, 6, 15)


def _subsystem_at(time_zone: str) -> Subsystem:
    site = Site.objects.create(name=f"Site {time_zone}", slug=time_zone.split("/")[1].lower().replace("_", "-"),
                               latitude_deg=1.9, longitude_deg=-157.4, time_zone=time_zone)
    telescope = Telescope.objects.create(site=site, name="K1", aperture_m=0.4, mount="fork")
    return Subsystem.objects.create(telescope=telescope, kind="encoder", name="Axis 1 encoder")


def _refusal(subsystem: Subsystem) -> str:
    with pytest.raises(ValidationError) as refused:
        subsystem.full_clean()
    assert list(refused.value.message_dict) == ["in_service_since"]
    return refused.value.message_dict["in_service_since"][0]


def test_it_is_optional(telescope):
    encoder = subsystem_create(telescope, "encoder", "Axis 1 encoder", counting_from=dt.date(2026, 1, 1))
    assert encoder.in_service_since is None
    encoder.full_clean()


def test_a_day_after_the_sites_today_is_refused_naming_the_field(monkeypatch):
    """The site's today is its local date: the same moment is 16 Jun on Kiritimati and 15 Jun on Pago Pago."""
    monkeypatch.setattr(timezone, "now", lambda: NOW_UTC)
    kiritimati, pago_pago = _subsystem_at("Pacific/Kiritimati"), _subsystem_at("Pacific/Pago_Pago")
    kiritimati.in_service_since = dt.date(2026, 6, 16)
    kiritimati.full_clean()  # today there
    pago_pago.in_service_since = dt.date(2026, 6, 16)
    assert _refusal(pago_pago) == ("In service since 16 Jun 2026 is in the future: the site's today is 15 Jun 2026. "
                                   "Give the day it went into service, or leave it empty.")
    pago_pago.in_service_since = dt.date(2026, 6, 15)
    pago_pago.full_clean()


def test_a_date_before_1900_is_refused_as_mistyped(telescope):
    encoder = Subsystem(telescope=telescope, kind="encoder", name="Axis 1 encoder",
                        in_service_since=dt.date(1899, 12, 31))
    assert _refusal(encoder) == "In service since 31 Dec 1899 looks mistyped: give a date from 1900 on."
    encoder.in_service_since = dt.date(1900, 1, 1)
    encoder.full_clean()


def test_a_date_after_the_day_it_was_retired_is_refused(telescope):
    encoder = Subsystem(telescope=telescope, kind="encoder", name="Axis 1 encoder",
                        in_service_since=dt.date(2024, 3, 2), retired_on=dt.date(2024, 3, 1))
    assert _refusal(encoder) == "In service since 02 Mar 2024 is after the day it was retired (01 Mar 2024)."


@pytest.fixture
def engineer(users, client):
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    return users["engineer"]


def _change_form(subsystem: Subsystem, **values) -> dict:
    form = {"telescope": subsystem.telescope_id, "parent": "", "kind": subsystem.kind, "name": subsystem.name,
            "hazards": subsystem.hazards, "serial_number": "", "notes": "", "in_service_since": "", "retired_on": ""}
    return {**form, **values}


def test_the_admin_change_page_edits_it_and_the_subsystem_page_shows_it(engineer, client, telescope):
    encoder = subsystem_create(telescope, "encoder", "Axis 1 encoder", counting_from=dt.date(2026, 1, 1))
    url = f"/admin/registry/subsystem/{encoder.pk}/change/"
    page = client.get(url).content.decode()
    assert 'name="in_service_since"' in page and "the start of the operating hours" in page
    response = client.post(url, _change_form(encoder, in_service_since="2019-05-06"))
    assert response.status_code == 302
    encoder.refresh_from_db()
    assert encoder.in_service_since == dt.date(2019, 5, 6)
    assert "in service since 06 May 2019" in client.get(encoder.get_absolute_url()).content.decode()


def test_the_admin_refuses_a_future_date_beside_the_field_and_keeps_the_stored_one(engineer, client, telescope):
    encoder = subsystem_create(telescope, "encoder", "Axis 1 encoder", counting_from=dt.date(2026, 1, 1),
                               in_service_since=dt.date(2019, 5, 6))
    # Two days past the site's today, so the check cannot straddle its midnight.
    ahead = timezone.now().astimezone(telescope.site.zone).date() + dt.timedelta(days=2)
    response = client.post(f"/admin/registry/subsystem/{encoder.pk}/change/",
                           _change_form(encoder, in_service_since=ahead.isoformat(), name="Renamed"))
    assert response.status_code == 200
    errors = response.context["adminform"].form.errors
    assert list(errors) == ["in_service_since"]
    assert f"In service since {ahead:%d %b %Y} is in the future" in errors["in_service_since"][0]
    encoder.refresh_from_db()
    assert (encoder.in_service_since, encoder.name) == (dt.date(2019, 5, 6), "Axis 1 encoder")
