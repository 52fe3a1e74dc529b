"""Usage logged per telescope: each plan counts its own telescope's nights.

The rule (logbook.models.NightUsage, planning.services.UsageLog): a telescope's log is its own rows, and the site's
rows (telescope empty) on the nights it has none of its own. A telescope with no rows at all counts the site's.

The site below logged a row for the whole site every night from 15 Jun 2025 to 14 Jun 2026: 4 open hours and 20
slews. From 1 Jan 2026 telescope North also sent its own nights: 8 open hours and 100 slews. South sent none.
Today is 15 Jun 2026, so nothing is unlogged. Hand computations from the rule:

    North: 15 Jun-31 Dec 2025 from the site, 200 nights x 4 h = 800 h and x 20 = 4,000 slews;
           1 Jan-14 Jun 2026 its own, 165 nights x 8 h = 1,320 h and x 100 = 16,500 slews:
           2,120 h and 20,500 slews in all.
    South: 365 nights of the site's: 1,460 h and 7,300 slews.

Every night has 10 dark hours (the constant sky of tests/conftest.py), so a month's open fraction is its open hours
over 10 (calc.forecast: sum of open hours over sum of dark hours of the month's logged nights): January 2026 is
North's own 8 of 10 (0.8) and the site's 4 of 10 (0.4) for South.
"""
from __future__ import annotations

import datetime as dt

import pytest
from conftest import constant_sky

from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning import services
from observatory_ops.planning.models import PlanStatus, ServicePlan, Trigger
from observatory_ops.registry.models import Site, Subsystem, Telescope

TODAY = dt.date(2026, 6, 15)
FIRST = dt.date(2025, 6, 15)
OWN_FROM = dt.date(2026, 1, 1)


def _days(first: dt.date, last: dt.date):
    return (first + dt.timedelta(days=i) for i in range((last - first).days + 1))


def _two_telescope_site(name: str, sky_from: dt.date, today: dt.date):
    """A site at 0 N 0 E on UTC with telescopes North and South, and a constant sky from ``sky_from`` to the forecast
    horizon after ``today``."""
    site = Site.objects.create(name=name, slug=name.lower().replace(" ", "-"), latitude_deg=0, longitude_deg=0,
                               time_zone="UTC")
    north = Telescope.objects.create(site=site, name="North", aperture_m=0.6, mount="fork")
    south = Telescope.objects.create(site=site, name="South", aperture_m=0.4, mount="altaz")
    constant_sky(site, sky_from, today + dt.timedelta(days=services.HORIZON_DAYS + 5))
    return site, north, south


@pytest.fixture
def two_telescopes(db):
    site, north, south = _two_telescope_site("Twin Ridge", FIRST, TODAY)
    last = TODAY - dt.timedelta(days=1)
    NightUsage.objects.bulk_create(
        [NightUsage(site=site, night=day, open_hours=4, slews=20) for day in _days(FIRST, last)]
        + [NightUsage(site=site, telescope=north, night=day, open_hours=8, slews=100) for day in _days(OWN_FROM, last)]
    )
    plans = {}
    for telescope in (north, south):
        fans = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name=f"{telescope.name} fans")
        plan = ServicePlan.objects.create(subsystem=fans, name="Fan bearings", counting_from=FIRST)
        Trigger.objects.create(plan=plan, metric="open_hours", limit=3000)
        Trigger.objects.create(plan=plan, metric="slews", limit=50_000)
        plans[telescope.name] = plan
    return site, north, south, plans


def _figures(plan) -> dict[str, float]:
    status = PlanStatus.objects.get(plan=plan)
    return {row["metric"]: row["value"] for row in status.trigger_rows}


def test_each_plan_counts_its_own_telescopes_nights(two_telescopes):
    site, _, _, plans = two_telescopes
    services.site_recompute(site, TODAY)
    assert _figures(plans["North"]) == {"open_hours": pytest.approx(2120), "slews": pytest.approx(20_500)}
    assert _figures(plans["South"]) == {"open_hours": pytest.approx(1460), "slews": pytest.approx(7300)}


def test_each_telescope_forecasts_from_its_own_months(two_telescopes):
    site, north, south, _ = two_telescopes
    logs = services.UsageLog.of_site(site)
    assert set(logs) == {None, north.pk}  # South has no rows of its own: it reads the site's
    assert services.UsageLog.for_telescope(south).nights.tolist() == logs[None].nights.tolist()
    north_model = services.forecast_model(site, services.UsageLog.for_telescope(north), TODAY)
    south_model = services.forecast_model(site, services.UsageLog.for_telescope(south), TODAY)
    assert north_model.open_fraction[0] == pytest.approx(0.8)
    assert south_model.open_fraction[0] == pytest.approx(0.4)
    assert "this telescope's" in north_model.basis and "this site's" in south_model.basis


def test_the_forecast_basis_names_the_telescopes_log(two_telescopes):
    site, _, _, plans = two_telescopes
    services.site_recompute(site, TODAY)
    assert "this telescope's" in PlanStatus.objects.get(plan=plans["North"]).basis
    assert "this site's" in PlanStatus.objects.get(plan=plans["South"]).basis


def test_a_night_of_its_own_replaces_the_sites_row_for_that_telescope_only(two_telescopes):
    """One more own row for South on 14 Jun 2026 (2 h, 5 slews) takes the place of the site's row (4 h, 20 slews)
    in South's log: 1,460 - 4 + 2 = 1,458 h and 7,300 - 20 + 5 = 7,285 slews. North is unchanged."""
    site, _, south, plans = two_telescopes
    NightUsage.objects.create(site=site, telescope=south, night=TODAY - dt.timedelta(days=1), open_hours=2, slews=5)
    services.site_recompute(site, TODAY)
    assert _figures(plans["South"]) == {"open_hours": pytest.approx(1458), "slews": pytest.approx(7285)}
    assert _figures(plans["North"]) == {"open_hours": pytest.approx(2120), "slews": pytest.approx(20_500)}


def test_without_rows_of_the_site_a_silent_telescope_counts_nothing_logged(two_telescopes):
    """With the site's rows gone, South has no log at all: nothing counted (and every night since its plan started
    is taken as used at the prior rate, as for any site that logs nothing). The site-wide figures (the cost of
    losing a night) then come from the busiest telescope, North."""
    site, north, south, plans = two_telescopes
    NightUsage.objects.filter(telescope__isnull=True).delete()
    assert len(services.UsageLog.for_telescope(south).nights) == 0
    assert services.UsageLog.site_wide(site).nights.tolist() == services.UsageLog.for_telescope(north).nights.tolist()
    services.site_recompute(site, TODAY)
    assert _figures(plans["North"]) == {"open_hours": pytest.approx(1320), "slews": pytest.approx(16_500)}
    assert _figures(plans["South"]) == {"open_hours": 0, "slews": 0}


def test_a_site_that_logs_one_row_a_night_reads_one_log(two_telescopes):
    site, north, _, _ = two_telescopes
    NightUsage.objects.filter(telescope=north).delete()
    logs = services.UsageLog.of_site(site)
    assert list(logs) == [None] and len(logs[None].nights) == 365
    assert services.UsageLog.site_wide(site) is not None and len(services.UsageLog.site_wide(site).nights) == 365


def test_one_row_per_telescope_and_night_and_one_for_the_site(two_telescopes):
    from django.db import IntegrityError, transaction

    site, north, _, _ = two_telescopes
    with pytest.raises(IntegrityError), transaction.atomic():
        NightUsage.objects.create(site=site, telescope=north, night=OWN_FROM, open_hours=1)
    with pytest.raises(IntegrityError), transaction.atomic():
        NightUsage.objects.create(site=site, night=OWN_FROM, open_hours=1)


def test_a_telescope_of_another_site_is_refused(two_telescopes):
    from django.core.exceptions import ValidationError

    site, north, _, _ = two_telescopes
    other = Site.objects.create(name="Far Hill", slug="far-hill", latitude_deg=0, longitude_deg=0, time_zone="UTC")
    with pytest.raises(ValidationError, match="another site"):
        NightUsage(site=other, telescope=north, night=OWN_FROM, open_hours=1).full_clean()


def test_the_subsystem_page_names_the_telescope_whose_use_it_expects(two_telescopes, users, client):
    from observatory_ops.planning.services import site_today

    site, north, south, _ = two_telescopes
    sky_from = TODAY + dt.timedelta(days=services.HORIZON_DAYS + 6)  # the pages count from the real today
    constant_sky(site, sky_from, max(sky_from, site_today(site) + dt.timedelta(days=services.HORIZON_DAYS + 5)))
    services.site_recompute(site)
    client.force_login(users["viewer"])
    north_page = client.get(north.subsystems.get().get_absolute_url()).content.decode()
    south_page = client.get(south.subsystems.get().get_absolute_url()).content.decode()
    assert "Expected use of North at Twin Ridge, by month" in north_page
    assert "this telescope&#x27;s own open fraction" in north_page or "this telescope's own open fraction" in north_page
    assert "Expected use at Twin Ridge, by month" in south_page
    assert "{#" not in north_page  # a template comment is one line, or Django prints it


def test_reliability_counts_each_subsystems_hours_from_its_telescopes_log(two_telescopes):
    """Both fans count from their plans' start (15 Jun 2025) to today: North 2,120 h, South 1,460 h (above)."""
    from observatory_ops.reliability.selectors import site_reliability

    site, _, _, _ = two_telescopes
    fans = next(k for k in site_reliability(site, TODAY).kinds if k.code == "cooling_fans")
    assert fans.operating_hours == pytest.approx(2120 + 1460)


def test_the_reliability_page_says_what_each_telescopes_log_is_made_of(two_telescopes, users, client):
    from django.urls import reverse

    site, north, _, _ = two_telescopes
    logs = services.UsageLog.of_site(site)
    client.force_login(users["viewer"])
    page = client.get(reverse("site-reliability", args=[site.slug])).content.decode().replace("&#x27;", "'")
    assert f"North: this telescope's log: its own nights on {logs[north.pk].own_nights:,} of " \
           f"{len(logs[north.pk].nights):,} logged nights, the whole site's on the rest</p>" in page


def test_the_dashboard_shows_the_newest_night_of_each_log(two_telescopes, users, client):
    """The site's rows end on 14 Jun 2026, North's own too; South sends one of its own on 10 Jun 2026."""
    from django.urls import reverse

    site, _, south, _ = two_telescopes
    NightUsage.objects.create(site=site, telescope=south, night=dt.date(2026, 6, 10), open_hours=2.5)
    client.force_login(users["viewer"])
    page = client.get(reverse("site-dashboard", args=[site.slug])).content.decode()
    panel = page[page.index("Last logged night"):]
    panel = panel[:panel.index("</div>", panel.index("Nightly log"))]
    assert panel.index("Whole site: <strong>Sun 14 Jun 2026</strong>: 4.0 h open") < panel.index(
        "North's own: <strong>Sun 14 Jun 2026</strong>: 8.0 h open<br>") < panel.index(
        "South's own: <strong>Wed 10 Jun 2026</strong>: 2.5 h open <span class=\"muted\">(the whole site's "
        "nights to Sun 14 Jun 2026 counted for it after that)</span>")


def test_a_telescope_with_nights_of_its_own_stays_at_its_site(two_telescopes):
    from django.core.exceptions import ValidationError

    _, north, south, _ = two_telescopes
    other = Site.objects.create(name="Far Hill", slug="far-hill", latitude_deg=0, longitude_deg=0, time_zone="UTC")
    north.site = other
    with pytest.raises(ValidationError, match="cannot move to another site"):
        north.full_clean()
    south.site = other  # no nights of its own: nothing ties it to the old site's log
    south.full_clean()


# --- figures a telescope's row leaves out -------------------------------------------------------------------------
#
# The rule (logbook.models.NightUsage): a telescope's night takes each figure from its own row where the row gives it,
# and from the site's row of that night where it leaves it out (stored None, as the import stores a figure a
# telescope's record does not give: tests/test_usage_per_telescope_ingest.py); 0, or no PM10, with no site row then.
#
# The site below (Dusty Knoll) logged the whole site's nights of 1-10 Jun 2026: 6 open hours, 30 slews, axis 1 travel
# 900 degrees, axis 2 travel 500, 32 brake cycles, PM10 60 ug/m3. North's control software sends open hours and slews
# only: 31 May 2026 (4 h, 10 slews; the site logged nothing that night) and 6-10 Jun 2026 (5 h, 50 slews). South sent
# one night of its own, 10 Jun 2026: 2 h, 8 slews and 0 brake cycles (given). Today is 11 Jun 2026: nothing unlogged.
# Hand computations from the rule, every plan counting from 31 May 2026:
#
#     North: 31 May its own with nothing to fill from: 4 h, 10 slews, 0 travel, 0 brake cycles, clean air;
#            1-5 Jun the site's: 5 x 6 h = 30 h, 5 x 30 = 150 slews, 5 x 900 = 4,500 deg, 5 x 32 = 160 cycles;
#            6-10 Jun its own hours and slews (5 x 5 h = 25 h, 5 x 50 = 250) with the site's travel (4,500 deg),
#            brake cycles (160) and PM10:
#            59 h, 410 slews, 9,000 deg, 320 brake cycles.
#     South: 1-9 Jun the site's: 54 h, 270 slews, 8,100 deg, 288 cycles; 10 Jun its own 2 h, 8 slews, 0 cycles
#            (given) and the site's 900 deg: 56 h, 278 slews, 9,000 deg, 288 brake cycles.
#
# Dust-weighted hours at dust sensitivity 1, by calc.exposure.dust_weight's documented weight
# w = 1 + s x max(0, PM10 - 20) / 20 (a missing PM10 counts as clean air, w = 1; our own model, no published source):
# PM10 60 weighs 1 + (60 - 20) / 20 = 3. North: 4 x 1 + (30 + 25) x 3 = 169; South: 56 x 3 = 168.
# Counted as 0 and clean air instead (the old reading), North would have had 160 brake cycles, 4,500 deg and 119
# dust-weighted hours.

KNOLL_TODAY = dt.date(2026, 6, 11)
WORN_BY = {"open_hours": 3000, "slews": 50_000, "axis1_travel_deg": 250_000, "brake_cycles": 5000, "dust_hours": 2000}


@pytest.fixture
def left_out(db):
    site, north, south = _two_telescope_site("Dusty Knoll", dt.date(2026, 5, 31), KNOLL_TODAY)
    unknown = {"axis1_travel_deg": None, "axis2_travel_deg": None, "brake_cycles": None, "pm10_ugm3": None}
    NightUsage.objects.bulk_create(
        [NightUsage(site=site, night=day, open_hours=6, slews=30, axis1_travel_deg=900, axis2_travel_deg=500,
                    brake_cycles=32, pm10_ugm3=60) for day in _days(dt.date(2026, 6, 1), dt.date(2026, 6, 10))]
        + [NightUsage(site=site, telescope=north, night=dt.date(2026, 5, 31), open_hours=4, slews=10, **unknown)]
        + [NightUsage(site=site, telescope=north, night=day, open_hours=5, slews=50, **unknown)
           for day in _days(dt.date(2026, 6, 6), dt.date(2026, 6, 10))]
        + [NightUsage(site=site, telescope=south, night=dt.date(2026, 6, 10), open_hours=2, slews=8, brake_cycles=0,
                      axis1_travel_deg=None, axis2_travel_deg=None)]
    )
    plans = {}
    for telescope in (north, south):
        brake = Subsystem.objects.create(telescope=telescope, kind="brake", name=f"{telescope.name} brake")
        plan = ServicePlan.objects.create(subsystem=brake, name="Brake check", counting_from=dt.date(2026, 5, 31),
                                          dust_sensitivity=1.0)
        Trigger.objects.bulk_create(Trigger(plan=plan, metric=metric, limit=limit) for metric, limit in WORN_BY.items())
        plans[telescope.name] = plan
    return site, north, south, plans


def test_a_telescopes_night_takes_the_figures_it_leaves_out_from_the_sites_row_of_that_night(left_out):
    site, _, _, plans = left_out
    services.site_recompute(site, KNOLL_TODAY)
    assert _figures(plans["North"]) == pytest.approx({
        "open_hours": 59, "slews": 410, "axis1_travel_deg": 9000, "brake_cycles": 320, "dust_hours": 169,
    })


def test_a_figure_the_telescope_gives_counts_as_given_even_0(left_out):
    site, _, _, plans = left_out
    services.site_recompute(site, KNOLL_TODAY)
    assert _figures(plans["South"]) == pytest.approx({
        "open_hours": 56, "slews": 278, "axis1_travel_deg": 9000, "brake_cycles": 288, "dust_hours": 168,
    })


def test_a_telescopes_idle_night_takes_nothing_from_the_open_site(left_out):
    """South sends 9 Jun 2026 too, idle: 0 open hours, its counters and PM10 left out. Hand computation from the rule
    (an idle row takes nothing from the site's row): 1-8 Jun the site's, 8 x 6 h = 48 h, 240 slews, 7,200 deg,
    256 cycles; 9 Jun 0 of everything; 10 Jun as above (2 h, 8 slews, 0 cycles given, the site's 900 deg):
    50 h, 248 slews, 8,100 deg, 256 brake cycles, dust-weighted 50 x 3 = 150. Taking the site's counters, South
    would have counted 278 slews and 288 cycles for a night it stood still."""
    site, _, south, plans = left_out
    NightUsage.objects.create(site=site, telescope=south, night=dt.date(2026, 6, 9), open_hours=0, slews=None,
                              axis1_travel_deg=None, axis2_travel_deg=None, brake_cycles=None, pm10_ugm3=None)
    services.site_recompute(site, KNOLL_TODAY)
    assert _figures(plans["South"]) == pytest.approx({
        "open_hours": 50, "slews": 248, "axis1_travel_deg": 8100, "brake_cycles": 256, "dust_hours": 150,
    })


def test_a_telescopes_log_night_by_night(left_out):
    """North's log: 31 May its own (nothing to fill from), 1-5 Jun the site's rows, 6-10 Jun its own rows filled."""
    site, north, _, _ = left_out
    log = services.UsageLog.of_site(site)[north.pk]
    assert log.nights.astype(str).tolist() == [
        "2026-05-31", *(f"2026-06-{day:02d}" for day in range(1, 11))
    ]
    assert log.columns["open_hours"].tolist() == [4] + [6] * 5 + [5] * 5
    assert log.columns["brake_cycles"].tolist() == [0] + [32] * 10
    assert log.columns["axis2_travel_deg"].tolist() == [0] + [500] * 10
    assert log.pm10[0] != log.pm10[0] and log.pm10[1:].tolist() == [60] * 10  # NaN (not measured), then the site's
    assert services.UsageLog.of_site(site)[None].columns["brake_cycles"].tolist() == [32] * 10  # the site's own


def test_an_unknown_counter_on_a_row_of_the_site_counts_0(left_out):
    """Only a telescope's row leaves counters unknown; were a row of the site's stored so, its log counts it 0."""
    site, _, _, _ = left_out
    NightUsage.objects.filter(telescope__isnull=False).delete()
    NightUsage.objects.filter(site=site, night=dt.date(2026, 6, 1)).update(slews=None, brake_cycles=None)
    log = services.UsageLog.of_site(site)[None]
    assert log.columns["slews"].tolist() == [0] + [30] * 9
    assert log.columns["brake_cycles"].sum() == 9 * 32


def test_each_forecast_says_what_its_log_is_made_of(two_telescopes):
    """North: 165 own nights of 365 (200 of the site's before 1 Jan 2026). South reads the site's rows alone."""
    site, _, _, plans = two_telescopes
    services.site_recompute(site, TODAY)
    north = PlanStatus.objects.get(plan=plans["North"]).basis
    south = PlanStatus.objects.get(plan=plans["South"]).basis
    assert "this telescope's log: its own nights on 165 of 365 logged nights, the whole site's on the rest" in north
    assert "the whole site's nights (those sent for the site, not for one telescope)" in south


def test_a_telescope_with_no_nights_at_a_site_logging_per_telescope_is_told_so(two_telescopes):
    site, _, _, plans = two_telescopes
    NightUsage.objects.filter(telescope__isnull=True).delete()
    services.site_recompute(site, TODAY)
    assert "nothing is counted for it" in PlanStatus.objects.get(plan=plans["South"]).basis


def test_a_recoat_prices_the_nights_of_the_telescope_it_takes_out(two_telescopes):
    """January: North's own open fraction 0.8, the site's 0.4 (above). A night's cost is its moonless dark hours (5
    in the constant sky) x the open fraction (mirrors.services.night_costs)."""
    from observatory_ops.mirrors.services import night_costs

    site, north, south, _ = two_telescopes
    january = dt.date(2027, 1, 10)
    assert night_costs(site, january, 1, north)[0].cost == pytest.approx(5 * 0.8)
    assert night_costs(site, january, 1, south)[0].cost == pytest.approx(5 * 0.4)


def test_a_counters_rate_per_open_hour_is_the_telescopes_own_once_it_sends_its_own_nights(two_telescopes):
    """Hand computation (the module's log): North's own nights give 16,500 slews over 1,320 open hours, 12.5 per open
    hour; over its whole log, the site's rows before them mixed in, 20,500 / 2,120 = 9.67, which made its slew
    forecasts late for as long as the site's rows outnumber its own. South, the site's rows alone: 20 / 4 = 5."""
    site, north, south, _ = two_telescopes
    north_model = services.usage_model(site, services.UsageLog.for_telescope(north), TODAY, 30)
    south_model = services.usage_model(site, services.UsageLog.for_telescope(south), TODAY, 30)
    assert north_model.per_open_hour["slews"] == pytest.approx(12.5)
    assert south_model.per_open_hour["slews"] == pytest.approx(5.0)
    assert "times 12.5 slews per open hour (this telescope's own 165 nights)" in north_model.usage_basis("slews", 1.0)
    assert "times 5 slews per open hour (this site's log)" in south_model.usage_basis("slews", 1.0)


def test_a_telescope_with_few_nights_of_its_own_keeps_the_rate_of_its_whole_log(db):
    """Under forecast.MIN_NIGHTS_FOR_HISTORY (20) open nights of its own, a handful of nights would set the rate: the
    whole log's stays. 10 own nights of 8 h and 100 slews after 30 site nights of 4 h and 20 slews: (600 + 1,000) /
    (120 + 80) = 8 per open hour."""
    site, north, _ = _two_telescope_site("Short Own", dt.date(2026, 5, 1), TODAY)
    first = TODAY - dt.timedelta(days=40)
    NightUsage.objects.bulk_create(
        [NightUsage(site=site, night=day, open_hours=4, slews=20)
         for day in _days(first, first + dt.timedelta(days=29))]
        + [NightUsage(site=site, telescope=north, night=day, open_hours=8, slews=100)
           for day in _days(first + dt.timedelta(days=30), TODAY - dt.timedelta(days=1))]
    )
    model = services.usage_model(site, services.UsageLog.for_telescope(north), TODAY, 30)
    assert model.per_open_hour["slews"] == pytest.approx(8.0)


def test_reliability_of_one_telescope_counts_its_subsystems_alone(two_telescopes, users, client):
    """A site with two telescopes could not tell which one's fans failed: the page takes one telescope. Hand figures
    as above: North's fans 2,120 h, South's 1,460 h; one repair of North's fans, 3 h, counts on North's page only."""
    from django.urls import reverse

    from observatory_ops.logbook.models import ServiceRecord
    from observatory_ops.reliability.selectors import site_reliability

    site, north, south, plans = two_telescopes
    by = users["engineer"]
    ServiceRecord.objects.create(subsystem=plans["North"].subsystem, performed_on=TODAY - dt.timedelta(days=30),
                                 performed_by=by, created_by=by, hours_spent=3.0, summary="bearing seized",
                                 repaired_failure=True)

    def fans(telescope):
        return next(k for k in site_reliability(site, TODAY, telescope=telescope).kinds if k.code == "cooling_fans")

    assert (fans(north).operating_hours, fans(north).failures, fans(north).hours_total) == (
        pytest.approx(2120), 1, pytest.approx(3.0))
    assert (fans(south).operating_hours, fans(south).failures, fans(south).hours_total) == (pytest.approx(1460), 0, 0)
    assert fans(None).failures == 1 and fans(None).operating_hours == pytest.approx(2120 + 1460)

    client.force_login(users["viewer"])
    url = reverse("site-reliability", args=[site.slug])
    page = client.get(url, {"telescope": south.pk}).content.decode()
    assert "<h1>Reliability of South at Twin Ridge</h1>" in page and 'id="telescope-chosen"' in page
    assert f"&amp;telescope={south.pk}" in page  # the periods offered keep the telescope
    page = client.get(url, {"telescope": "99999"}).content.decode()
    assert "99999 is not one of this site&#x27;s telescopes" in page and "<h1>Reliability at Twin Ridge</h1>" in page


def test_the_service_records_and_readings_downloads_take_one_telescope(two_telescopes, users, client):
    """An auditor's review: a telescope's year of records took three downloads, ``?telescope=`` was ignored, and the
    readings had no download at all. Each download names its telescope's records only, and a telescope of another
    site is refused in words."""
    import csv
    import io

    from django.utils import timezone

    from observatory_ops.logbook.models import Reading, ServiceRecord

    site, north, south, plans = two_telescopes
    by = users["engineer"]
    for telescope, hours in (("North", 1.0), ("South", 2.0)):
        fans = plans[telescope].subsystem
        ServiceRecord.objects.create(subsystem=fans, performed_on=TODAY - dt.timedelta(days=3), performed_by=by,
                                     created_by=by, hours_spent=hours, summary="filters")
        Reading.objects.create(subsystem=fans, quantity="motor_current", unit="A", value=hours,
                               taken_at=timezone.make_aware(dt.datetime.combine(TODAY - dt.timedelta(days=3),
                                                                                dt.time(10)), site.zone), taken_by=by)
    client.force_login(users["viewer"])

    def rows(name: str, **query) -> list[dict]:
        answer = client.get(f"/sites/{site.slug}/{name}.csv", {"from": "2026-01-01", "to": TODAY.isoformat(), **query})
        assert answer.status_code == 200, answer.content
        return list(csv.DictReader(io.StringIO(answer.content.decode("utf-8-sig"))))

    assert [r["hours_spent"] for r in rows("service-records", telescope=south.pk)] == ["2.0"]
    assert len(rows("service-records")) == 2
    [reading] = rows("readings", telescope=north.pk)
    assert (reading["telescope"], reading["value"], reading["unit"], reading["taken_by"]) == ("North", "1.0", "A",
                                                                                          "engineer")
    assert reading["taken_at"].startswith(f"{TODAY - dt.timedelta(days=3)}T10:00")
    refused = client.get(f"/sites/{site.slug}/readings.csv", {"telescope": "99999"})
    assert refused.status_code == 400 and "telescope 99999 is not one of Twin Ridge" in refused.content.decode()


def test_a_download_s_period_beyond_the_calendar_the_site_reaches_is_refused_in_words(two_telescopes, users, client):
    """A diff review: ?to=9999-12-31 gave a 500 (a day past it cannot be made)."""
    site, _, _, _ = two_telescopes
    client.force_login(users["viewer"])
    for query in ({"to": "9999-12-31"}, {"from": "0001-01-01"}):
        answer = client.get(f"/sites/{site.slug}/readings.csv", query)
        assert answer.status_code == 400 and "dates from 1900 to 2999" in answer.content.decode()
