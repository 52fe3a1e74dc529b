"""The recoat planner's dates (a site engineer's review of the demo): a search begun before the site's today offered
windows in the past, and "Plan the recoat in the chosen window" stored one (even before the mirror's current
coating), which then held up planning the real recoat. The start is now the site's today or later, refused beside
its field on the search (GET) and on the plan (POST, crafted or sent from an earlier day's page) with nothing
stored. And a horizon shorter than the phases is refused beside the Horizon field, saying how the days are made:
crew work on the crew's working days, carrying and coating on calendar days.

These tests follow the real clock (the site's today, ``planning.services.site_today``), under a flat invented sky
cached around it. Phase days are laid by hand in the comments, weekdays by Python's ``datetime``."""
from __future__ import annotations

import datetime as dt
import html
import re

import pytest
from crew_calendar import mirror_under_a_flat_sky

from observatory_ops.calc.windows import RECOAT_PHASES
from observatory_ops.mirrors.forms import WindowForm
from observatory_ops.mirrors.models import RecoatPlan
from observatory_ops.planning.services import site_today
from observatory_ops.workorders.models import WorkOrder, WorkOrderItem

PHASES = {f"phase_{i}": str(p.days) for i, p in enumerate(RECOAT_PHASES)}  # 2, 1, 3, 1, 2, 3 days
MON_FRI = frozenset(range(1, 6))  # a site's crew days unless set otherwise (the fixture's site keeps them)

#: By hand, the default phases with a Monday-to-Friday crew begun on a Monday: removal Mon-Tue, transport Wed, strip
#: and coat Thu-Sat, return Sun, reinstall Mon-Tue, realignment Wed-Fri: 12 days, the fewest from any weekday (begun
#: on another weekday a crew phase meets the weekend). Of them 2 + 2 + 3 = 7 are crew work, 1 + 3 + 1 = 5 calendar
#: days away from the telescope.
HORIZON_TOO_SHORT = ("Horizon: the phases take at least 12 days (7 on the crew's working days, 5 calendar days): give "
                     "at least 12 days.")


def _start_refused(today: dt.date) -> str:
    return f"Start: choose today ({today:%d %b %Y}) or later; a recoat is not planned in the past."


@pytest.fixture
def today(site) -> dt.date:
    return site_today(site)


@pytest.fixture
def mirror(telescope, today):
    """A 500 mm primary coated on 1 Aug 2025, under a sky of 4 moonless dark hours a night from a month before the
    site's today to three months after it."""
    return mirror_under_a_flat_sky(telescope, today - dt.timedelta(days=30), 120)


def _planner(client, mirror, **params):
    return client.get(f"/mirrors/{mirror.pk}/recoat/", {**PHASES, **params})


def _plan(client, mirror, **params):
    return client.post(f"/mirrors/{mirror.pk}/recoat/plan/", {**PHASES, **params}, follow=True)


def _messages(response) -> list[str]:
    return [str(m) for m in response.context["messages"]]


def _field_error(page: str, field: str) -> str:
    """The words shown under ``field`` (Django's error list, which the field's aria-describedby names)."""
    found = re.search(rf'<ul class="errorlist" id="id_{field}_error">(.*?)</ul>', page, flags=re.S)
    return html.unescape(re.sub(r"<[^>]+>", "", found.group(1))) if found else ""


def _nothing_stored() -> bool:
    return not (RecoatPlan.objects.exists() or WorkOrder.objects.exists() or WorkOrderItem.objects.exists())


# --- the start: the site's today or later ---------------------------------------------------------------------------


@pytest.mark.parametrize("before", [1, 2, 365])
def test_a_search_begun_before_today_is_refused_beside_the_start_and_offers_no_window(
    mirror, users, client, today, before
):
    client.force_login(users["engineer"])
    response = _planner(client, mirror, start=(today - dt.timedelta(days=before)).isoformat(), horizon_days="48")
    page = response.content.decode()
    assert response.context["form"].errors == {"start": [_start_refused(today)]}
    assert _field_error(page, "start") == _start_refused(today)
    assert 'aria-describedby="id_start_error"' in page and 'aria-invalid="true"' in page
    assert "Cheapest windows" not in page and 'name="window"' not in page and "create-recoat-plan" not in page
    assert _nothing_stored()


def test_the_reviewers_search_from_before_the_coating_is_refused(mirror, users, client, today):
    """The demo's case: a start of 10 Jan 2025, before the mirror's coating of 1 Aug 2025, offered a recoat from
    03 Feb 2025."""
    client.force_login(users["engineer"])
    response = _planner(client, mirror, start="2025-01-10", horizon_days="48")
    assert response.context["form"].errors == {"start": [_start_refused(today)]}
    assert "windows" not in response.context


def test_a_search_begun_today_offers_only_windows_from_today_on(mirror, users, client, today):
    client.force_login(users["engineer"])
    response = _planner(client, mirror, start=today.isoformat(), horizon_days="40")
    assert response.context["form"].errors == {}
    found = response.context["windows"]
    assert found and all(w["start"] >= today for w in found)
    assert response.context["calendar"][0]["night"] == today


@pytest.mark.parametrize(("start", "window"), [("past", "past"), ("2025-01-10", "2025-02-03")])
def test_a_crafted_plan_from_before_today_is_refused_and_stores_nothing(mirror, users, client, today, start, window):
    client.force_login(users["engineer"])
    yesterday = (today - dt.timedelta(days=1)).isoformat()
    sent = {"start": yesterday if start == "past" else start, "window": yesterday if window == "past" else window}
    response = _plan(client, mirror, horizon_days="48", **sent)
    assert response.redirect_chain == [(f"/mirrors/{mirror.pk}/recoat/", 302)]
    assert _messages(response) == [f"No plan made: {_start_refused(today)} Find the windows again."]
    assert _nothing_stored()


def test_a_plan_from_today_with_a_window_before_today_is_refused_and_stores_nothing(mirror, users, client, today):
    """A start of today finds no window before it, so a window posted from before it is none of those listed."""
    client.force_login(users["engineer"])
    response = _plan(client, mirror, start=today.isoformat(), horizon_days="48",
                     window=(today - dt.timedelta(days=1)).isoformat())
    assert _messages(response) == ["Choose one of the windows listed."]
    assert _nothing_stored()


def test_a_plan_in_a_window_found_from_today_is_made_from_today_on(mirror, users, client, today):
    client.force_login(users["engineer"])
    search = {"start": today.isoformat(), "horizon_days": "40"}
    cheapest = _planner(client, mirror, **search).context["windows"][0]
    response = _plan(client, mirror, **search, window=cheapest["start"].isoformat())
    plan = RecoatPlan.objects.get()
    assert plan.starts_on == cheapest["start"] >= today
    assert all(o.planned_date >= today for o in plan.work_orders.all())
    assert _messages(response)[0].startswith(f"Recoat planned {plan.starts_on:%d %b %Y} to ")


# --- the horizon: at least the days the phases take -----------------------------------------------------------------


def test_a_horizon_shorter_than_the_phases_is_refused_beside_its_field_saying_how_the_days_are_made(
    mirror, users, client, today
):
    client.force_login(users["engineer"])
    response = _planner(client, mirror, start=today.isoformat(), horizon_days="8")
    page = response.content.decode()
    form = response.context["form"]
    assert form.errors == {"horizon_days": [HORIZON_TOO_SHORT]} and form.non_field_errors() == []
    assert _field_error(page, "horizon_days") == HORIZON_TOO_SHORT
    summary = re.search(r'<div id="error-summary"(.*?)</div></div>', page, flags=re.S).group(1)
    assert html.unescape(re.sub(r"<[^>]+>|^[^>]*>", "", summary)) == HORIZON_TOO_SHORT  # it names its field alone
    assert "Cheapest windows" not in page and 'name="window"' not in page


def test_a_plan_posted_with_a_horizon_shorter_than_the_phases_is_refused_and_stores_nothing(
    mirror, users, client, today
):
    client.force_login(users["engineer"])
    response = _plan(client, mirror, start=today.isoformat(), horizon_days="8", window=today.isoformat())
    assert _messages(response) == [f"No plan made: {HORIZON_TOO_SHORT} Find the windows again."]
    assert _nothing_stored()


def _form(today: dt.date, horizon: int, crew_days=MON_FRI, **phases) -> WindowForm:
    data = {"start": today.isoformat(), "horizon_days": str(horizon), **PHASES, **phases}
    return WindowForm(data, today=today, crew_days=crew_days)


def test_a_horizon_as_long_as_the_phases_take_is_accepted():
    today = dt.date(2026, 12, 14)
    assert _form(today, 12).is_valid()
    assert _form(today, 11).errors == {"horizon_days": [HORIZON_TOO_SHORT]}


def test_the_days_the_work_waits_for_the_crew_are_counted_and_said():
    # By hand, a five-day removal with a Monday-to-Friday crew: begun on a Monday, removal Mon-Fri (days 0-4),
    # transport Sat 5, strip and coat Sun-Tue 6-8, return Wed 9, reinstall Thu-Fri 10-11, then the weekend (12, 13)
    # before the realignment Mon-Wed 14-16: 17 days. Begun on a Wednesday also 17 (the removal pauses over the
    # weekend instead); on a Tuesday 18, on a Thursday or Friday 19. 5 + 2 + 3 = 10 crew days, 5 calendar days, and
    # 17 - 15 = 2 waiting.
    today = dt.date(2026, 12, 14)
    assert _form(today, 16, phase_0="5").errors == {"horizon_days": [
        "Horizon: the phases take at least 17 days (10 on the crew's working days, 5 calendar days, and 2 waiting "
        "over days the crew does not work): give at least 17 days."
    ]}
    assert _form(today, 17, phase_0="5").is_valid()


def test_a_crew_working_every_day_never_waits_and_one_calendar_day_is_said_as_one():
    # By hand: the plant next door (no transport, no return) and a one-day coating: 7 crew days and 1 calendar day,
    # 8 days end to end from any day; with a three-day removal 8 crew days and 9 days.
    today = dt.date(2026, 12, 14)
    assert _form(today, 8, crew_days=frozenset(range(1, 8)), phase_1="0", phase_2="1", phase_3="0").is_valid()
    assert _form(today, 8, crew_days=frozenset(range(1, 8)), phase_0="3", phase_1="0", phase_2="1",
                 phase_3="0").errors == {"horizon_days": [
        "Horizon: the phases take at least 9 days (8 on the crew's working days, 1 calendar day): give at least 9 "
        "days."
    ]}
