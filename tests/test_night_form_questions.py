"""The nightly log's form asks before it stores a night the import would name to check once stored (longer than the
night, open while out of service, a figure far out of line: logbook.services.night_questions), and keeps it with
"Store it as typed" ticked on the page that asked about those very figures. A forecast review typed PM10 1,999 µg/m³
(120 times the site's median) and 24 h open on a 14.5 h night: both were stored and counted, six plans overdue, before
the page questioned them."""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest

from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning.services import site_today

pytestmark = pytest.mark.django_db


def _asked(page) -> str:
    return html.unescape(re.search(r'name="questioned" value="([^"]*)"', page.content.decode()).group(1))


@pytest.fixture
def logged(site):
    """60 nights of 8 h open at 15 µg/m³ before yesterday: the PM10 median is 15 (out of line above 10 x 15 = 150)."""
    today = site_today(site)
    NightUsage.objects.bulk_create(NightUsage(site=site, night=today - dt.timedelta(days=i), open_hours=8,
                                              pm10_ugm3=15) for i in range(2, 62))
    return today - dt.timedelta(days=1)


def test_a_figure_far_out_of_line_is_asked_about_before_it_is_stored(site, logged, users, client):
    client.force_login(users["technician"])
    url = f"/sites/{site.slug}/nights/new/"
    sent = {"night": logged.isoformat(), "open_hours": "8", "pm10_ugm3": "1999"}
    page = client.post(url, sent)
    text = " ".join(html.unescape(re.sub(r"<[^>]+>", " ", page.content.decode())).split())
    assert page.status_code == 200 and not NightUsage.objects.filter(site=site, night=logged).exists()
    assert "Nothing was stored yet. Check the whole site, night of" in text and "1,999 µg/m³ of PM10" in text
    # A figure changed after the tick is asked about again: the tick holds for the figures it was asked about.
    changed = client.post(url, {**sent, "pm10_ugm3": "2999", "value_confirmed": "on", "questioned": _asked(page)})
    assert changed.status_code == 200 and not NightUsage.objects.filter(site=site, night=logged).exists()
    kept = client.post(url, {**sent, "value_confirmed": "on", "questioned": _asked(page)})
    assert kept.status_code == 302
    assert NightUsage.objects.get(site=site, night=logged).pm10_ugm3 == 1999


def test_a_night_in_line_is_stored_at_once(site, logged, users, client):
    client.force_login(users["technician"])
    answer = client.post(f"/sites/{site.slug}/nights/new/", {"night": logged.isoformat(), "open_hours": "8",
                                                               "pm10_ugm3": "40"})
    assert answer.status_code == 302 and NightUsage.objects.get(site=site, night=logged).pm10_ugm3 == 40


def test_the_box_shows_only_when_asked_and_a_correction_is_not_asked_about_what_was_stored(site, logged, users,
                                                                                            client):
    """A diff review: "Store it as typed" stood on every blank form; and correcting the rain of a night whose PM10
    1,999 had been confirmed asked about the PM10 again, a figure not typed this time."""
    client.force_login(users["technician"])
    url = f"/sites/{site.slug}/nights/new/"
    assert 'type="checkbox" name="value_confirmed"' not in client.get(url).content.decode()
    sent = {"night": logged.isoformat(), "open_hours": "8", "pm10_ugm3": "1999"}
    page = client.post(url, sent)
    assert 'type="checkbox" name="value_confirmed"' in page.content.decode()
    assert client.post(url, {**sent, "value_confirmed": "on", "questioned": _asked(page)}).status_code == 302
    loaded = client.get(url, {"night": logged.isoformat()})
    fields = {name: html.unescape(value) for name, value in re.findall(
        r'<input type="hidden" name="(loaded_as|loaded_cells)" value="([^"]*)"', loaded.content.decode())}
    answer = client.post(url, {**sent, **fields, "rain": "yes"})
    assert answer.status_code == 302, answer.content.decode()[:2000]
    assert NightUsage.objects.get(site=site, night=logged).rain is True
