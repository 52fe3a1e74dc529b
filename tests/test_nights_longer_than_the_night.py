"""Open hours longer than the night: stored as sent, and named for the operator to check.

A night's open hours beyond the night at the site (sunset to sunrise) by more than ``LONGER_THAN_THE_NIGHT_H`` (2 h:
a dome opened about an hour before sunset to cool, closed after sunrise; common practice, no published source) are
more likely a slip (20 typed for 2.0) than a dome open all day. Such a night is stored, since a dome may have stood
open in daylight, and the import's summary, the log page's form and the API's answer (``check``) name it with the
night's length, so it is corrected by sending it again. The night's length comes from the sky cache
(``planning.models.NightSky``, computed with astropy); the reference here is PyEphem's sunset and sunrise
(tests/test_calc_nights.py, ``pyephem_night``), an independent ephemeris.
"""
from __future__ import annotations

import datetime as dt
import json
import re

import pytest
from django.urls import reverse
from test_calc_nights import pyephem_night

from observatory_ops.api import services as api_services
from observatory_ops.logbook import services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.logbook.selectors import LONGER_THAN_THE_NIGHT_H
from observatory_ops.planning.services import site_sky_refresh

pytestmark = pytest.mark.django_db

SOLSTICE = dt.date(2024, 6, 20)  # the shortest nights at the test site (40 N): about 9 h from sunset to sunrise


@pytest.fixture
def sky(site, recomputes_recorded):
    """The test site (40 N, 3 W, Europe/Madrid) with its sky cached around the June solstice of 2024."""
    site_sky_refresh(site, SOLSTICE - dt.timedelta(days=1), SOLSTICE + dt.timedelta(days=1))
    return site


def _night_length_h(site, night: dt.date) -> float:
    reference = pyephem_night(site, night)
    return (reference["sunrise"] - reference["sunset"]) / dt.timedelta(hours=1)


def test_an_imported_night_longer_than_the_night_is_stored_and_named_with_the_nights_length(sky):
    length = _night_length_h(sky, SOLSTICE)
    assert 8.5 < length < 10  # 40 N at midsummer
    within = length + LONGER_THAN_THE_NIGHT_H - 0.1  # opened before sunset to cool: not questioned
    data = f"night,open_hours\n2024-06-19,{within:.1f}\n2024-06-20,20\n".encode()
    report = services.nights_import(sky, data)
    assert report.created == 2 and NightUsage.objects.get(night=SOLSTICE).open_hours == 20  # stored as sent
    (said,) = report.longer_than_the_night
    assert said.startswith("20 Jun 2024: 20 h open, but that night lasts ")
    assert float(re.search(r"lasts ([\d.]+) h there", said).group(1)) == pytest.approx(length, abs=0.06)
    assert re.search(r"\(sunset 2\d:\d\d to sunrise 0\d:\d\d\)$", said)  # local times, Madrid summer time
    assert "Check 1 night longer than the night, stored as sent (send a night again to correct it): 20 Jun 2024" \
        in report.summary
    again = services.nights_import(sky, data)
    assert again.longer_than_the_night == [] and "Check" not in again.summary  # only what was stored now


def test_a_telescopes_night_is_named_with_its_telescope(sky):
    from observatory_ops.registry.models import Telescope

    Telescope.objects.create(site=sky, name="North", aperture_m=0.6, mount="fork")
    report = services.nights_import(sky, b"night,telescope,open_hours\n2024-06-20,North,19.5\n")
    assert report.longer_than_the_night[0].startswith("20 Jun 2024 (North): 19.5 h open, but that night lasts ")


def test_the_api_answers_the_nights_to_check(client, sky):
    secret = api_services.api_token_create(sky, "dome computer")[1]
    answer = client.post(reverse("api-nights", args=[sky.slug]), data=json.dumps({"night": "2024-06-20",
                         "open_hours": 20}), content_type="application/json", HTTP_AUTHORIZATION=f"Bearer {secret}")
    assert answer.status_code == 200 and answer.json()["created"] == 1
    assert [line.split(",")[0] for line in answer.json()["check"]] == ["20 Jun 2024: 20 h open"]


def test_the_log_pages_form_asks_before_storing_and_says_so_once_stored(client, users, sky):
    """A forecast review's 24 h on a 14.5 h night was stored and counted before it was questioned: the form asks first
    (logbook.services.night_questions), and stores it only with "Store it as typed" ticked."""
    import html
    import re

    client.force_login(users["technician"])
    sent = {"night": "2024-06-20", "open_hours": "20"}
    asked = client.post(reverse("night-log", args=[sky.slug]), sent)
    assert "Nothing was stored yet. Check 20 Jun 2024: 20 h open, but that night lasts " in html.unescape(
        asked.content.decode())
    assert not NightUsage.objects.filter(night=SOLSTICE).exists()
    questioned = html.unescape(re.search(r'name="questioned" value="([^"]*)"', asked.content.decode()).group(1))
    response = client.post(reverse("night-log", args=[sky.slug]),
                           {**sent, "value_confirmed": "on", "questioned": questioned}, follow=True)
    assert "Check 1 night longer than the night" in response.content.decode()
    assert NightUsage.objects.get(night=SOLSTICE).open_hours == 20


def test_a_night_the_sky_cache_does_not_hold_is_not_checked(site, recomputes_recorded):
    report = services.nights_import(site, b"night,open_hours\n2020-06-20,20\n")
    assert report.created == 1 and report.longer_than_the_night == []


def test_the_preview_of_changes_to_stored_nights_names_it_before_anything_is_stored(sky):
    """The upload page asks before changing stored nights: the slip is named there, while nothing is stored yet."""
    services.nights_import(sky, b"night,open_hours\n2024-06-20,2\n")
    preview = services.nights_import(sky, b"night,open_hours\n2024-06-20,20\n", confirmed="")
    assert preview.confirm_token and not preview.stored
    assert NightUsage.objects.get(night=SOLSTICE).open_hours == 2  # nothing stored yet
    assert ("nothing was stored yet. Check 1 night longer than the night before storing (correct the file and import "
            "it again): 20 Jun 2024: 20 h open, but that night lasts ") in preview.summary


def test_a_night_sent_before_its_sunset_is_named_as_not_begun(sky):
    """An onboarding review's control software sent "tonight" with 6 h open at 13:06 local, after local noon (so a
    night that may be logged) but hours before its sunset: stored as sent, and now named. Measured to the moment it is
    checked: before sunset nothing of the night has passed; between sunset and sunrise, the hours since sunset."""
    from observatory_ops.logbook.selectors import nights_longer_than_the_night

    reference = pyephem_night(sky, SOLSTICE)
    night = NightUsage.objects.create(site=sky, night=SOLSTICE, open_hours=6)
    before = reference["sunset"] - dt.timedelta(hours=7)
    (said,) = nights_longer_than_the_night(sky, [night], now=before)
    assert said.startswith("20 Jun 2024: 6 h open, but that night has not begun yet there (sunset 2")
    midway = reference["sunset"] + dt.timedelta(hours=3)
    (said,) = nights_longer_than_the_night(sky, [night], now=midway)
    assert float(re.search(r"has lasted ([\d.]+) h there so far", said).group(1)) == pytest.approx(3.0, abs=0.06)
    assert nights_longer_than_the_night(sky, [night], now=reference["sunset"] + dt.timedelta(hours=4.5)) == []
    assert nights_longer_than_the_night(sky, [night], now=reference["sunrise"] + dt.timedelta(hours=2)) == []
