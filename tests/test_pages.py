"""Every page of the demo answers: each subsystem, work order and mirror page, for a viewer."""
from __future__ import annotations

import pytest


@pytest.fixture
def demo(db):
    from fixtures_demo import generator

    generator.demo_users()
    site, _ = generator.build()
    return site


def test_every_demo_page_renders(demo, client):
    from observatory_ops.mirrors.models import Mirror
    from observatory_ops.registry.models import Subsystem
    from observatory_ops.workorders.models import WorkOrder

    client.login(username="viewer", password="demo-viewer-2026")
    urls = ["/", f"/sites/{demo.slug}/", "/due/", "/due/?export=csv", "/workorders/", "/coating/",
            f"/sites/{demo.slug}/nights/", f"/sites/{demo.slug}/parts/", f"/sites/{demo.slug}/downtime.ics"]
    urls += [s.get_absolute_url() for s in Subsystem.objects.all()]
    urls += [w.get_absolute_url() for w in WorkOrder.objects.all()]
    urls += [m.get_absolute_url() for m in Mirror.objects.all()]
    urls += [f"/mirrors/{m.pk}/recoat/" for m in Mirror.objects.all()]
    for url in urls:
        response = client.get(url)
        assert response.status_code in (200, 302), f"{url}: {response.status_code}"


def test_dates_read_one_way_on_every_page(settings):
    """Day, abbreviated month, year ("23 Mar 2027") wherever a template prints a date as it is."""
    import datetime as dt

    from django.template import Context, Template

    rendered = Template("{{ day }}; {{ moment }}").render(
        Context({"day": dt.date(2027, 3, 23), "moment": dt.datetime(2027, 3, 23, 4, 5)})
    )
    assert rendered == "23 Mar 2027; 23 Mar 2027 04:05"


def test_a_forecast_band_across_new_year_names_both_years():
    import datetime as dt

    from observatory_ops.calc.triggers import TriggerState
    from observatory_ops.planning.services import reason_text

    state = TriggerState(metric="open_hours", value=10, limit=20, rate_per_day=1, forecast=dt.date(2027, 1, 10),
                         earliest=dt.date(2026, 12, 29), latest=dt.date(2027, 1, 29), basis="", unit="h")
    assert "(between 29 Dec 2026 and 29 Jan 2027)" in reason_text(state)


def test_each_night_of_the_recoat_calendar_says_how_its_cost_is_made(demo, client):
    """Traceability: the cost shown is the night's moonless dark hours x the month's open fraction (x the
    booked weight), as mirrors.services.night_costs computes it."""
    import re

    from observatory_ops.mirrors.models import Mirror

    client.login(username="viewer", password="demo-viewer-2026")
    from observatory_ops.planning.services import site_today

    start = site_today(demo)
    page = client.get(f"/mirrors/{Mirror.objects.first().pk}/recoat/?start={start}&horizon_days=60").content.decode()
    titles = re.findall(r'class="night[^"]*"[^>]*title="([^"]*)"', page)
    assert titles and all("Moon" in t for t in titles)
    costed = [t for t in titles if "cost" in t]
    made = r"cost [\d.]+ h = [\d.]+ moonless dark h × \d+ % of dark hours open"
    assert costed and all(re.search(made, t) for t in costed)
