"""The due-state recompute end to end: forecasts from the site's own history and sky.

The synthetic site below has a constant sky (every night 10 dark hours, put straight into the nights
cache) and constant usage, so each forecast date is known analytically.
"""
from __future__ import annotations

import datetime as dt
import json
import math

import numpy as np
import pytest
from conftest import site_in_use
from django.core.management import call_command

from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning import services
from observatory_ops.planning.models import NightSky, PlanStatus, ServicePlan, Trigger
from observatory_ops.registry.models import Site, Subsystem, Telescope

TODAY = dt.date(2026, 6, 15)


def _plan(subsystem, name, triggers, counting_from, sensitivity=0.0):
    plan = ServicePlan.objects.create(
        subsystem=subsystem, name=name, counting_from=counting_from, dust_sensitivity=sensitivity
    )
    for metric, limit in triggers:
        Trigger.objects.create(plan=plan, metric=metric, limit=limit)
    return plan


def _constant_sky(site, start, end, dark_hours=10.0):
    day = start
    rows = []
    while day <= end:
        rows.append(NightSky(site=site, night=day, dark_hours=dark_hours, moon_illumination=0.5,
                             moonless_dark_hours=dark_hours / 2))
        day += dt.timedelta(days=1)
    NightSky.objects.bulk_create(rows)


@pytest.fixture
def synthetic(db):
    site = Site.objects.create(name="Flatland", slug="flatland", latitude_deg=0, longitude_deg=0, time_zone="UTC")
    telescope = Telescope.objects.create(site=site, name="S1", aperture_m=0.5, mount="fork")
    subsystem = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name="Fans")
    start = TODAY - dt.timedelta(days=400)
    _constant_sky(site, start, TODAY + dt.timedelta(days=services.HORIZON_DAYS + 5))
    # 400 logged nights, each 6 of 10 dark hours open, 30 slews, PM10 60 ug/m3.
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=start + dt.timedelta(days=i), open_hours=6, slews=30, pm10_ugm3=60)
        for i in range(400)
    )
    return site, subsystem, start


def test_constant_rates_give_the_analytic_due_date(synthetic):
    site, subsystem, start = synthetic
    # Open hours: 400 nights x 6 h = 2400 h logged; limit 3000 leaves 600 h. Expected per night =
    # 10 dark h x open fraction 0.6 = 6 h, so the limit is reached at the end of the 100th night from
    # today: day index 99 -> TODAY + 99 days.
    hours = _plan(subsystem, "hours", [("open_hours", 3000)], start)
    # Dust-weighted hours at sensitivity 1: weight 1 + (60 - 20) / 20 = 3, so 18 per night;
    # logged 7200, limit 9000 leaves 1800 = 100 nights -> TODAY + 99 days.
    dust = _plan(subsystem, "dust", [("dust_hours", 9000)], start, sensitivity=1.0)
    # Slews: 5 per open hour x 6 h = 30 per night; logged 12000, limit 13500 leaves 1500 = 50 nights.
    slews = _plan(subsystem, "slews", [("slews", 13500)], start)
    # Calendar: exactly 500 days after counting began.
    calendar = _plan(subsystem, "calendar", [("calendar_days", 500)], start)
    services.site_recompute(site, TODAY)
    status = {p.name: PlanStatus.objects.get(plan=p) for p in (hours, dust, slews, calendar)}
    assert status["hours"].value == pytest.approx(2400)
    assert status["hours"].forecast_date == TODAY + dt.timedelta(days=99)
    assert status["dust"].value == pytest.approx(7200)
    assert status["dust"].forecast_date == TODAY + dt.timedelta(days=99)
    assert status["slews"].forecast_date == TODAY + dt.timedelta(days=49)
    assert status["calendar"].forecast_date == start + dt.timedelta(days=500)
    assert status["calendar"].earliest == status["calendar"].latest == status["calendar"].forecast_date
    # The log (11 May 2025 to 14 Jun 2026) has one calendar month logged on 20 nights or more in two years (May), so
    # one month can be compared with another year's and the band keeps the prior spread of 0.35 (calc/forecast.py).
    # Hand loop, one sigma of m = max((k + 1) / 30.44, 1) independent months: earliest = first k with
    # 6 (k + 1) (1 + 0.35 / sqrt(m)) >= 600, latest = first k with 6 (k + 1) (1 - 0.35 / sqrt(m)) >= 600.
    def first(sign: float) -> int:
        return next(k for k in range(400)
                    if 6 * (k + 1) * (1 + sign * 0.35 / math.sqrt(max((k + 1) / 30.44, 1))) >= 600)

    assert status["hours"].earliest == TODAY + dt.timedelta(days=first(+1))
    assert status["hours"].latest == TODAY + dt.timedelta(days=first(-1))
    assert "prior month-to-month spread of 35%" in status["hours"].basis
    assert "own open fraction for every month" in status["hours"].basis


def test_whichever_comes_first_governs(synthetic):
    site, subsystem, start = synthetic
    plan = _plan(subsystem, "both", [("open_hours", 3000), ("slews", 13500)], start)
    services.site_recompute(site, TODAY)
    status = PlanStatus.objects.get(plan=plan)
    assert status.metric == "slews"  # 50 nights away beats 100 nights away
    assert [t["metric"] for t in status.trigger_rows] == ["slews", "open_hours"]


def test_service_record_restarts_counting(synthetic, users):
    from observatory_ops.logbook.services import service_record_log

    site, subsystem, start = synthetic
    plan = _plan(subsystem, "hours", [("open_hours", 3000)], start)
    service_record_log(subsystem, plan, TODAY - dt.timedelta(days=10), users["technician"], "done")
    services.site_recompute(site, TODAY)
    status = PlanStatus.objects.get(plan=plan)
    # Nights from the service date on: the 10 nights TODAY-10 .. TODAY-1, 6 h each.
    assert status.value == pytest.approx(60)
    assert status.last_service_on == TODAY - dt.timedelta(days=10)


def test_service_history_logged_after_registering_counts_from_when_it_happened(synthetic, users):
    """A site starting with the tool registers its subsystems today and then logs their past service: each
    plan counts from its last service, and from its counting date only while it has none (the field's help)."""
    from observatory_ops.logbook.services import service_record_log

    site, subsystem, _ = synthetic
    plan = _plan(subsystem, "hours and days", [("open_hours", 3000), ("calendar_days", 365)], TODAY)
    services.site_recompute(site, TODAY)
    assert PlanStatus.objects.get(plan=plan).value == 0
    service_record_log(subsystem, plan, TODAY - dt.timedelta(days=200), users["technician"], "done before the tool")
    services.site_recompute(site, TODAY)
    status = PlanStatus.objects.get(plan=plan)
    others = {t["metric"]: t["value"] for t in status.triggers} | {status.metric: status.value}
    assert others["calendar_days"] == 200
    assert others["open_hours"] == pytest.approx(200 * 6)  # the 200 logged nights since, 6 h each


def test_one_dusty_night_does_not_set_a_months_dust_forecast(synthetic):
    """As for the open fraction (at least MIN_NIGHTS_FOR_HISTORY logged nights), a month's mean PM10 needs
    that many measured open nights; with fewer in all, the site counts as clean air and the basis says so.
    The threshold is common practice, no published source (calc.forecast); the weight of 1 for clean air is
    calc.exposure.dust_weight's own definition, checked in tests/test_calc_exposure.py."""
    from observatory_ops.calc import forecast

    site, subsystem, start = synthetic
    NightUsage.objects.filter(site=site).update(pm10_ugm3=None)
    NightUsage.objects.filter(site=site, night=TODAY - dt.timedelta(days=1)).update(pm10_ugm3=300)
    _plan(subsystem, "filters", [("dust_hours", 1e6)], start, sensitivity=1.0)
    services.site_recompute(site, TODAY)
    log = services.UsageLog.site_wide(site)
    model = services.usage_model(site, log, TODAY, 60)
    assert np.isnan(model.month_pm10).all()
    assert np.allclose(model.expected("dust_hours", 1.0), model.open_hours)  # weight 1: clean air
    state = PlanStatus.objects.get(plan__name="filters")
    assert f"PM10 measured on 1 open nights, under {forecast.MIN_NIGHTS_FOR_HISTORY}" in state.basis
    # With PM10 on every night (60 ug/m3), each month has its own mean.
    NightUsage.objects.filter(site=site).update(pm10_ugm3=60)
    model = services.usage_model(site, services.UsageLog.site_wide(site), TODAY, 60)
    assert np.allclose(model.month_pm10, 60) and model.pm10_months == 12


def test_a_coming_open_hour_weighs_what_its_months_past_open_hours_weighed_not_the_weight_of_their_mean_pm10(
    synthetic
):
    """A traceability review: the forecast weighed each coming hour by the weight of the month's mean PM10, so a month
    of nights at 10 and 30 ug/m3 (mean 20, clean air) forecast a weight of 1 while half its hours weighed 1.5 (s = 1),
    and dust-weighted plans came due late. Checked against the mean weight of each month's past open hours computed
    here from the stored nights, night by night, with the weight's definition (1 + s x max(0, PM10 - 20) / 20)."""
    site, subsystem, start = synthetic
    rows = list(NightUsage.objects.filter(site=site).order_by("night"))
    for i, row in enumerate(rows):
        row.pm10_ugm3 = 10.0 if i % 2 else 30.0
    NightUsage.objects.bulk_update(rows, ["pm10_ugm3"])
    model = services.usage_model(site, services.UsageLog.site_wide(site), TODAY, 400)
    sensitivity = 1.5
    by_month: dict[int, list[float]] = {}
    for row in NightUsage.objects.filter(site=site, open_hours__gt=0):
        weight = 1.0 + sensitivity * max(0.0, row.pm10_ugm3 - 20.0) / 20.0
        totals = by_month.setdefault(row.night.month, [0.0, 0.0])
        totals[0] += row.open_hours * weight
        totals[1] += row.open_hours
    expected = model.expected("dust_hours", sensitivity) / np.where(model.open_hours > 0, model.open_hours, np.nan)
    for month, (weighted, hours) in by_month.items():
        coming = model.months == month
        assert np.allclose(expected[coming & (model.open_hours > 0)], weighted / hours, rtol=1e-9), month
    assert np.nanmin(expected) > 1.2  # about 1 + 1.5 x 0.25, where the mean PM10 (about 20) weighed 1


def test_overdue_due_and_later(synthetic):
    site, subsystem, start = synthetic
    overdue = _plan(subsystem, "overdue", [("open_hours", 2000)], start)
    due = _plan(subsystem, "due", [("open_hours", 2460)], start)  # 10 nights away, look-ahead 30 days
    later = _plan(subsystem, "later", [("open_hours", 5000)], start)
    services.site_recompute(site, TODAY)
    got = {p.name: PlanStatus.objects.get(plan=p).status for p in (overdue, due, later)}
    assert got == {"overdue": "overdue", "due": "due", "later": "later"}


def test_condition_trigger_extrapolates_the_theil_sen_trend(db, users):
    from django.utils import timezone

    from observatory_ops.logbook.models import Reading

    site = Site.objects.create(name="Trend", slug="trend", latitude_deg=30, longitude_deg=0, time_zone="UTC")
    telescope = Telescope.objects.create(site=site, name="S1", aperture_m=0.5, mount="fork")
    drive = Subsystem.objects.create(telescope=telescope, kind="axis1_drive", name="Drive")
    plan = _plan(drive, "settle", [], TODAY - dt.timedelta(days=200))
    Trigger.objects.create(plan=plan, metric="reading", limit=1.0, quantity="settle_time_s")
    # Settle time rising 0.005 s/day exactly from 0.5 s, 100 days ago: reaches 1.0 s at day 100 = today.
    # Use 0.004 s/day: 0.5 + 0.004 d = 1.0 at d = 125 -> 25 days after today.
    origin = TODAY - dt.timedelta(days=100)
    for d in range(0, 101, 10):
        Reading.objects.create(
            subsystem=drive, quantity="settle_time_s", unit="s", value=0.5 + 0.004 * d,
            taken_at=timezone.make_aware(dt.datetime.combine(origin + dt.timedelta(days=d), dt.time(12))),
            taken_by=users["technician"],
        )
    services.site_recompute(site, TODAY)
    status = PlanStatus.objects.get(plan=plan)
    assert status.metric == "reading"
    assert status.forecast_date == TODAY + dt.timedelta(days=25)
    assert status.status == "due"
    assert "Theil-Sen" in status.reason


@pytest.mark.parametrize("latitude", [70.0, 89.0, -75.0])
def test_polar_sites_and_a_date_ten_years_ahead_run(db, latitude):
    from observatory_ops.registry.services import subsystem_create

    site = Site.objects.create(name="North", slug=f"n{int(abs(latitude))}", latitude_deg=latitude,
                               longitude_deg=20, time_zone="Europe/Oslo")
    telescope = Telescope.objects.create(site=site, name="P1", aperture_m=0.4, mount="german")
    far = dt.date(2036, 6, 21)
    subsystem_create(telescope, "cooling_fans", "Fans", counting_from=far - dt.timedelta(days=30))
    NightUsage.objects.bulk_create(
        NightUsage(site=site, night=far - dt.timedelta(days=i), open_hours=0.5, pm10_ugm3=30) for i in range(1, 30, 3)
    )  # a log with gaps
    assert services.site_recompute(site, far) == 2
    for status in PlanStatus.objects.filter(site=site):
        assert status.reason


def test_site_with_no_history_uses_the_prior_and_says_so(db):
    from observatory_ops.registry.services import subsystem_create

    site = Site.objects.create(name="New", slug="new", latitude_deg=35, longitude_deg=-5, time_zone="Europe/Madrid")
    telescope = Telescope.objects.create(site=site, name="N1", aperture_m=0.3, mount="altaz")
    subsystem_create(telescope, "enclosure", "Dome", counting_from=TODAY)
    services.site_recompute(site, TODAY)
    status = PlanStatus.objects.get(site=site)
    hours = next(t for t in status.trigger_rows if t["metric"] == "open_hours")
    assert "prior open fraction" in hours["basis"]
    assert hours["forecast"] is not None  # prior 0.5 x dark hours still moves toward the limit


def test_nights_cache_is_filled_once(site):
    start = dt.date(2026, 1, 1)
    assert services.site_sky_refresh(site, start, start + dt.timedelta(days=9)) == 10
    assert services.site_sky_refresh(site, start, start + dt.timedelta(days=9)) == 0
    assert services.site_sky_refresh(site, start, start + dt.timedelta(days=14)) == 5


def test_due_command_prints_the_documented_keys(synthetic, capsys):
    site, subsystem, start = synthetic
    _plan(subsystem, "hours", [("open_hours", 3000)], start)
    services.site_recompute(site, TODAY)
    call_command("due", "--site", "flatland", "--json")
    records = json.loads(capsys.readouterr().out)
    assert len(records) == 1
    assert {"subsystem", "plan", "trigger", "value", "limit", "rate", "forecast_date", "earliest", "latest"} <= set(
        records[0]
    )


def test_nights_command_json_for_a_position_and_for_a_site(site, capsys):
    call_command("nights", "--lat", "40", "--lon", "-3", "--tz", "Europe/Madrid", "--start", "2026-03-20",
                 "--days", "2", "--json")
    by_position = json.loads(capsys.readouterr().out)
    call_command("nights", "--site", "test-hill", "--start", "2026-03-20", "--days", "2", "--json")
    by_site = json.loads(capsys.readouterr().out)
    keys = {"date", "sunset", "sunrise", "dusk", "dawn", "dark_hours", "moon_illumination", "moonless_dark_hours"}
    assert [set(r) for r in by_position] == [keys, keys]
    assert by_site[0]["date"] == "2026-03-20" and by_site[0]["dusk"].endswith("Z")
    assert abs(by_site[0]["dark_hours"] - by_position[0]["dark_hours"]) < 0.01


@pytest.mark.parametrize(
    "args, message",
    [
        (["--lat", "91", "--lon", "0", "--tz", "UTC"], "latitude"),
        (["--lat", "10", "--lon", "0"], "--tz"),
        (["--lat", "10", "--lon", "0", "--tz", "Mars/Olympus"], "zone"),
        (["--site", "nowhere"], "no site"),
    ],
)
def test_nights_command_bad_input_is_a_clear_message(db, args, message):
    from django.core.management.base import CommandError

    with pytest.raises(CommandError, match=message):
        call_command("nights", *args, "--start", "2026-01-01", "--days", "3")


def test_a_deleted_plan_takes_its_stored_state_with_it(synthetic):
    """The state's keys are not checked by the database (see PlanStatus), so Django's cascade must do it."""
    site, subsystem, start = synthetic
    plan = _plan(subsystem, "hours", [("open_hours", 3000)], start)
    services.site_recompute(site, TODAY)
    assert PlanStatus.objects.filter(plan_id=plan.pk).exists()
    plan.delete()
    assert not PlanStatus.objects.filter(plan_id=plan.pk).exists()


def test_dates_become_the_same_numpy_days_as_numpy_makes_them():
    """Outside reference: numpy's own conversion of date objects to datetime64[D] (the slow path replaced)."""
    days = [dt.date(1969, 12, 31), dt.date(1970, 1, 1), dt.date(2000, 2, 29), dt.date(2026, 12, 2)]
    assert (services._day_array(days) == np.array(days, dtype="datetime64[D]")).all()
    assert services._day_array([]).dtype == np.dtype("datetime64[D]")


def _drive_with_readings(users, zone: str, values_at: list[tuple[dt.datetime, float]], counting_from: dt.date):
    """A site in ``zone`` with one drive plan watching settle time (limit 1 s), and the given readings."""
    from observatory_ops.logbook.models import Reading

    site = Site.objects.create(name=f"Readings {zone}", slug=zone.lower().replace("/", "-"), latitude_deg=30,
                               longitude_deg=0, time_zone=zone)
    telescope = Telescope.objects.create(site=site, name="S1", aperture_m=0.5, mount="fork")
    drive = Subsystem.objects.create(telescope=telescope, kind="axis1_drive", name="Drive")
    plan = _plan(drive, "settle", [], counting_from)
    Trigger.objects.create(plan=plan, metric="reading", limit=1.0, quantity="settle_time_s")
    for taken_at, value in values_at:  # stored directly, as older data may be: no input check on the way
        Reading.objects.create(subsystem=drive, quantity="settle_time_s", unit="s", value=value, taken_at=taken_at,
                               taken_by=users["technician"])
    return site, plan


def test_a_reading_counts_from_the_local_day_of_the_last_service(db, users):
    """The baseline is the site's local date: an evening reading the day before (already the next day
    in UTC, 7 h ahead of Denver in winter) is not part of the trend; one after local midnight is."""
    from zoneinfo import ZoneInfo

    local = ZoneInfo("America/Denver")
    service_day = TODAY - dt.timedelta(days=30)
    before = dt.datetime.combine(service_day - dt.timedelta(days=1), dt.time(22, 30), tzinfo=local)
    assert before.astimezone(dt.UTC).date() == service_day  # the case that used to be counted
    after = [dt.datetime.combine(service_day + dt.timedelta(days=d), dt.time(0, 30), tzinfo=local) for d in (0, 5, 10)]
    site, plan = _drive_with_readings(users, "America/Denver", [(before, 0.95), *[(t, 0.5) for t in after]],
                                      service_day)
    services.site_recompute(site, TODAY)
    assert "Theil-Sen trend of 3 readings" in PlanStatus.objects.get(plan=plan).reason


def test_a_condition_past_its_limit_says_the_day_it_was_first_past(db, users):
    """Like a counter, which gives the night its limit was passed: the first of the newest run of
    readings beyond the limit, not today."""
    noon = [dt.datetime.combine(TODAY - dt.timedelta(days=d), dt.time(12), tzinfo=dt.UTC) for d in (40, 30, 20, 10)]
    site, plan = _drive_with_readings(users, "UTC", list(zip(noon, [0.8, 1.05, 0.98, 1.02, ], strict=True)),
                                      TODAY - dt.timedelta(days=60))
    services.site_recompute(site, TODAY)
    status = PlanStatus.objects.get(plan=plan)
    assert status.status == "overdue"
    assert status.forecast_date == TODAY - dt.timedelta(days=10)  # 0.98 at day -20 was back under the limit
    assert f"limit reached since the reading of {status.forecast_date:%d %b %Y}." in status.reason


def test_absurd_readings_leave_the_recompute_working_and_say_why_there_is_no_trend(db, users):
    """Readings too far apart for a trend (differences overflow to infinity) once jammed the site's
    recompute, since infinity is not JSON: now the plan shows the reading, no trend and no forecast."""
    noon = [dt.datetime.combine(TODAY - dt.timedelta(days=d), dt.time(12), tzinfo=dt.UTC) for d in (30, 20, 10)]
    site, plan = _drive_with_readings(users, "UTC", list(zip(noon, [0.5, -1e308, 1e308], strict=True)),
                                      TODAY - dt.timedelta(days=60))
    services.site_recompute(site, TODAY)
    status = PlanStatus.objects.get(plan=plan)
    assert "no trend (the readings are too far apart to fit a trend)" in status.reason
    assert status.rate_per_day is None
    assert json.loads(json.dumps(status.trigger_rows, allow_nan=False))  # every figure is plain JSON


def test_the_picture_of_a_reached_limit_marks_the_day_instead_of_a_forecast_line_back_in_time():
    from observatory_ops.planning.plots import accumulation_svg

    day = TODAY - dt.timedelta(days=20)
    points = [(TODAY - dt.timedelta(days=60), 0.0), (TODAY, 700.0)]
    reached = str(accumulation_svg(points, 600.0, "h", TODAY, 700.0, day, day, day))
    assert f"limit reached {day:%d %b %Y}" in reached and "forecast " not in reached.replace("forecast band", "")
    coming = str(accumulation_svg(points, 900.0, "h", TODAY, 700.0, TODAY + dt.timedelta(days=9), None, None))
    assert f"forecast {TODAY + dt.timedelta(days=9):%d %b %Y}" in coming


def test_states_computed_before_the_sites_today_are_brought_up_to_date_when_read(db, users, client):
    """Without Celery beat nothing recomputes overnight; the first look of the day does it (a calendar
    trigger's days since the last service moved on), and a second look changes nothing."""
    import datetime as dt

    from observatory_ops.planning.services import site_today, sites_bring_up_to_date

    site = site_in_use("stale")
    services.site_recompute(site)
    assert sites_bring_up_to_date([site]) == []  # computed today: nothing to do
    yesterday = dt.datetime.combine(site_today(site) - dt.timedelta(days=1), dt.time(12), tzinfo=site.zone)
    PlanStatus.objects.filter(site=site).update(computed_at=yesterday, value=-1)
    client.force_login(users["viewer"])
    assert client.get(f"/due/?site={site.pk}").status_code == 200
    assert not PlanStatus.objects.filter(site=site, value=-1).exists()
    assert PlanStatus.objects.filter(site=site).first().computed_at.date() == dt.datetime.now(dt.UTC).date()
    assert sites_bring_up_to_date() == []


def test_the_due_lists_progress_words_a_count_as_the_reason_does():
    counted = PlanStatus(metric="open_hours", value=934.7, limit=600.0, unit="h")
    measured = PlanStatus(metric="reading", value=1.0954, limit=1.0, unit="s")
    assert counted.progress == "935 / 600 h"  # the reason says "935 of 600 h"
    assert measured.progress == "1.095 / 1 s"


def test_a_condition_triggers_sentence_names_the_reading_the_limit_and_the_trend(db, users):
    noon = [dt.datetime.combine(TODAY - dt.timedelta(days=d), dt.time(12), tzinfo=dt.UTC) for d in (20, 10)]
    site, plan = _drive_with_readings(users, "UTC", list(zip(noon, [0.9, 1.095], strict=True)),
                                      TODAY - dt.timedelta(days=60))
    services.site_recompute(site, TODAY)
    reason = PlanStatus.objects.get(plan=plan).reason
    counting_from = TODAY - dt.timedelta(days=60)  # no service logged: counted from the plan's start
    assert reason.startswith("Latest reading 1.095 s against a limit of 1 s (reached at 1 s or above); Settle time "
                             f"after a slew: 2 readings since the plan's start ({counting_from:%d %b %Y}), too few for "
                             "a trend; limit reached since the reading of ")


def test_the_due_lists_csv_download_names_things_as_the_page_does(synthetic, users, client):
    import csv
    import io

    site, subsystem, start = synthetic
    _plan(subsystem, "hours", [("open_hours", 3000)], start)
    services.site_recompute(site)
    client.force_login(users["viewer"])
    rows = list(csv.reader(io.StringIO(client.get("/due/?export=csv").content.decode("utf-8-sig"))))
    assert rows[0][:6] == ["status", "site", "telescope", "subsystem", "service", "trigger"]
    record = dict(zip(rows[0], rows[1], strict=True))
    assert (record["site"], record["telescope"], record["subsystem"]) == ("Flatland", "S1", "Fans")
    assert record["service"] == "hours" and record["trigger"] == "Open-dome hours" and record["unit"] == "h"
    assert record["why"].startswith("Open-dome hours:")


def test_the_due_list_says_when_an_item_is_already_on_a_work_order(synthetic, users, client):
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    from observatory_ops.workorders import services as workorders

    site, subsystem, start = synthetic
    plans = [_plan(subsystem, f"hours {n}", [("open_hours", 3000 + n)], start) for n in range(3)]
    services.site_recompute(site, TODAY)
    client.force_login(users["viewer"])
    with CaptureQueriesContext(connection) as before:
        client.get("/due/")
    order = workorders.work_order_from_due(plans[:2], users["engineer"], planned_date=TODAY + dt.timedelta(days=3))
    with CaptureQueriesContext(connection) as after:
        page = client.get("/due/").content.decode()
    assert page.count(f'">{order.number}</a> (draft, planned {TODAY + dt.timedelta(days=3):%d %b %Y})') == 2
    assert len(after.captured_queries) == len(before.captured_queries)  # one query for the orders, found or not
    workorders.work_order_move(order, "withdraw", users["engineer"], reason="not needed")
    assert order.number not in client.get("/due/").content.decode()


def test_a_condition_with_no_reading_since_the_last_service_is_named_not_dropped(db, users, client):
    from conftest import site_in_use

    from observatory_ops.logbook.quantities import QUANTITIES
    from observatory_ops.registry.services import subsystem_create

    busy = site_in_use("conditions", kinds=())
    drive = subsystem_create(busy.telescopes.get(), "axis1_drive", "Axis 1 drive",
                             counting_from=services.site_today(busy) - dt.timedelta(days=30))
    services.site_recompute(busy)
    client.force_login(users["viewer"])
    page = client.get(drive.get_absolute_url()).content.decode()
    assert f"{QUANTITIES['settle_time_s'][0]}: no reading since" in page


def test_the_reading_form_offers_the_subsystems_own_quantities_first(db, users, client):
    from conftest import site_in_use

    from observatory_ops.registry.services import subsystem_create

    busy = site_in_use("readings", kinds=())
    drive = subsystem_create(busy.telescopes.get(), "axis1_drive", "Axis 1 drive",
                             counting_from=services.site_today(busy))
    client.force_login(users["technician"])
    page = client.get(f"/subsystems/{drive.pk}/readings/new/").content.decode()
    ours = page.split('<optgroup label="For this subsystem">')[1].split("</optgroup>")[0]
    assert 'value="settle_time_s"' in ours and 'value="reflectance"' not in ours
    assert 'value="reflectance"' in page.split('<optgroup label="Other quantities">')[1]


def test_a_service_logged_without_a_reading_keeps_a_reading_past_its_limit_said(db, users, client):
    """A year's review: a brake whose air had fallen past its limit was serviced on the subsystem page with no reading,
    and its plan went to "later", the 4.86 bar no longer said anywhere. With no reading since the service, the last one
    before it that had reached the limit keeps the plan overdue and says to measure again (common practice, no
    published source); the first reading after the service decides again."""
    from observatory_ops.logbook.models import Reading, ServiceRecord

    noon = [dt.datetime.combine(TODAY - dt.timedelta(days=d), dt.time(12), tzinfo=dt.UTC) for d in (40, 20)]
    site, plan = _drive_with_readings(users, "UTC", list(zip(noon, [0.8, 1.2], strict=True)),
                                      TODAY - dt.timedelta(days=60))
    serviced = TODAY - dt.timedelta(days=10)
    by = users["technician"]
    ServiceRecord.objects.create(subsystem=plan.subsystem, plan=plan, performed_on=serviced, performed_by=by,
                                 summary="Drive tuned", created_by=by)
    services.site_recompute(site, TODAY)
    status = PlanStatus.objects.get(plan=plan)
    assert status.status == "overdue"
    assert (f"no reading since the last service ({serviced:%d %b %Y}), and the last one before it had reached the "
            "limit: measure it again to confirm the service brought it back; limit reached since the reading of "
            f"{TODAY - dt.timedelta(days=20):%d %b %Y}.") in status.reason
    client.force_login(users["viewer"])
    page = client.get(f"/subsystems/{plan.subsystem_id}/")
    assert page.status_code == 200
    assert "measure it again to confirm the service brought it back" in page.content.decode()
    Reading.objects.create(subsystem=plan.subsystem, quantity="settle_time_s", unit="s", value=0.7, taken_by=by,
                           taken_at=dt.datetime.combine(serviced, dt.time(15), tzinfo=dt.UTC))
    services.site_recompute(site, TODAY)
    assert PlanStatus.objects.get(plan=plan).status != "overdue"


def test_a_service_after_a_reading_within_its_limit_asks_nothing_more(db, users):
    from observatory_ops.logbook.models import ServiceRecord

    noon = [dt.datetime.combine(TODAY - dt.timedelta(days=d), dt.time(12), tzinfo=dt.UTC) for d in (40, 20)]
    site, plan = _drive_with_readings(users, "UTC", list(zip(noon, [0.8, 0.9], strict=True)),
                                      TODAY - dt.timedelta(days=60))
    by = users["technician"]
    ServiceRecord.objects.create(subsystem=plan.subsystem, plan=plan, performed_on=TODAY - dt.timedelta(days=10),
                                 performed_by=by, summary="Drive tuned", created_by=by)
    services.site_recompute(site, TODAY)  # the plan's one trigger has no reading to go on: no due state
    assert not PlanStatus.objects.filter(plan=plan, reason__contains="no reading since the last service").exists()


def test_two_plans_watching_one_quantity_each_read_the_reading_before_their_own_service(db, users):
    """A diff review: the last reading before a service was kept per subsystem and quantity, so a second plan
    watching the same quantity took the other's service day, and a plan never serviced was said to have one."""
    from observatory_ops.logbook.models import ServiceRecord

    noon = [dt.datetime.combine(TODAY - dt.timedelta(days=20), dt.time(12), tzinfo=dt.UTC)]
    site, first = _drive_with_readings(users, "UTC", [(noon[0], 1.2)], TODAY - dt.timedelta(days=60))
    second = _plan(first.subsystem, "settle again", [], TODAY - dt.timedelta(days=60))
    Trigger.objects.create(plan=second, metric="reading", limit=1.0, quantity="settle_time_s")
    by = users["technician"]
    ServiceRecord.objects.create(subsystem=second.subsystem, plan=second, performed_on=TODAY - dt.timedelta(days=10),
                                 performed_by=by, summary="Tuned", created_by=by)
    services.site_recompute(site, TODAY)
    assert "no reading since the last service" not in PlanStatus.objects.get(plan=first).reason  # never serviced
    assert (f"no reading since the last service ({TODAY - dt.timedelta(days=10):%d %b %Y})"
            in PlanStatus.objects.get(plan=second).reason)


def test_a_newest_reading_far_under_the_trend_asks_whether_the_unit_was_adjusted(db, users):
    """A forecast review's left-alone list: a drive adjusted without a service logged read 0.45 s, and the trend still
    forecast the limit from the readings before, with nothing said. The newest reading more than 3 robust spreads
    under the line of the readings before it (calc.trend.newest_off_the_line, the Hampel identifier, Leys et al. 2013,
    with our own conditions) is named."""
    weeks = [49, 42, 35, 28, 21, 14, 7, 0]
    noon = [dt.datetime.combine(TODAY - dt.timedelta(days=d), dt.time(12), tzinfo=dt.UTC) for d in weeks]
    values = [0.50, 0.56, 0.59, 0.66, 0.70, 0.74, 0.81, 0.45]
    site, plan = _drive_with_readings(users, "UTC", list(zip(noon, values, strict=True)), TODAY - dt.timedelta(days=60))
    services.site_recompute(site, TODAY)
    reason = PlanStatus.objects.get(plan=plan).reason
    assert (f"The newest reading (0.45 s, {TODAY:%d %b %Y}) lies far under the line of the readings before it ("
            in reason)
    assert ("if the unit was adjusted, cleaned or repaired without a service logged, log that service, and the trend "
            "starts again from it") in reason
    # Within the scatter: not said.
    Reading = plan.subsystem.readings.model
    Reading.objects.filter(subsystem=plan.subsystem, value=0.45).update(value=0.85)
    services.site_recompute(site, TODAY)
    assert "lies far" not in PlanStatus.objects.get(plan=plan).reason
