"""The recoat planner's phase lengths: a phase with hands-on work (removal, strip and coat, reinstall, realignment:
``calc.windows.Phase.work``) takes at least 1 day, so no plan is made without one of them; carrying the mirror to
the plant and back (transport, return) may take 0 days. A 0 for a hands-on phase is refused beside its field, no
window is offered, and a plan posted with it makes no plan and no work orders. The mirror and its sky are invented.
"""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from crew_calendar import mirror_under_a_flat_sky

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors.forms import WindowForm
from observatory_ops.mirrors.models import RecoatPlan
from observatory_ops.workorders.models import WorkOrder

TODAY = dt.date(2026, 12, 14)  # the site's today on the planner: its search may start no earlier
MON_FRI = frozenset(range(1, 6))  # a site's crew days unless set otherwise
DEFAULTS = {"start": TODAY.isoformat(), "horizon_days": "21"} | {
    f"phase_{i}": str(p.days) for i, p in enumerate(RECOAT_PHASES)
}
HANDS_ON = [(i, p.name) for i, p in enumerate(RECOAT_PHASES) if p.work]
CARRYING = [(i, p.name) for i, p in enumerate(RECOAT_PHASES) if not p.work]


def test_the_phases_with_hands_on_work_are_the_four_at_the_telescope_and_the_plant():
    assert [name for _, name in HANDS_ON] == ["removal", "strip and coat", "reinstall", "realignment and measurement"]
    assert [name for _, name in CARRYING] == ["transport", "return"]


@pytest.mark.parametrize(("i", "name"), HANDS_ON)
def test_a_hands_on_phase_of_0_days_is_refused_beside_its_field(i: int, name: str):
    form = WindowForm({**DEFAULTS, f"phase_{i}": "0"}, today=TODAY, crew_days=MON_FRI)
    assert not form.is_valid()
    assert form.errors == {f"phase_{i}": [f"{name.capitalize()} is hands-on work and takes at least 1 day (only "
                                          "transport and return may take 0 days)."]}


@pytest.mark.parametrize(("i", "name"), HANDS_ON)
def test_a_hands_on_phase_of_1_day_is_accepted(i: int, name: str):
    form = WindowForm({**DEFAULTS, f"phase_{i}": "1"}, today=TODAY, crew_days=MON_FRI)
    assert form.is_valid(), form.errors
    assert form.phases()[i].days == 1


def test_transport_and_return_may_take_0_days():
    form = WindowForm({**DEFAULTS} | {f"phase_{i}": "0" for i, _ in CARRYING}, today=TODAY, crew_days=MON_FRI)
    assert form.is_valid(), form.errors
    assert [p.days for p in form.phases()] == [2, 0, 3, 0, 2, 3]


@pytest.fixture
def mirror(telescope, monkeypatch):
    monkeypatch.setattr("observatory_ops.mirrors.views.site_today", lambda site, now=None: TODAY)
    return mirror_under_a_flat_sky(telescope, dt.date(2026, 12, 1), 62)


def test_the_planner_shows_the_error_and_offers_no_plan(mirror, users, client):
    client.force_login(users["engineer"])
    page = client.get(f"/mirrors/{mirror.pk}/recoat/", {**DEFAULTS, "phase_4": "0"}).content.decode()
    errors = html.unescape(re.search(r'<div class="caution">(.*?)</div></div>', page, flags=re.S).group(1))
    assert ("reinstall (days): Reinstall is hands-on work and takes at least 1 day (only transport and return may "
            "take 0 days).") in errors
    assert "create-recoat-plan" not in page and 'name="window"' not in page
    # With the reinstall given its day the windows and the button are back.
    assert "create-recoat-plan" in client.get(f"/mirrors/{mirror.pk}/recoat/", DEFAULTS).content.decode()


def test_a_plan_posted_with_a_0_day_hands_on_phase_makes_nothing(mirror, users, client):
    client.force_login(users["engineer"])
    response = client.post(f"/mirrors/{mirror.pk}/recoat/plan/", {**DEFAULTS, "phase_2": "0", "window": "2026-12-14"},
                           follow=True)
    said = html.unescape(response.content.decode())
    assert ("No plan made: strip and coat (days): Strip and coat is hands-on work and takes at least 1 day (only "
            "transport and return may take 0 days). Find the windows again.") in said
    assert not RecoatPlan.objects.exists() and not WorkOrder.objects.exists()


def test_a_plan_with_0_day_transport_and_return_orders_every_hands_on_phase(mirror, users, client):
    """The plant next door: no day for carrying the mirror, and still one order for each hands-on phase."""
    client.force_login(users["engineer"])
    form = {**DEFAULTS, "phase_1": "0", "phase_3": "0"}
    page = client.get(f"/mirrors/{mirror.pk}/recoat/", form).content.decode()
    cheapest = re.search(r'name="window" value="([0-9-]+)"', page).group(1)
    client.post(f"/mirrors/{mirror.pk}/recoat/plan/", {**form, "window": cheapest})
    plan = RecoatPlan.objects.get()
    assert [o.title.split(": ")[-1] for o in plan.work_orders.order_by("planned_date", "pk")] == [
        "removal", "strip and coat", "reinstall", "realignment and measurement",
    ]
