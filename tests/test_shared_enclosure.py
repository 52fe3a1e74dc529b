"""One enclosure over every telescope of a site (``Site.shared_enclosure``): a roll-off roof or one dome, registered
as a subsystem of one of them.

Its isolation points are locked for work with a moving telescope or enclosure at any telescope of the site (OSHA 29
CFR 1910.147(c)(4): every energy source that can endanger the worker is isolated; a roof driven over a person working
at the other telescope is such a source), and its service plans count the whole site's nights, not those of the
telescope it is registered under. A site without the tick keeps each enclosure to its own telescope (several domes).

The usage is tests/test_usage_per_telescope.py's Twin Ridge: the site's rows 4 open hours a night from 15 Jun 2025
to 14 Jun 2026, North's own 8 hours a night from 1 Jan 2026. Hand computation: the roof under North counts the site's
365 nights x 4 h = 1,460 h when shared, North's 2,120 h (that file's hand computation) when not.
"""
from __future__ import annotations

import pytest
from test_usage_per_telescope import TODAY, _figures, two_telescopes  # noqa: F401  (fixture, used by name)

from observatory_ops.planning import services
from observatory_ops.planning.models import ServicePlan, Trigger
from observatory_ops.registry.models import Subsystem
from observatory_ops.workorders import services as workorders
from observatory_ops.workorders.models import IsolationPoint
from observatory_ops.workorders.selectors import isolation_gaps, isolation_points, moves_held

pytestmark = pytest.mark.django_db


@pytest.fixture
def roof(two_telescopes):  # noqa: F811
    """A roll-off roof registered under North, with its own isolator, and a plan counting its open hours."""
    site, north, south, _ = two_telescopes
    roof = Subsystem.objects.create(telescope=north, kind="enclosure", name="Roll-off roof")
    IsolationPoint.objects.create(telescope=north, subsystem=roof, energy="ac", label="Roof motor isolator Q7")
    IsolationPoint.objects.create(telescope=south, energy="ac", label="South pier breaker")
    plan = ServicePlan.objects.create(subsystem=roof, name="Roof drive service", counting_from=TODAY.replace(year=2025))
    Trigger.objects.create(plan=plan, metric="open_hours", limit=3000)
    return site, north, south, roof, plan


def _order_on_south(south, users):
    drive = Subsystem.objects.create(telescope=south, kind="axis1_drive", name="South RA drive",
                                     hazards=["moving_machinery", "electrical"])
    return workorders.work_order_ad_hoc(south.site, [drive], "RA drive fault", users["engineer"],
                                        steps="Inspect the RA drive.")


def test_a_shared_roofs_isolator_is_locked_for_moving_work_at_the_other_telescope(roof, users):
    site, _, south, _, _ = roof
    order = _order_on_south(south, users)
    assert [p.label for p in isolation_points(order)] == ["South pier breaker"]  # each dome its own
    site.shared_enclosure = True
    site.save()
    order.refresh_from_db()
    assert sorted(p.label for p in isolation_points(order)) == ["Roof motor isolator Q7", "South pier breaker"]
    assert "North: Roll-off roof: AC mains: Roof motor isolator Q7" in [p.description for p in isolation_points(order)]


def test_a_shared_roofs_plans_count_the_whole_sites_nights(roof):
    site, _, _, roof_subsystem, plan = roof
    services.site_recompute(site, TODAY)
    assert _figures(plan) == {"open_hours": pytest.approx(2120)}  # North's own log: the roof is North's
    site.shared_enclosure = True
    site.save()
    services.site_recompute(site, TODAY)
    assert _figures(plan) == {"open_hours": pytest.approx(1460)}  # the site's rows
    assert services.UsageLog.for_subsystem(roof_subsystem).telescope_id is None


def test_ticking_the_shared_enclosure_in_the_admin_recomputes_the_site(roof, users, client, monkeypatch):
    from observatory_ops.registry import services as registry_services

    site = roof[0]
    recomputed = []
    monkeypatch.setattr(registry_services, "site_recompute", lambda s: recomputed.append(s.pk))
    users["administrator"].is_staff = True
    users["administrator"].save()
    client.force_login(users["administrator"])
    page = client.get(f"/admin/registry/site/{site.pk}/change/").content.decode()
    assert "one enclosure over every telescope" in page.lower()
    form = client.get(f"/admin/registry/site/{site.pk}/change/").context["adminform"].form
    data = {k: v for k, v in form.initial.items() if v is not None and not isinstance(v, list)}
    data.update(crew_weekdays=list(site.crew_weekdays), shared_enclosure="on", **{
        "crew_days_off-TOTAL_FORMS": "0", "crew_days_off-INITIAL_FORMS": "0",
    })
    response = client.post(f"/admin/registry/site/{site.pk}/change/", data)
    assert response.status_code == 302, response.context["adminform"].form.errors
    site.refresh_from_db()
    assert site.shared_enclosure and recomputed == [site.pk]


def test_a_shared_roof_without_a_point_of_its_own_is_warned_of_for_moving_work_at_the_other_telescope(roof, users):
    """Registered under North, unlocked: moving work on South is held as work on North would be (the roof can be
    driven over it), not only where the roof is registered. A site without the tick keeps it to North."""
    site, _, south, roof_subsystem, _ = roof
    IsolationPoint.objects.filter(subsystem=roof_subsystem).delete()
    order = _order_on_south(south, users)
    assert not [gap for gap in isolation_gaps(order) if "Roll-off roof" in gap]
    site.shared_enclosure = True
    site.save()
    order.refresh_from_db()
    assert [gap for gap in isolation_gaps(order) if "Roll-off roof" in gap] == [
        "No isolation point is registered for North: Roll-off roof, which has a supply of its own: it can move during "
        "this work, and the telescope's points do not stop it. Have an engineer add its point, for this subsystem, to "
        "the register before work; if the work is already underway, find and lock its supply before going on."
    ]
    assert "issue" in moves_held(order)
