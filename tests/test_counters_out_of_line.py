"""A night whose counter per open hour is far above its log's usual rate is named to check when it is stored
(logbook.selectors.counters_out_of_line): an API review sent 10,000 brake cycles, and axis travel in arcminutes, for
one night, and six plans went overdue without a word. The factor, 10, is our own choice: a unit slip or an extra
digit, not a busy night.

By hand: 60 nights of 8 h open with 48 brake cycles and 1,000° of axis 1 travel: 6 cycles and 125° an open hour. A
night of 8 h with 10,000 cycles is 1,250 an hour, over 10 x 6 = 60; 61,830 of travel (arcminutes for 1,030.5°) is
7,728.75° an hour, over 10 x 125 = 1,250; 480 cycles (60 an hour) is not over 60."""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.logbook.models import NightUsage
from observatory_ops.logbook.services import nights_ingest
from observatory_ops.planning.services import site_today

pytestmark = pytest.mark.django_db


@pytest.fixture
def logged(site):
    today = site_today(site)
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=today - dt.timedelta(days=i), open_hours=8, brake_cycles=48, axis1_travel_deg=1000)
        for i in range(2, 62))
    return today - dt.timedelta(days=1)


def _sent(site, night, **figures) -> list[str]:
    return nights_ingest(site, [{"night": night.isoformat(), "open_hours": 8, **figures}]).to_check


def test_a_counter_ten_times_its_usual_rate_is_named_and_stored(site, logged):
    said = _sent(site, logged, brake_cycles=10000, axis1_travel_deg=61830)
    assert said == [f"the whole site, night of {logged:%d %b %Y}, 8 h open: 10,000 brake cycles (1,250.0 an open hour "
                    "against a median of 6.00); 61,830° of axis 1 travel (7,728.8 an open hour against a median of "
                    "125.00): more than 10 times its log's usual rate (a unit or a digit?)"]
    assert NightUsage.objects.get(site=site, night=logged).brake_cycles == 10000  # stored as sent


def test_a_busy_night_within_ten_times_is_not_named(site, logged):
    assert _sent(site, logged, brake_cycles=480, axis1_travel_deg=1200) == []


def test_a_log_of_fewer_than_thirty_nights_is_not_judged(site):
    today = site_today(site)
    NightUsage.objects.bulk_create(NightUsage(site=site, night=today - dt.timedelta(days=i), open_hours=8,
                                              brake_cycles=48) for i in range(2, 30))
    assert _sent(site, today - dt.timedelta(days=1), brake_cycles=10000) == []


def test_a_dust_level_ten_times_its_usual_is_named_and_stored(site):
    """A forecast review typed 1,999 µg/m³ of PM10 for one night, 120 times the site's median, and six dust-weighted
    plans went overdue without a word. By hand: 60 nights at 15 µg/m³, median 15; 1,999 > 10 x 15 = 150 is named,
    140 is not. The level is compared as it is, not per open hour."""
    today = site_today(site)
    NightUsage.objects.bulk_create(NightUsage(site=site, night=today - dt.timedelta(days=i), open_hours=8,
                                              pm10_ugm3=15) for i in range(2, 62))
    night = today - dt.timedelta(days=1)
    assert _sent(site, night, pm10_ugm3=140) == []
    assert _sent(site, night, pm10_ugm3=1999) == [
        f"the whole site, night of {night:%d %b %Y}, 8 h open: 1,999 µg/m³ of PM10 (against a median of 15.00): more "
        "than 10 times its log's usual level (a unit or a digit, or a dust storm: if real, keep it, every "
        "dust-weighted plan counts it)"]
    assert NightUsage.objects.get(site=site, night=night).pm10_ugm3 == 1999  # stored as sent


def test_a_telescopes_own_night_with_too_few_of_its_own_is_judged_by_the_whole_sites_log(site, telescope):
    """A walk typed PM10 1,999 for T70's own night on a site that logs the whole site's nights: T70 had too few of its
    own to judge by, and nothing was said. Its log is the whole site's nights where it has none of its own, so the
    site's median (15, by hand) judges it."""
    today = site_today(site)
    NightUsage.objects.bulk_create(NightUsage(site=site, night=today - dt.timedelta(days=i), open_hours=8,
                                              pm10_ugm3=15) for i in range(2, 62))
    night = today - dt.timedelta(days=1)
    [said] = nights_ingest(site, [{"night": night.isoformat(), "telescope": telescope.name, "open_hours": 8,
                                   "pm10_ugm3": 1999}]).to_check
    assert said.startswith(f"{telescope.name}, night of {night:%d %b %Y}, 8 h open: 1,999 µg/m³ of PM10 (against a "
                           "median of 15.00)")
