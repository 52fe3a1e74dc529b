"""A site's longitude against its time zone, and how pages write a position.

A longitude typed with the wrong sign (+109.2 for a site in America/Denver) puts every sunset and dark hour of the
site hours out; the register refuses a longitude whose mean solar time is more than 3.5 hours from its zone's clock.
Time-zone offsets below are those of the IANA time zone database (America/Denver UTC-7, daylight UTC-6;
Europe/Madrid UTC+1, daylight UTC+2; Asia/Kolkata UTC+5:30 all year; Pacific/Auckland UTC+12, daylight UTC+13;
Etc/GMT+5 UTC-5, POSIX sign). Mean solar time runs longitude / 15 hours ahead of UTC (360 degrees in 24 hours).
All coordinates are invented.
"""
from __future__ import annotations

import html
import re

import numpy as np
import pytest
from django.core.exceptions import ValidationError

from observatory_ops.calc.night_of import zone_gap_h
from observatory_ops.registry.models import Site


@pytest.mark.parametrize(
    ("longitude", "zone", "gap", "offset"),
    [
        # 109.2 W: solar UTC-7.28 h; Denver's January UTC-7 is the closer: +0.28 h.
        (-109.2, "America/Denver", 0.28, -7.0),
        # The sign slip: solar UTC+7.28 h against UTC-7, 14.28 h apart, so 24 - 14.28 = 9.72 h the short way round
        # (July's UTC-6 is 10.72 h away).
        (109.2, "America/Denver", 9.72, -7.0),
        # 3.7 W: solar UTC-0.2467 h; Madrid's January UTC+1: +1.2467 h.
        (-3.7, "Europe/Madrid", 1.2467, 1.0),
        # 77.2 E: solar UTC+5.1467 h; Kolkata UTC+5.5: +0.3533 h.
        (77.2, "Asia/Kolkata", 0.3533, 5.5),
        # 170.5 E: solar UTC+11.3667 h; Auckland's July (winter) UTC+12: +0.6333 h.
        (170.5, "Pacific/Auckland", 0.6333, 12.0),
        # 75 W with the benchmark's fixed zone: exactly on it.
        (-75.0, "Etc/GMT+5", 0.0, -5.0),
    ],
)
def test_the_gap_between_a_longitude_and_its_zone_by_hand(longitude, zone, gap, offset):
    found_gap, found_offset = zone_gap_h(longitude, zone, 2026)
    assert abs(found_gap) == pytest.approx(gap, abs=1e-4)
    assert found_offset == offset


def _site(longitude: float, zone: str) -> Site:
    """A site at 38.9 degrees from the equator, on its zone's side of it (Pacific/Auckland's: south)."""
    latitude = -38.9 if zone.startswith(("Pacific/Auckland", "Australia/")) else 38.9
    return Site(name="Mesa Alta", slug="mesa-alta", latitude_deg=latitude, longitude_deg=longitude, time_zone=zone)


@pytest.mark.parametrize(
    ("longitude", "zone"),
    [(-109.229, "America/Denver"), (-3.702, "Europe/Madrid"), (-8.9, "Europe/Madrid"), (2.1, "Europe/Madrid"),
     (77.2, "Asia/Kolkata"), (92.7, "Asia/Kolkata"), (170.5, "Pacific/Auckland"), (-157.4, "Pacific/Kiritimati")],
)
def test_a_longitude_on_the_right_side_of_greenwich_for_its_zone_is_accepted(db, longitude, zone):
    """Kiritimati keeps UTC+14 at about 157 W: across the date line it is 0.5 h from the Sun, not a day."""
    _site(longitude, zone).full_clean()


def test_a_longitude_with_the_wrong_sign_is_refused_naming_the_field_and_the_likely_longitude(db):
    with pytest.raises(ValidationError) as refused:
        _site(109.229, "America/Denver").full_clean()
    assert refused.value.message_dict == {"longitude_deg": [
        "Longitude 109.229° E (109.229) has its mean solar time at UTC+7.3 h, but America/Denver keeps UTC-7 h in "
        "January and UTC-6 h in July: more than 3.5 hours apart, farther than a time zone is from the places that "
        "keep it. East is positive and west negative: is it 109.229° W (-109.229)?"
    ]}


@pytest.mark.parametrize(
    ("longitude", "zone", "hint"),
    [
        (-77.2, "Asia/Kolkata", "is it 77.200° E (77.2)?"),  # 10.65 h the short way round; flipped, 0.35 h
        (-90.0, "Europe/Madrid", "Check the longitude and the time zone."),  # 7 h; flipped (90 E), still 4 h
        (-70.5, "Pacific/Auckland", "Check the longitude and the time zone."),  # 6.3 h; flipped (70.5 E), 7.3 h
    ],
)
def test_a_longitude_far_from_its_zone_is_refused_with_a_hint_only_where_the_other_sign_fits(db, longitude, zone,
                                                                                            hint):
    with pytest.raises(ValidationError, match="more than 3.5 hours apart") as refused:
        _site(longitude, zone).full_clean()
    assert refused.value.message_dict["longitude_deg"][0].endswith(hint)


def test_near_the_date_line_a_sign_slip_cannot_be_told_from_the_zone(db):
    """170.5 W is 19 degrees from 170.5 E across the date line: 1.3 h of Sun, within any zone's width. The check
    catches a slip only where the two sides of Greenwich keep different clocks, which is everywhere else."""
    _site(-170.5, "Pacific/Auckland").full_clean()


def test_every_site_of_the_network_benchmark_passes_the_check(db):
    """benchmarks/bench_network.py gives each invented site the fixed Etc/GMT zone nearest its longitude."""
    from benchmarks.bench_network import make_sites

    for site in make_sites(1, 40, np.random.default_rng(7)):
        site.full_clean()


def test_the_admin_refuses_the_reviewers_site_and_keeps_the_stored_one(users, client, site):
    users["engineer"].is_staff = True
    users["engineer"].save()
    client.force_login(users["engineer"])
    response = client.post(f"/admin/registry/site/{site.pk}/change/", {
        "name": site.name, "slug": site.slug, "latitude_deg": "40", "longitude_deg": "109.2", "elevation_m": "800",
        "time_zone": "America/Denver", "dust_climate": "", "look_ahead_days": "30",
        "crew_weekdays": ["1", "2", "3", "4", "5"],
        "crew_days_off-TOTAL_FORMS": "0", "crew_days_off-INITIAL_FORMS": "0",
    })
    assert response.status_code == 200
    assert "is it 109.200° W (-109.2)?" in html.unescape(response.content.decode())
    site.refresh_from_db()
    assert (site.longitude_deg, site.time_zone) == (-3.0, "Europe/Madrid")


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def test_pages_write_a_position_with_north_south_and_east_west(users, client, site):
    """The test site is at 40 N, 3 W (conftest); a second one in the south and east lists both on the home page."""
    client.force_login(users["viewer"])
    assert "40.000° N, 3.000° W, 800 m" in _text(client.get(site.get_absolute_url()))
    Site.objects.create(name="Scree Bank", slug="scree-bank", latitude_deg=-30.25, longitude_deg=70.5,
                        time_zone="Asia/Karachi")
    home = _text(client.get("/"))
    assert "40.000° N, 3.000° W" in home and "30.250° S, 70.500° E" in home


# --- a latitude in the other hemisphere from its time zone ---------------------------------------------------------
# The latitudes of the places zones are named after are the IANA time zone database's zone.tab (Australia/Perth
# -3157 = 31 deg 57 min S; America/Los_Angeles +340308 = 34 deg 03 min 08 s N; Pacific/Auckland -3652 = 36 deg 52 min
# S; America/Guayaquil -0210 = 2 deg 10 min S). A site review saved 29.843 N with Australia/Perth.


def test_the_zone_tables_latitudes_are_read_as_iso_6709():
    from observatory_ops.calc.night_of import zone_reference_latitude

    assert zone_reference_latitude("Australia/Perth") == pytest.approx(-(31 + 57 / 60))
    assert zone_reference_latitude("America/Los_Angeles") == pytest.approx(34 + 3 / 60 + 8 / 3600)
    assert zone_reference_latitude("UTC") is None and zone_reference_latitude("Etc/GMT+5") is None


def _salt_pan(latitude, longitude, zone) -> Site:
    return Site(name="Salt Pan Rise", slug="salt-pan-rise", latitude_deg=latitude, longitude_deg=longitude,
                elevation_m=400, time_zone=zone)


@pytest.mark.parametrize(("latitude", "longitude", "zone"), [
    (29.843, 116.512, "Australia/Perth"),  # the minus sign left out
    (-29.843, -116.512, "America/Los_Angeles"),  # both signs flipped: the longitude alone agrees with the zone
    (40.5, 174.8, "Pacific/Auckland"),
])
def test_a_latitude_in_the_other_hemisphere_from_its_zone_is_refused_naming_the_other_sign(
    db, latitude, longitude, zone
):
    with pytest.raises(ValidationError) as refused:
        _salt_pan(latitude, longitude, zone).full_clean()
    error = refused.value.message_dict["latitude_deg"][0]
    assert "is in the other hemisphere from" in error and f"({-latitude:g})?" in error


@pytest.mark.parametrize(("latitude", "longitude", "zone"), [
    (-29.843, 116.512, "Australia/Perth"),
    (34.2, -116.9, "America/Los_Angeles"),
    (1.2, -78.5, "America/Guayaquil"),  # near the equator nothing is compared
    (29.843, 0.0, "UTC"),  # a zone named after no place
])
def test_a_latitude_on_its_zones_side_or_near_the_equator_is_kept(db, latitude, longitude, zone):
    _salt_pan(latitude, longitude, zone).full_clean()
