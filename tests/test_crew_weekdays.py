"""The crew's working days in recoat planning: the phases our crew does at the telescope (removal, reinstall,
realignment) start on a working day and pause over days off, with the telescope down meanwhile.

References checked against:
- numpy's business-day calendar (``numpy.busday_offset``, ``numpy.is_busday``, ``numpy.busday_count``, with the
  crew's days as the weekmask), a general-purpose implementation independent of calc.windows, for where each
  phase falls from any start date;
- Python's ``datetime`` (``date.isoweekday``, ``strftime("%a")``) for the weekday numbers and names;
- a brute-force search (every start laid out with the numpy reference and summed on its own) for the windows;
- hand-worked calendars in the comments beside each case (April 2027: Monday 12 April, as any calendar shows).

The site and its nights are invented.
"""
from __future__ import annotations

import datetime as dt
import re

import numpy as np
import pytest
from crew_calendar import (
    CREW_WORK,
    MON_FRI,
    busday_reference,
    crews,
    dated,
    dates,
    mirror_under_a_flat_sky,
    phase_lists,
)
from django.core.exceptions import ValidationError
from hypothesis import given, settings
from hypothesis import strategies as st

from observatory_ops.calc.windows import (
    EVERY_DAY,
    RECOAT_PHASES,
    TELESCOPE_WORK,
    WEEKDAY_NAMES,
    Phase,
    Window,
    cheapest_crew_windows,
    crew_weekdays_from,
    phase_days,
    total_days,
    weekdays_text,
)

INF = np.inf


# --- where the phases fall ---------------------------------------------------------------------------------


@settings(max_examples=300, deadline=None)
@given(phases=phase_lists, crew=crews, start=dates)
def test_phases_fall_where_numpys_business_day_calendar_puts_them(phases, crew, start) -> None:
    # Source: numpy.busday_offset / is_busday / busday_count with the crew's days as the weekmask.
    assert dated(phases, start, crew) == busday_reference(phases, start, crew)
    mask = "".join("1" if day in crew else "0" for day in range(1, 8))
    for phase, (first, last) in zip(phases, dated(phases, start, crew), strict=True):
        if phase.days and phase.work in CREW_WORK:
            assert np.is_busday(first, weekmask=mask) and np.is_busday(last, weekmask=mask)
            assert np.busday_count(first, last + dt.timedelta(days=1), weekmask=mask) == phase.days


def test_the_weekday_names_are_pythons_and_a_run_of_days_reads_as_a_range() -> None:
    # Source: Python's datetime, strftime("%a") in the C locale, for the week of Monday 12 April 2027.
    assert WEEKDAY_NAMES == tuple(dt.date(2027, 4, 12 + i).strftime("%a") for i in range(7))
    assert [dt.date(2027, 4, 12 + i).isoweekday() for i in range(7)] == [1, 2, 3, 4, 5, 6, 7]
    assert weekdays_text(MON_FRI) == "Mon–Fri"
    assert weekdays_text(EVERY_DAY) == "Mon–Sun"
    assert weekdays_text({6, 1, 3, 5}) == "Mon, Wed, Fri, Sat"
    assert weekdays_text({2, 3, 4, 6, 7}) == "Tue–Thu, Sat, Sun"


def test_a_recoat_begun_on_a_thursday_waits_over_the_weekend_for_its_realignment() -> None:
    # By hand, crew Monday to Friday, the default phases from Thursday 15 April 2027: removal Thu 15-Fri 16,
    # transport Sat 17, strip and coat Sun 18-Tue 20, return Wed 21, reinstall Thu 22-Fri 23; the
    # realignment waits over Sat 24 and Sun 25 and takes Mon 26-Wed 28: 14 days down, not 12.
    day = dt.date
    assert dated(list(RECOAT_PHASES), day(2027, 4, 15), MON_FRI) == [
        (day(2027, 4, 15), day(2027, 4, 16)), (day(2027, 4, 17), day(2027, 4, 17)),
        (day(2027, 4, 18), day(2027, 4, 20)), (day(2027, 4, 21), day(2027, 4, 21)),
        (day(2027, 4, 22), day(2027, 4, 23)), (day(2027, 4, 26), day(2027, 4, 28)),
    ]


# --- the window search -----------------------------------------------------------------------------------------

costs = st.lists(st.one_of(st.integers(0, 20).map(float), st.just(INF)), min_size=1, max_size=45)


def plain_windows(cost, days, alternatives=3) -> list[Window]:
    """The plain search of ``days`` consecutive nights, as before crew days existed: ``cheapest_crew_windows`` for
    one job of ``days`` days with a crew working every day and no day off (its own tests, hand sums, a brute-force
    search and PyEphem's full moons, in tests/test_calc_windows.py)."""
    return cheapest_crew_windows(cost, [Phase("work at the telescope", days, TELESCOPE_WORK)], 1, EVERY_DAY,
                                 alternatives)


@settings(max_examples=300, deadline=None)
@given(cost=costs, phases=phase_lists, crew=crews, first=dates, alternatives=st.integers(0, 4))
def test_windows_agree_with_a_brute_force_search_and_never_start_a_crew_phase_on_a_day_off(
    cost, phases, crew, first, alternatives
) -> None:
    # Source: every start laid out on its own with the numpy business-day reference above and its nights summed in
    # Python (whole numbers, so the sums are exact). A start counts when the work begins on it (no waiting for
    # the crew first) and its downtime fits the horizon without a blocked night.
    free = {}
    for start in range(len(cost)):
        laid = [d for d, p in zip(busday_reference(phases, first + dt.timedelta(days=start), crew), phases,
                                  strict=True) if p.days]
        nights = (laid[-1][1] - laid[0][0]).days + 1
        if laid[0][0] == first + dt.timedelta(days=start) and start + nights <= len(cost):
            total = sum(cost[start : start + nights])
            if total != INF:
                free[start] = (nights, total)
    if not free:
        with pytest.raises(ValueError, match="longer than the horizon|contains a blocked night"):
            cheapest_crew_windows(cost, phases, first.isoweekday(), crew, alternatives)
        return
    found = cheapest_crew_windows(cost, phases, first.isoweekday(), crew, alternatives)
    assert found[0].cost == min(total for _, total in free.values())
    assert [w.cost for w in found] == sorted(w.cost for w in found)
    assert all(free[w.start_index] == (w.days, w.cost) for w in found)
    spans = [(w.start_index, w.start_index + w.days) for w in found]
    assert all(b_end <= a or a_end <= b for i, (a, a_end) in enumerate(spans) for b, b_end in spans[i + 1 :])
    mask = "".join("1" if day in crew else "0" for day in range(1, 8))
    for window in found:
        begins = first + dt.timedelta(days=window.start_index)
        for phase, (start, _) in zip(phases, dated(phases, begins, crew), strict=True):
            if phase.days and phase.work in CREW_WORK:
                assert np.is_busday(start, weekmask=mask), f"{phase.work} starts on a day off, {start:%a %d %b %Y}"


@settings(max_examples=300, deadline=None)
@given(cost=costs, phases=phase_lists, weekday=st.integers(1, 7), alternatives=st.integers(0, 4))
def test_a_crew_working_every_day_gives_the_plain_search_of_the_phases_total_days(
    cost, phases, weekday, alternatives
) -> None:
    # Source: the plain search of the phases' total days in a row, as before crew days existed (plain_windows
    # above, itself checked by hand sums, a brute-force search and PyEphem in tests/test_calc_windows.py).
    days = total_days(phases)
    try:
        plain = plain_windows(cost, days, alternatives)
    except ValueError:
        with pytest.raises(ValueError):
            cheapest_crew_windows(cost, phases, weekday, EVERY_DAY, alternatives)
        return
    assert cheapest_crew_windows(cost, phases, weekday, EVERY_DAY, alternatives) == plain


@settings(deadline=None)
@given(cost=costs, weekday=st.integers(1, 7))
def test_phases_without_crew_work_ignore_the_crew_days(cost, weekday) -> None:
    phases = [Phase("transport", 1), Phase("strip and coat", 3, "coating"), Phase("return", 1)]
    try:
        plain = plain_windows(cost, 5)
    except ValueError:
        with pytest.raises(ValueError):
            cheapest_crew_windows(cost, phases, weekday, {3})
        return
    assert cheapest_crew_windows(cost, phases, weekday, {3}) == plain


def test_a_weekend_inside_the_removal_lengthens_the_downtime_and_adds_its_nights() -> None:
    # By hand: a two-day removal, crew Monday to Friday, nights Fri 9 to Mon 12 April 2027 costing 1, 2, 3, 4.
    # Begun on Friday it takes Friday and Monday, so the telescope is down four nights: 1 + 2 + 3 + 4 = 10
    # (the plain two-night search would give Fri-Sat, 3). Saturday and Sunday cannot begin it (the crew is
    # off), and Monday's removal would run into Tuesday, beyond the horizon.
    removal = [Phase("removal", 2, "removal")]
    assert cheapest_crew_windows([1.0, 2.0, 3.0, 4.0], removal, dt.date(2027, 4, 9).isoweekday(), MON_FRI) == [
        Window(0, 4, 10.0)
    ]
    assert plain_windows([1.0, 2.0, 3.0, 4.0], 2, alternatives=0) == [Window(0, 2, 3.0)]


def test_the_whole_recoat_over_a_weekend_costs_the_two_extra_nights() -> None:
    # By hand: fourteen nights from Thursday 15 April 2027 at 1 h each. Begun on Thursday the recoat holds all
    # fourteen (the realignment waits over the weekend: see above), so it costs 14 h, not 12; Friday's would
    # need fifteen nights and the first Monday's (19 April) twelve from night 4, both beyond the horizon.
    assert cheapest_crew_windows(np.ones(14), RECOAT_PHASES, dt.date(2027, 4, 15).isoweekday(), MON_FRI) == [
        Window(0, 14, 14.0)
    ]


def test_the_cheapest_default_recoat_for_a_weekday_crew_begins_on_a_monday_when_every_night_costs_the_same() -> None:
    # By hand: from Monday the default phases fit Mon-Fri of two weeks (12 nights); any other start waits or
    # pauses over a weekend and loses more nights, so with equal costs the first Monday wins.
    found = cheapest_crew_windows(np.ones(40), RECOAT_PHASES, dt.date(2027, 4, 8).isoweekday(), MON_FRI)
    assert found[0] == Window(4, 12, 12.0)  # Monday 12 April 2027
    assert all((dt.date(2027, 4, 8) + dt.timedelta(days=w.start_index)).isoweekday() == 1 for w in found)


# --- bad settings ------------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("digits", "message"),
    [
        ("", "crew weekdays must give at least one working day"),
        ("1238", "crew weekdays may hold only the digits 1 (Monday) to 7 (Sunday), not '8'"),
        ("0", "crew weekdays may hold only the digits 1 (Monday) to 7 (Sunday), not '0'"),
        ("1 2", "crew weekdays may hold only the digits 1 (Monday) to 7 (Sunday), not ' '"),
        ("12a", "not 'a'"),
        ("1125", "crew weekdays give Mon more than once"),
    ],
)
def test_bad_crew_weekdays_are_refused_naming_the_setting(digits: str, message: str) -> None:
    with pytest.raises(ValueError, match=re.escape(message)):
        crew_weekdays_from(digits)


def test_good_crew_weekdays_read_in_any_order() -> None:
    assert crew_weekdays_from("12345") == MON_FRI
    assert crew_weekdays_from("7136") == {1, 3, 6, 7}


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: phase_days(RECOAT_PHASES, 1, set()), "crew weekdays must be one or more ISO weekdays"),
        (lambda: phase_days(RECOAT_PHASES, 1, {0, 1}), "crew weekdays must be one or more ISO weekdays"),
        (lambda: phase_days(RECOAT_PHASES, 8, MON_FRI), "first weekday must be an ISO weekday"),
        (lambda: phase_days(RECOAT_PHASES, 0, MON_FRI), "first weekday must be at least 1"),
        (lambda: cheapest_crew_windows([1.0] * 11, RECOAT_PHASES, 1, MON_FRI),
         "the phases take at least 12 days (7 on the crew's working days, 5 calendar days), longer than the horizon of "
         "11 days"),
        (lambda: cheapest_crew_windows([1.0] * 20, RECOAT_PHASES, 1, MON_FRI, alternatives=-1),
         "number of alternatives must be at least 0"),
        (lambda: cheapest_crew_windows([1.0, INF] * 10, RECOAT_PHASES, 1, MON_FRI), "contains a blocked night"),
    ],
)
def test_bad_arguments_of_the_crew_search_are_refused(call, message: str) -> None:
    with pytest.raises(ValueError, match=re.escape(message)):
        call()


# --- the site setting ------------------------------------------------------------------------------------------


def test_a_new_site_has_a_monday_to_friday_crew(site) -> None:
    assert site.crew_weekdays == "12345" and site.crew_days == MON_FRI and site.crew_days_text == "Mon–Fri"


@pytest.mark.parametrize(
    ("digits", "message"),
    [
        ("", "Crew weekdays must give at least one working day."),
        ("1238", "Crew weekdays may hold only the digits 1 (Monday) to 7 (Sunday), not '8'."),
        ("0", "Crew weekdays may hold only the digits 1 (Monday) to 7 (Sunday), not '0'."),
        ("12235", "Crew weekdays give Tue more than once: give each working day once."),
    ],
)
def test_a_site_with_bad_crew_weekdays_is_refused_naming_the_field(site, digits: str, message: str) -> None:
    site.crew_weekdays = digits
    with pytest.raises(ValidationError) as refused:
        site.full_clean()
    assert refused.value.message_dict == {"crew_weekdays": [message]}


def _admin_post(client, site, **changes):
    data = {"name": site.name, "slug": site.slug, "latitude_deg": "40", "longitude_deg": "-3", "elevation_m": "800",
            "time_zone": site.time_zone, "dust_climate": "", "look_ahead_days": "30",
            "crew_days_off-TOTAL_FORMS": "0", "crew_days_off-INITIAL_FORMS": "0", **changes}  # days-off inline, empty
    return client.post(f"/admin/registry/site/{site.pk}/change/", {k: v for k, v in data.items() if v is not None})


def test_the_admin_edits_the_crew_days_as_tick_boxes(engineer_in_admin, site) -> None:
    page = engineer_in_admin.get(f"/admin/registry/site/{site.pk}/change/").content.decode()
    for number, name in enumerate(WEEKDAY_NAMES, start=1):
        ticked = " checked" if number <= 5 else ""
        assert re.search(rf'<input type="checkbox" name="crew_weekdays" value="{number}"[^>]*{ticked}', page), name
    assert _admin_post(engineer_in_admin, site, crew_weekdays=["6", "2", "3", "4", "5"]).status_code == 302
    site.refresh_from_db()
    assert site.crew_weekdays == "23456" and site.crew_days_text == "Tue–Sat"


@pytest.mark.parametrize(
    ("ticked", "message"),
    [
        (None, "Crew weekdays: tick at least one day the crew works."),
        (["1", "8"], "Crew weekdays: 8 is not a weekday (1 Monday to 7 Sunday)."),
        (["1", "1"], "Crew weekdays give Mon more than once: give each working day once."),
    ],
)
def test_the_admin_refuses_bad_crew_days_and_keeps_the_stored_ones(engineer_in_admin, site, ticked, message) -> None:
    response = _admin_post(engineer_in_admin, site, name="Renamed", crew_weekdays=ticked)
    assert response.status_code == 200 and message in response.content.decode()
    site.refresh_from_db()
    assert (site.name, site.crew_weekdays) == ("Test Hill", "12345")


# --- the planner and the plan ------------------------------------------------------------------------------------


@pytest.fixture
def mirror(telescope, monkeypatch):
    """A 500 mm primary, and a sky of 4 moonless dark hours every night (every night costs the same). The planner's
    "today" (its search starts no earlier) is Wednesday 29 July 2026."""
    monkeypatch.setattr("observatory_ops.mirrors.views.site_today", lambda site, now=None: dt.date(2026, 7, 29))
    return mirror_under_a_flat_sky(telescope, dt.date(2026, 7, 1), 120)


def _text(html: str) -> str:
    return " ".join(re.sub(r"<[^>]+>", " ", html).split())


def test_the_planner_shows_the_phase_dates_with_weekdays_and_the_crew_days_used(mirror, users, client) -> None:
    # By hand: from Wednesday 29 July 2026 every night costs the same, so the cheapest recoat is the shortest,
    # begun on the first Monday (3 August): removal Mon 3-Tue 4, transport Wed 5, strip and coat Thu 6-Sat 8,
    # return Sun 9, reinstall Mon 10-Tue 11, realignment Wed 12-Fri 14.
    client.force_login(users["viewer"])
    page = client.get(f"/mirrors/{mirror.pk}/recoat/", {"start": "2026-07-29", "horizon_days": "60"}).content.decode()
    text = _text(page)
    assert "The crew works Mon–Fri (site setting)" in text
    assert "Cheapest windows for 12 days of work" in text
    # The days-off column lists the listed days; the weekly ones are said above it (a recoat review looked for them).
    assert ("the days it does not work each week (it works Mon–Fri, a site setting) and the listed days off, which the "
            "last column names") in text
    assert "Mon 03 Aug 2026 Fri 14 Aug 2026 12" in text  # from, to, nights lost
    for row in ("removal Mon 03 Aug 2026 Tue 04 Aug 2026 2 at the telescope",
                "strip and coat Thu 06 Aug 2026 Sat 08 Aug 2026 3 away",
                "reinstall Mon 10 Aug 2026 Tue 11 Aug 2026 2 at the telescope",
                "realignment and measurement Wed 12 Aug 2026 Fri 14 Aug 2026 3 at the telescope"):
        assert row in text
    assert len(re.findall(r'class="night chosen', page)) == 12


def test_a_window_over_a_weekend_is_listed_with_its_extra_nights(mirror, users, client) -> None:
    # By hand: the shortest recoat the planner takes (a two-day removal, the plant next door so no transport or
    # return, and one day for each other hands-on phase: 5 days of work) over the seven nights from Friday
    # 31 July 2026. Begun on Friday: removal Fri 31 and (after the weekend) Mon 3 August, strip and coat Tue 4,
    # reinstall Wed 5, realignment Thu 6: seven nights down for five days of work. Saturday and Sunday cannot begin
    # it, and from Monday it would end on Friday 7, beyond the horizon.
    client.force_login(users["viewer"])
    phases = {"phase_0": "2", "phase_1": "0", "phase_2": "1", "phase_3": "0", "phase_4": "1", "phase_5": "1"}
    assert len(phases) == len(RECOAT_PHASES)
    page = client.get(f"/mirrors/{mirror.pk}/recoat/",
                      {"start": "2026-07-31", "horizon_days": "7", **phases}).content.decode()
    text = _text(page)
    assert "Cheapest windows for 5 days of work" in text
    assert "Fri 31 Jul 2026 Thu 06 Aug 2026 7" in text  # from, to, nights lost
    for row in ("removal Fri 31 Jul 2026 Mon 03 Aug 2026 2 at the telescope",
                "strip and coat Tue 04 Aug 2026 Tue 04 Aug 2026 1 away",
                "reinstall Wed 05 Aug 2026 Wed 05 Aug 2026 1 at the telescope",
                "realignment and measurement Thu 06 Aug 2026 Thu 06 Aug 2026 1 at the telescope"):
        assert row in text


def test_the_orders_of_a_plan_made_on_the_planner_fall_on_the_crews_working_days(mirror, users, client) -> None:
    from observatory_ops.mirrors.models import RecoatPlan

    client.force_login(users["engineer"])
    form = {"start": "2026-07-29", "horizon_days": "60", "window": "2026-08-03"}
    assert client.post(f"/mirrors/{mirror.pk}/recoat/plan/", form).status_code == 302
    plan = RecoatPlan.objects.get(mirror=mirror)
    assert (plan.starts_on, plan.ends_on) == (dt.date(2026, 8, 3), dt.date(2026, 8, 14))
    planned = {o.title.split(": ")[-1]: o.planned_date for o in plan.work_orders.all()}
    assert planned == {"removal": dt.date(2026, 8, 3), "strip and coat": dt.date(2026, 8, 6),
                       "reinstall": dt.date(2026, 8, 10), "realignment and measurement": dt.date(2026, 8, 12)}


def test_a_plan_begun_on_a_thursday_puts_the_realignment_after_the_weekend(mirror, users) -> None:
    from observatory_ops.mirrors import services

    plan = services.recoat_plan_create(mirror, dt.date(2026, 8, 6), list(RECOAT_PHASES), 14.0, users["engineer"])
    assert (plan.starts_on, plan.ends_on) == (dt.date(2026, 8, 6), dt.date(2026, 8, 19))
    realignment = plan.work_orders.get(title__endswith="realignment and measurement")
    assert realignment.planned_date == dt.date(2026, 8, 17)  # Monday: Sat 15 and Sun 16 are days off
    assert "recoat window 06 Aug 2026 to 19 Aug 2026" in realignment.items.get().why


def test_a_plan_asked_for_on_a_saturday_begins_with_the_crew_on_monday(mirror, users) -> None:
    from observatory_ops.mirrors import services

    plan = services.recoat_plan_create(mirror, dt.date(2026, 8, 1), list(RECOAT_PHASES), 12.0, users["engineer"])
    assert (plan.starts_on, plan.ends_on) == (dt.date(2026, 8, 3), dt.date(2026, 8, 14))
    crew_orders = [o for o in plan.work_orders.all() if not o.title.endswith("strip and coat")]
    assert all(o.planned_date.isoweekday() <= 5 for o in crew_orders)


def test_a_site_whose_crew_works_every_day_plans_as_before(mirror, users) -> None:
    from observatory_ops.mirrors import services

    site = mirror.subsystem.telescope.site
    site.crew_weekdays = "1234567"
    site.save()
    plan = services.recoat_plan_create(mirror, dt.date(2026, 8, 1), list(RECOAT_PHASES), 12.0, users["engineer"])
    assert (plan.starts_on, plan.ends_on) == (dt.date(2026, 8, 1), dt.date(2026, 8, 12))
    assert plan.work_orders.get(title__endswith="removal").planned_date == dt.date(2026, 8, 1)  # a Saturday


def test_the_calendar_shows_each_order_over_its_phases_working_days_weekend_included(mirror, users, client) -> None:
    """RFC 5545 3.6.1: an all-day event ends (DTEND) the day after its last day. A phase that pauses over the
    crew's days off lasts, on the calendar, from its first day to its last, as the plan laid it out."""
    from icalendar import Calendar

    from observatory_ops.mirrors import services

    plan = services.recoat_plan_create(mirror, dt.date(2026, 8, 6), list(RECOAT_PHASES), 14.0, users["engineer"])
    laid = {p["name"]: (dt.date.fromisoformat(p["first"]), dt.date.fromisoformat(p["last"])) for p in plan.phases}
    assert laid["realignment and measurement"] == (dt.date(2026, 8, 17), dt.date(2026, 8, 19))
    client.force_login(users["viewer"])
    events = Calendar.from_ical(client.get(f"/sites/{mirror.subsystem.telescope.site.slug}/downtime.ics").content)
    spans = {str(e["summary"]): (e.decoded("dtstart"), e.decoded("dtend")) for e in events.walk("VEVENT")}
    orders = list(plan.work_orders.all())
    assert len(orders) == 4
    for order in orders:
        first, last = laid[order.title.split(": ", 1)[1]]
        (span,) = [s for summary, s in spans.items() if summary.endswith(order.title)]
        assert span == (first, last + dt.timedelta(days=1)), order.title
    window = next(e for e in events.walk("VEVENT") if str(e["summary"]).startswith("Recoat window"))
    assert "realignment and measurement 3 d (Mon 17 Aug to Wed 19 Aug 2026)" in str(window["description"])
