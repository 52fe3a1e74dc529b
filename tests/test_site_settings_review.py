"""A site's settings changed in the admin (a network manager's review).

- The slug names the site in the API's and the calendars' addresses, in ``--site`` of commands and cron lines, and in
  the pages' links: once the site has an API token, a logged night or a telescope it is kept, shown with what uses
  it, and a new one is refused wherever it is saved. A site still being set up may correct it.
- Its position and time zone are what its sky is computed from (each night's dark hours, ``calc.nights``) and its
  time zone what its "today" is: changed, the nights cache is computed again and the due states recomputed.
- The check of a longitude against its time zone names both of the zone's offsets. Offsets are those of the IANA time
  zone database: Europe/London UTC+0 (GMT) in winter and UTC+1 (BST) from the last Sunday of March to the last Sunday
  of October; America/Denver UTC-7, daylight UTC-6; Pacific/Auckland UTC+13 in January (daylight time in the southern
  summer) and UTC+12 in July; Asia/Kolkata UTC+5:30 all year. Mean solar time runs longitude / 15 hours ahead of UTC.
"""
from __future__ import annotations

import json

import pytest
from django.core.exceptions import ValidationError
from django.urls import reverse

from observatory_ops.api.services import api_token_create
from observatory_ops.calc.night_of import zone_offsets_h
from observatory_ops.planning.models import NightSky, PlanStatus
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Site
from tests.conftest import site_in_use
from tests.test_register_and_plan_bounds import _unchanged

pytestmark = pytest.mark.django_db


@pytest.fixture
def engineer(engineer_in_admin):
    """The engineer in the admin (conftest.py)."""
    return engineer_in_admin


def _site_url(site) -> str:
    return f"/admin/registry/site/{site.pk}/change/"


def _in_use(slug: str) -> Site:
    """A site in use (``conftest.site_in_use``), in the time zone its longitude keeps (110.2 W, America/Phoenix:
    UTC-7 all year), so its page saves."""
    site = site_in_use(slug)
    Site.objects.filter(pk=site.pk).update(time_zone="America/Phoenix")
    site.refresh_from_db()
    return site


# --- the slug ------------------------------------------------------------------------------------------------------


def test_a_site_being_set_up_may_correct_its_slug(engineer):
    # An invented site at an invented position (southern hemisphere, in the America/Santiago zone).
    site = Site.objects.create(name="Alto Peumal", slug="alto-pemal", latitude_deg=-37.6, longitude_deg=-71.9,
                               time_zone="America/Santiago")
    response = engineer.post(_site_url(site), {**_unchanged(engineer, _site_url(site)), "slug": "alto-peumal"})
    assert response.status_code == 302
    site.refresh_from_db()
    assert site.slug == "alto-peumal"


def test_a_site_in_use_shows_its_slug_with_what_uses_it_and_keeps_it(engineer, client):
    site = _in_use("mesa-norte")
    secret = api_token_create(site, "control computer")[1]
    page = engineer.get(_site_url(site)).content.decode().replace("&#x27;", "'")
    assert 'name="slug"' not in page
    assert ("mesa-norte: kept as it is, since it is in use: 1 API token (for the addresses control software and "
            "calendar subscriptions use, /api/v1/sites/mesa-norte/...), 60 logged nights (control software sends "
            "them to /api/v1/sites/mesa-norte/nights; imports name the site with --site mesa-norte, in commands and "
            "cron lines) and 1 telescope (the site's pages, /sites/mesa-norte/..., are linked and bookmarked). "
            "Changed, those addresses, links and commands would find no site.") in page
    # A slug sent all the same (a form kept open from before) is not taken.
    response = engineer.post(_site_url(site), {**_unchanged(engineer, _site_url(site)), "slug": "mesa-n"})
    assert response.status_code == 302
    site.refresh_from_db()
    assert site.slug == "mesa-norte"
    night = {"night": site_today(site).isoformat(), "open_hours": 0.0}
    answer = client.post(reverse("api-nights", args=["mesa-norte"]), data=json.dumps([night]),
                         content_type="application/json", HTTP_AUTHORIZATION=f"Bearer {secret}")
    assert answer.status_code != 404


def test_a_new_slug_for_a_site_in_use_is_refused_wherever_it_is_saved(db):
    site = site_in_use("mesa-norte")
    site.slug = "mesa-n"
    with pytest.raises(ValidationError) as refused:
        site.full_clean()
    message = refused.value.message_dict["slug"][0]
    assert message.startswith("The slug 'mesa-norte' is in use: 60 logged nights")
    assert message.endswith("Changed, those addresses, links and commands would find no site, so it stays as it is; "
                            "the site's name can still change.")


def test_a_revoked_token_alone_does_not_keep_the_slug(db):
    from observatory_ops.api.services import api_token_revoke

    site = Site.objects.create(name="Loma Sur", slug="loma-sur", latitude_deg=37.2, longitude_deg=-3.4,
                               time_zone="Europe/Madrid")
    api_token_revoke(api_token_create(site, "old computer")[0])
    site.slug = "loma-del-sur"
    site.full_clean()


# --- position and time zone ----------------------------------------------------------------------------------------


@pytest.mark.parametrize(("field", "value"), [
    ("time_zone", "America/Denver"),  # UTC-7, daylight UTC-6
    ("latitude_deg", "33.5"),  # north, as America/Phoenix (a latitude of the other sign is refused)
    ("elevation_m", "2100"),
])
def test_a_new_position_or_time_zone_computes_the_sky_again_and_recomputes(engineer, field, value):
    """The fixture caches a constant sky (10 dark hours every night); computed again for the site's position, the
    nights at 31.5 or 33.5 degrees north have dark hours that change with the season."""
    site = _in_use("mesa-norte")
    before = set(PlanStatus.objects.filter(site=site).values_list("computed_at", flat=True))
    response = engineer.post(_site_url(site), {**_unchanged(engineer, _site_url(site)), field: value}, follow=True)
    assert "adminform" not in response.context, response.context["adminform"].form.errors
    assert f"Due states of {site.name} recomputed." in [str(m) for m in response.context["messages"]]
    dark = set(NightSky.objects.filter(site=site).values_list("dark_hours", flat=True))
    assert len(dark) > 100 and 10.0 not in dark
    after = set(PlanStatus.objects.filter(site=site).values_list("computed_at", flat=True))
    assert after and not after & before


def test_a_change_of_name_alone_keeps_the_sky_and_the_states(engineer):
    site = _in_use("mesa-norte")
    states = list(PlanStatus.objects.filter(site=site).values_list("plan_id", "computed_at"))
    response = engineer.post(_site_url(site), {**_unchanged(engineer, _site_url(site)), "name": "Mesa Norte"})
    assert response.status_code == 302
    assert set(NightSky.objects.filter(site=site).values_list("dark_hours", flat=True)) == {10.0}
    assert list(PlanStatus.objects.filter(site=site).values_list("plan_id", "computed_at")) == states


# --- the longitude's message ---------------------------------------------------------------------------------------


@pytest.mark.parametrize(("zone", "offsets"), [
    ("Europe/London", (0.0, 1.0)),
    ("America/Denver", (-7.0, -6.0)),
    ("Pacific/Auckland", (13.0, 12.0)),
    ("Asia/Kolkata", (5.5, 5.5)),
])
def test_a_zones_offsets_in_january_and_july(zone, offsets):
    assert zone_offsets_h(zone, 2026) == offsets


def _refusal(longitude: float, zone: str) -> str:
    site = Site(name="Loma Sur", slug="loma-sur", latitude_deg=51.0, longitude_deg=longitude, time_zone=zone)
    with pytest.raises(ValidationError) as refused:
        site.full_clean()
    return refused.value.message_dict["longitude_deg"][0]


def test_the_longitude_message_names_both_of_a_zones_offsets(db):
    """70 E is UTC+4.7 h of Sun: 4.7 h from London's winter clock, 3.7 h from its summer one. The message used to say
    "Europe/London keeps UTC+1 h", which it does not in December."""
    assert _refusal(70.0, "Europe/London") == (
        "Longitude 70.000° E (70) has its mean solar time at UTC+4.7 h, but Europe/London keeps UTC+0 h in January "
        "and UTC+1 h in July: more than 3.5 hours apart, farther than a time zone is from the places that keep it. "
        "Check the longitude and the time zone."
    )


def test_the_longitude_message_of_a_zone_without_daylight_time_names_its_one_offset(db):
    """77.2 W is UTC-5.1 h of Sun, 10.6 h from Kolkata's UTC+5.5 (the short way round); 77.2 E is 0.35 h from it."""
    assert _refusal(-77.2, "Asia/Kolkata") == (
        "Longitude 77.200° W (-77.2) has its mean solar time at UTC-5.1 h, but Asia/Kolkata keeps UTC+5.5 h all year: "
        "more than 3.5 hours apart, farther than a time zone is from the places that keep it. East is positive and "
        "west negative: is it 77.200° E (77.2)?"
    )
