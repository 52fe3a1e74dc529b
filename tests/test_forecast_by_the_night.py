"""A month whose use its darkness does not lead is taken by the night (calc.forecast.monthly_use_by_night): a review
of an invented site at 52.2 N found June (no astronomical darkness, 105 h logged) forecast at nothing and July (0.41
dark hours a night, open 8.2 x them) at 19 h on its last night, longer than the night.

Hand computation, the scene below: two years of logged nights; June has no dark hours and 3.5 open hours a night, July
0.4 dark hours and 3.0 open (3.0 / 0.4 = 7.5 x: above 1.5), every other month 8 dark hours and 4 open (0.5). So each
coming June night expects 3.5 h, each July night 3.0 h, and every other night 8 x 0.5 = 4.0 h; a month's total is
kept (30 x 3.5 = 105 h in June)."""
from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from observatory_ops.calc import forecast
from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning import services
from observatory_ops.planning.models import NightSky
from observatory_ops.registry.models import Site, Subsystem, Telescope

DARK = {6: 0.0, 7: 0.4}  # dark hours a night by month; 8 in the others
OPEN = {6: 3.5, 7: 3.0}  # open hours a logged night by month; 4 in the others


def test_the_months_taken_by_the_night_and_their_mean_open_hours_by_hand():
    months = np.repeat(np.arange(1, 13), 30)
    dark = np.array([DARK.get(m, 8.0) for m in months])
    open_h = np.array([OPEN.get(m, 4.0) for m in months])
    per_night, by_night = forecast.monthly_use_by_night(months, open_h, dark)
    assert list(np.flatnonzero(by_night) + 1) == [6, 7]
    assert per_night[5] == pytest.approx(3.5) and per_night[6] == pytest.approx(3.0)
    assert np.isnan(per_night[0])
    # A month at 1.5 x its dark hours is still led by them (the bound itself is not above it); too few nights: prior.
    edge = forecast.monthly_use_by_night(np.full(20, 8), np.full(20, 1.5), np.full(20, 1.0))[1]
    few = forecast.monthly_use_by_night(np.full(19, 6), np.full(19, 3.5), np.zeros(19))[1]
    assert not edge[7] and not few[5]
    # A month with no darkness and the dome never open stays at nothing.
    closed = forecast.monthly_use_by_night(np.full(30, 6), np.zeros(30), np.zeros(30))[1]
    assert not closed[5]


@pytest.mark.django_db
def test_a_summer_without_darkness_is_forecast_by_the_night_and_the_table_says_so(users, client):
    site = Site.objects.create(name="Fen Edge", slug="fen-edge", latitude_deg=52.2, longitude_deg=0.1,
                               time_zone="UTC")
    telescope = Telescope.objects.create(site=site, name="F30", aperture_m=0.3, mount="fork")
    today = services.site_today(site)
    first, last = today - dt.timedelta(days=730), today + dt.timedelta(days=services.HORIZON_DAYS + 5)
    days = [first + dt.timedelta(days=i) for i in range((last - first).days + 1)]
    NightSky.objects.bulk_create(NightSky(site=site, night=d, dark_hours=DARK.get(d.month, 8.0),
                                          moon_illumination=0.5, moonless_dark_hours=DARK.get(d.month, 8.0) / 2)
                                 for d in days)
    NightUsage.objects.bulk_create(NightUsage(site=site, night=d, open_hours=OPEN.get(d.month, 4.0))
                                   for d in days if d < today)
    model = services.forecast_model(site, services.UsageLog.site_wide(site), today)
    coming = [model.first_day + dt.timedelta(days=i) for i in range(len(model.open_hours))]
    by_month = {m: {float(h) for d, h in zip(coming, model.open_hours, strict=True) if d.month == m} for m in (1, 6, 7)}
    assert by_month == {1: {4.0}, 6: {3.5}, 7: {3.0}}
    assert ("by the night in Jun, Jul (open more than 1.5 x their dark hours, or with none: twilight, a sky never "
            "fully dark): each coming night of such a month at its mean open hours a logged night") in model.basis
    fans = Subsystem.objects.create(telescope=telescope, kind="cooling_fans", name="Fans")
    from observatory_ops.planning.models import ServicePlan, Trigger

    plan = ServicePlan.objects.create(subsystem=fans, name="Fan bearings", counting_from=today,
                                      counting_from_given=True)
    Trigger.objects.create(plan=plan, metric="open_hours", limit=5000)
    services.site_recompute(site)
    client.force_login(users["viewer"])
    page = " ".join(client.get(fans.get_absolute_url()).content.decode().split())
    assert "by the night: 3.50 h a night <span class=\"muted\">(2 years, 60 nights; no dark hours)</span>" in page
    assert "by the night: 3.00 h a night <span class=\"muted\">(2 years, 62 nights; open 7.50 x its dark hours)" in page
