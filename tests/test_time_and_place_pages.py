"""Time and place on the pages: a review of time and place at invented sites (44.1 S in Pacific/Auckland, 19.8 N in
Pacific/Honolulu, and the test site at 40 N in Europe/Madrid) found

3. the "Nights removed" table of a site's nightly log showed when each night was removed in UTC without saying so,
   where the site's other history tables show site time with the zone named: now site time, the zone in the header;
4. the due list's CSV download was named by the UTC date even when filtered to one site: now by that site's today
   (``planning.services.site_today``), and by UTC's across sites as before;
5. the recoat planner said "x 50 % of dark hours open in this month of past years" where the 50 % is the prior (no
   usable history for that month), and priced a night with no astronomical darkness as any other: now each is said.

References: the IANA time zone database through Python's ``zoneinfo`` for the local times and dates (written out by
hand beside each instant); the prior open fraction is ``calc.forecast.PRIOR_OPEN_FRACTION`` (one half: common
practice, no published source), taken while a calendar month has fewer than ``calc.forecast.MIN_NIGHTS_FOR_HISTORY``
logged nights (a choice of our own); an open fraction from history is open hours / dark hours of the month's logged
nights (``calc.forecast.monthly_open_fraction``), worked by hand below.
"""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from crew_calendar import mirror_under_a_flat_sky
from django.urls import reverse
from django.utils import timezone

from observatory_ops.calc import forecast
from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.logbook import services as logbook_services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning.models import NightSky
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Site

pytestmark = pytest.mark.django_db


def _site(name: str, slug: str, latitude: float, longitude: float, zone: str) -> Site:
    return Site.objects.create(name=name, slug=slug, latitude_deg=latitude, longitude_deg=longitude, elevation_m=900,
                               time_zone=zone)


# --- 3. the nights removed, in site time -------------------------------------------------------------------------


def test_the_nights_removed_are_shown_in_site_time_with_the_zone_named(client, users, recomputes_recorded):
    site = _site("Tussock Rise", "tussock-rise", -44.1, 170.4, "Pacific/Auckland")
    night = NightUsage.objects.create(site=site, night=dt.date(2026, 2, 28), open_hours=7)
    logbook_services.nights_remove([night], users["engineer"], reason="sent for the wrong site")
    # Removed at 22:30 UTC on 1 Mar 2026: 11:30 on 2 Mar in Auckland, on New Zealand summer time (UTC+13, zoneinfo).
    NightUsage.history.filter(site=site, history_type="-").update(
        history_date=dt.datetime(2026, 3, 1, 22, 30, tzinfo=dt.UTC))
    client.force_login(users["viewer"])
    page = client.get(reverse("nights-list", args=[site.slug])).content.decode()
    table = page[page.index("<h2>Nights removed</h2>"):]
    assert "<th>Removed (Pacific/Auckland)</th>" in table
    assert "<td>2026-03-02 11:30</td>" in table and "2026-03-01 22:30" not in table
    # The rest of the page is not moved into the site's zone by it: the nights are dates, shown as they are.
    assert "Sat 28 Feb 2026" in table


# --- 4. the due list's download, named by the site's today -------------------------------------------------------


@pytest.fixture
def frozen_now(monkeypatch):
    """Set the present moment (``django.utils.timezone.now``, which the view and ``site_today`` read); the due list's
    recompute of stale sites is left out: these sites have no plans, and only the file's name is looked at."""
    from observatory_ops.planning import views

    monkeypatch.setattr(views, "sites_bring_up_to_date", lambda sites=None: [])

    def freeze(moment: dt.datetime) -> None:
        monkeypatch.setattr(timezone, "now", lambda: moment)

    return freeze


def _file_name(response) -> str:
    return re.search(r'filename="([^"]+)"', response["Content-Disposition"]).group(1)


def test_the_due_list_download_of_one_site_is_named_by_that_sites_today(client, users, frozen_now):
    auckland = _site("Tussock Rise", "tussock-rise", -44.1, 170.4, "Pacific/Auckland")
    honolulu = _site("Cinder Flat", "cinder-flat", 19.8, -155.9, "Pacific/Honolulu")
    client.force_login(users["viewer"])
    # 13:00 UTC on 15 Jun 2026 is 01:00 on 16 Jun in Auckland (NZST, UTC+12) and 03:00 on 15 Jun in Honolulu (UTC-10).
    frozen_now(dt.datetime(2026, 6, 15, 13, 0, tzinfo=dt.UTC))
    assert site_today(auckland) == dt.date(2026, 6, 16)
    assert _file_name(client.get(f"/due/?site={auckland.pk}&export=csv")) == "due-list-tussock-rise-2026-06-16.csv"
    assert _file_name(client.get(f"/due/?site={honolulu.pk}&export=csv")) == "due-list-cinder-flat-2026-06-15.csv"
    # 05:00 UTC on 15 Jun 2026 is 19:00 on 14 Jun in Honolulu.
    frozen_now(dt.datetime(2026, 6, 15, 5, 0, tzinfo=dt.UTC))
    assert _file_name(client.get(f"/due/?site={honolulu.pk}&export=csv")) == "due-list-cinder-flat-2026-06-14.csv"
    # Across sites, whose todays differ, the name keeps UTC's date.
    assert _file_name(client.get("/due/?export=csv")) == "due-list-2026-06-15.csv"


def test_a_telescope_chosen_alone_names_the_download_by_its_sites_today(client, users, frozen_now):
    from observatory_ops.registry.models import Telescope

    honolulu = _site("Cinder Flat", "cinder-flat", 19.8, -155.9, "Pacific/Honolulu")
    scope = Telescope.objects.create(site=honolulu, name="C1", aperture_m=0.4, mount="fork")
    client.force_login(users["viewer"])
    frozen_now(dt.datetime(2026, 6, 15, 5, 0, tzinfo=dt.UTC))  # 19:00 on 14 Jun in Honolulu
    assert _file_name(client.get(f"/due/?telescope={scope.pk}&export=csv")) == "due-list-cinder-flat-2026-06-14.csv"


# --- 5. the recoat planner's night cost: the prior, and nights with no darkness ----------------------------------

PHASES = {f"phase_{i}": str(p.days) for i, p in enumerate(RECOAT_PHASES)}
FROM_HISTORY = "of dark hours open in this month of past years (at most all)"
THE_PRIOR = "(the prior: too few nights of this month logged)"
NO_DARKNESS = "no astronomical darkness that night (costs nothing to lose)"


def _month_after(day: dt.date, months: int) -> dt.date:
    """The first day of the month ``months`` after ``day``'s."""
    index = day.year * 12 + day.month - 1 + months
    return dt.date(index // 12, index % 12 + 1, 1)


def _cost_made_of(page: str) -> dict[dt.date, str]:
    """The "Cost made of" cell of each night of the planner's table, by night."""
    rows = re.findall(r'<td data-label="Night">(\w{3} \d\d \w{3} \d{4}).*?<td data-label="Cost made of">(.*?)</td>',
                      page, flags=re.S)
    return {dt.datetime.strptime(night, "%a %d %b %Y").date(): html.unescape(made) for night, made in rows}


def test_the_recoat_planner_says_where_the_open_fraction_is_the_prior_and_where_a_night_has_no_darkness(
    client, users, telescope
):
    """The test site (Europe/Madrid) under a flat invented sky (8 dark hours, 4 moonless, a night); its log holds the
    whole of one calendar month of last year at 2 open hours a night, so that month's open fraction is from history
    (by hand: 2 / 8 = 25 %), every other month's the prior (50 %). One coming night has no astronomical darkness."""
    site = telescope.site
    today = site_today(site)
    mirror = mirror_under_a_flat_sky(telescope, today - dt.timedelta(days=30), 120)
    logged_month = _month_after(today, 1)  # all of next month's nights are in the planner's 70-day horizon
    first_logged = logged_month.replace(year=logged_month.year - 1)
    last_logged = _month_after(first_logged, 1) - dt.timedelta(days=1)
    NightSky.objects.bulk_create(  # the sky of the logged year, up to the flat sky's first night
        NightSky(site=site, night=first_logged + dt.timedelta(days=i), dark_hours=8, moon_illumination=0.5,
                 moonless_dark_hours=4) for i in range((today - dt.timedelta(days=30) - first_logged).days)
    )
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=first_logged + dt.timedelta(days=i), open_hours=2)
        for i in range((last_logged - first_logged).days + 1)
    )
    assert (last_logged - first_logged).days + 1 >= forecast.MIN_NIGHTS_FOR_HISTORY
    sunless = today + dt.timedelta(days=3)
    NightSky.objects.filter(site=site, night=sunless).update(dark_hours=0, moonless_dark_hours=0)

    client.force_login(users["viewer"])
    page = client.get(reverse("mirror-recoat", args=[mirror.pk]),
                      {**PHASES, "start": today.isoformat(), "horizon_days": "70"}).content.decode()
    made = _cost_made_of(page)
    assert len(made) == 70
    assert made[sunless] == NO_DARKNESS
    assert forecast.PRIOR_OPEN_FRACTION == 0.5
    for night, said in made.items():
        if night == sunless:
            continue
        if (night.year, night.month) == (logged_month.year, logged_month.month):
            assert said == f"4.0 moonless dark h × 25 % {FROM_HISTORY}", night
        else:
            assert said == f"4.0 moonless dark h × 50 % {THE_PRIOR}", night
    # The calendar's tooltips say the same.
    titles = html.unescape(" ".join(re.findall(r'class="night[^"]*"[^>]*title="([^"]*)"', page)))
    assert f"{sunless:%a %d %b %Y}: {NO_DARKNESS}; Moon" in titles
    assert f"× 50 % {THE_PRIOR}" in titles and f"× 25 % {FROM_HISTORY}" in titles


def test_a_month_whose_logged_nights_were_never_dark_says_so_rather_than_too_few(telescope):
    """A month logged on enough nights, none of them dark (a summer far from the equator), also takes the prior
    (``calc.forecast.monthly_open_fraction``): not for too few nights, and said so."""
    from observatory_ops.mirrors.services import PRIOR_NO_DARK_LOGGED, PRIOR_TOO_FEW_NIGHTS, night_costs

    site = telescope.site
    first = dt.date(2025, 6, 1)
    NightSky.objects.bulk_create(
        NightSky(site=site, night=first + dt.timedelta(days=i), dark_hours=0 if i < 30 else 8, moon_illumination=0.5,
                 moonless_dark_hours=0 if i < 30 else 4) for i in range(400)
    )
    NightUsage.objects.bulk_create(NightUsage(site=site, night=first + dt.timedelta(days=i), open_hours=3)
                                   for i in range(30))
    june, july = night_costs(site, dt.date(2026, 6, 30), 2)
    assert (june.prior, june.dark_hours) == (PRIOR_NO_DARK_LOGGED, 8)
    assert (july.prior, july.dark_hours) == (PRIOR_TOO_FEW_NIGHTS, 8)


def test_a_window_whose_realignment_has_no_dark_night_says_its_star_checks_wait(client, users, telescope):
    """Far from the equator in summer the cheapest windows lie on nights without astronomical darkness (they cost
    nothing to lose), realignment and all; its checks on stars need a dark night or a bright star in twilight, which
    the cost does not say (the last notes left it alone). The flat invented sky of the test above, its first 40
    coming nights without darkness."""
    from observatory_ops.mirrors.services import recoat_windows

    site = telescope.site
    today = site_today(site)
    mirror = mirror_under_a_flat_sky(telescope, today - dt.timedelta(days=30), 120)
    undark_until = today + dt.timedelta(days=39)
    NightSky.objects.filter(site=site, night__gte=today, night__lte=undark_until).update(
        dark_hours=0, moonless_dark_hours=0)
    found = recoat_windows(mirror, today, 70, list(RECOAT_PHASES))["windows"]
    assert found
    for window in found:
        realignment = next(p for p in window["phases"] if p["phase"].work == "realignment")
        if realignment["last"] <= undark_until:
            assert window["realignment_undark"] == realignment
        else:
            assert window["realignment_undark"] is None
    first = found[0]
    assert first["realignment_undark"] is not None  # the cheapest: nothing to lose on those nights
    client.force_login(users["viewer"])
    page = html.unescape(client.get(reverse("mirror-recoat", args=[mirror.pk]),
                                    {**PHASES, "start": today.isoformat(), "horizon_days": "70"}).content.decode())
    first_night, last_night = first["realignment_undark"]["first"], first["realignment_undark"]["last"]
    assert (f"no astronomical darkness on the realignment's nights ({first_night:%d %b} to {last_night:%d %b %Y}): "
            "its checks on stars wait for a dark night, or are done on a bright star in twilight") in page
