"""Crew days off in recoat planning: besides its weekly days off, a site lists whole days its crew is off (public
holidays, site closures). A phase our crew does at the telescope (removal, reinstall, realignment) neither starts
nor works on one: it pauses over it with the telescope down, so its night is lost and counts in the window's cost.

References checked against:
- numpy's business-day calendar (``numpy.busday_offset``, ``numpy.is_busday``, ``numpy.busday_count``, with the
  crew's days as the weekmask and the days off as ``holidays=``), a general-purpose implementation independent of
  calc.windows, for where each phase falls from any start date;
- a brute-force search (every start laid out with that numpy reference and its nights summed on their own) for
  the windows;
- hand-worked calendars in the comments beside each case (as any calendar shows, Friday 25 December 2026,
  Friday 1 January 2027, Monday 12 and Wednesday 14 April 2027).

The site, its days off and its nights are invented.
"""
from __future__ import annotations

import datetime as dt
import html
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
    weekmask,
)
from django.core.exceptions import ValidationError
from hypothesis import given, settings
from hypothesis import strategies as st

from observatory_ops.calc.windows import (
    RECOAT_PHASES,
    Phase,
    Window,
    cheapest_crew_windows,
    phase_days,
)

INF = np.inf
CHRISTMAS, NEW_YEAR = dt.date(2026, 12, 25), dt.date(2027, 1, 1)

#: Days off as day numbers from the start: a few scattered, or a run of them (a closure), within two months.
offsets = st.one_of(
    st.sets(st.integers(0, 60), max_size=12),
    st.builds(lambda first, length: set(range(first, first + length)), st.integers(0, 40), st.integers(1, 20)),
)


# --- where the phases fall ---------------------------------------------------------------------------------


@settings(max_examples=300, deadline=None)
@given(phases=phase_lists, crew=crews, start=dates, off=offsets)
def test_phases_fall_where_numpys_business_day_calendar_with_holidays_puts_them(phases, crew, start, off) -> None:
    # Source: numpy.busday_offset / is_busday / busday_count, the crew's days as weekmask, the days off as holidays.
    days_off = sorted(start + dt.timedelta(days=d) for d in off)
    laid = dated(phases, start, crew, days_off)
    assert laid == busday_reference(phases, start, crew, days_off)
    for phase, (first, last) in zip(phases, laid, strict=True):
        if phase.days and phase.work in CREW_WORK:
            assert np.is_busday(first, weekmask=weekmask(crew), holidays=days_off), f"begins on a day off, {first}"
            assert np.busday_count(first, last + dt.timedelta(days=1), weekmask=weekmask(crew),
                                   holidays=days_off) == phase.days


def test_a_holiday_inside_the_realignment_pauses_it_over_the_long_weekend() -> None:
    # By hand, crew Monday to Friday, the default phases from Wednesday 16 December 2026 with Friday 25 December
    # off: removal Wed 16-Thu 17, transport Fri 18, strip and coat Sat 19-Mon 21, return Tue 22, reinstall
    # Wed 23-Thu 24; the realignment cannot work on Fri 25 nor the weekend and takes Mon 28-Wed 30.
    day = dt.date
    assert dated(list(RECOAT_PHASES), day(2026, 12, 16), MON_FRI, [CHRISTMAS]) == [
        (day(2026, 12, 16), day(2026, 12, 17)), (day(2026, 12, 18), day(2026, 12, 18)),
        (day(2026, 12, 19), day(2026, 12, 21)), (day(2026, 12, 22), day(2026, 12, 22)),
        (day(2026, 12, 23), day(2026, 12, 24)), (day(2026, 12, 28), day(2026, 12, 30)),
    ]


def test_a_phase_asked_to_begin_in_a_closure_waits_for_its_end() -> None:
    # By hand: a two-day removal asked for on Monday 12 April 2027, the site closed Mon 12 to Fri 23 April and the
    # crew off at the weekends: it begins on Monday 26 April, day 14, and ends on Tuesday 27, day 15.
    closure = list(range(0, 12))
    (laid,) = phase_days([Phase("removal", 2, "removal")], dt.date(2027, 4, 12).isoweekday(), MON_FRI,
                         days_off=closure)
    assert (laid.first, laid.last) == (14, 15)


# --- the window search -----------------------------------------------------------------------------------------

costs = st.lists(st.one_of(st.integers(0, 20).map(float), st.just(INF)), min_size=1, max_size=45)


@settings(max_examples=300, deadline=None)
@given(cost=costs, phases=phase_lists, crew=crews, first=dates, off=offsets, alternatives=st.integers(0, 4))
def test_windows_with_days_off_agree_with_a_brute_force_search(cost, phases, crew, first, off, alternatives) -> None:
    # Source: every start laid out on its own with the numpy reference above (days off as holidays) and its nights
    # summed in Python (whole numbers, so the sums are exact). A start counts when the work begins on it (no
    # waiting for the crew first) and its downtime fits the horizon without a blocked night.
    days_off = sorted(first + dt.timedelta(days=d) for d in off)
    free = {}
    for start in range(len(cost)):
        begins = first + dt.timedelta(days=start)
        laid = [d for d, p in zip(busday_reference(phases, begins, crew, days_off), phases, strict=True) if p.days]
        nights = (laid[-1][1] - laid[0][0]).days + 1
        if laid[0][0] == begins and start + nights <= len(cost):
            total = sum(cost[start : start + nights])
            if total != INF:
                free[start] = (nights, total)
    if not free:
        with pytest.raises(ValueError, match="longer than the horizon|contains a blocked night"):
            cheapest_crew_windows(cost, phases, first.isoweekday(), crew, alternatives, days_off=sorted(off))
        return
    found = cheapest_crew_windows(cost, phases, first.isoweekday(), crew, alternatives, days_off=sorted(off))
    assert found[0].cost == min(total for _, total in free.values())
    assert [w.cost for w in found] == sorted(w.cost for w in found)
    assert all(free[w.start_index] == (w.days, w.cost) for w in found)
    spans = [(w.start_index, w.start_index + w.days) for w in found]
    assert all(b_end <= a or a_end <= b for i, (a, a_end) in enumerate(spans) for b, b_end in spans[i + 1 :])


@settings(max_examples=300, deadline=None)
@given(cost=costs, phases=phase_lists, crew=crews, first=dates, off=offsets)
def test_no_window_starts_or_works_a_crew_phase_on_a_day_off(cost, phases, crew, first, off) -> None:
    # Source: numpy.is_busday and busday_count with the days off as holidays, for every window offered.
    days_off = sorted(first + dt.timedelta(days=d) for d in off)
    try:
        found = cheapest_crew_windows(cost, phases, first.isoweekday(), crew, days_off=sorted(off))
    except ValueError:
        return
    for window in found:
        begins = first + dt.timedelta(days=window.start_index)
        for phase, (start, last) in zip(phases, dated(phases, begins, crew, days_off), strict=True):
            if phase.days and phase.work in CREW_WORK:
                assert np.is_busday(start, weekmask=weekmask(crew), holidays=days_off), f"{phase.work} on {start}"
                assert np.busday_count(start, last + dt.timedelta(days=1), weekmask=weekmask(crew),
                                       holidays=days_off) == phase.days


def test_a_holiday_inside_the_removal_lengthens_the_downtime_and_adds_its_night() -> None:
    # By hand: a two-day removal, crew Monday to Friday, nights Tue 13, Wed 14 and Thu 15 April 2027 costing 1, 10
    # and 100, the site closed on Wednesday 14. Begun on Tuesday the removal takes Tuesday and Thursday, so the
    # telescope is down three nights, Wednesday's included: 1 + 10 + 100 = 111. Without the day off it takes
    # Tuesday and Wednesday: 11. Wednesday cannot begin it, and Thursday's would end on Friday, beyond the horizon.
    removal, tuesday = [Phase("removal", 2, "removal")], dt.date(2027, 4, 13).isoweekday()
    assert cheapest_crew_windows([1.0, 10.0, 100.0], removal, tuesday, MON_FRI, 0, days_off=[1]) == [
        Window(0, 3, 111.0)
    ]
    assert cheapest_crew_windows([1.0, 10.0, 100.0], removal, tuesday, MON_FRI, 0) == [Window(0, 2, 11.0)]


@settings(max_examples=200, deadline=None)
@given(cost=costs, phases=phase_lists, crew=crews, weekday=st.integers(1, 7), alternatives=st.integers(0, 4),
       weeks=st.integers(0, 8))
def test_days_off_the_crew_has_anyway_change_nothing(cost, phases, crew, weekday, alternatives, weeks) -> None:
    # With no day off the search is the weekday search (tests/test_crew_weekdays.py, unchanged, checks it against
    # numpy without holidays); listing only days that fall on the crew's weekly days off must give that again.
    anyway = [d for d in range(7 * weeks) if (weekday - 1 + d) % 7 + 1 not in crew]
    try:
        plain = cheapest_crew_windows(cost, phases, weekday, crew, alternatives)
    except ValueError as refused:
        with pytest.raises(ValueError, match=re.escape(str(refused))):
            cheapest_crew_windows(cost, phases, weekday, crew, alternatives, days_off=anyway)
        return
    assert cheapest_crew_windows(cost, phases, weekday, crew, alternatives, days_off=anyway) == plain
    assert cheapest_crew_windows(cost, phases, weekday, crew, alternatives, days_off=()) == plain


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: phase_days(RECOAT_PHASES, 1, MON_FRI, days_off=[3, -1]),
         "a day off (counted from day 0) must be at least 0, not -1"),
        (lambda: phase_days(RECOAT_PHASES, 1, MON_FRI, days_off=[2.5]),
         "a day off (counted from day 0) must be a whole number, not 2.5"),
        (lambda: cheapest_crew_windows([1.0] * 30, RECOAT_PHASES, 1, MON_FRI, days_off=[CHRISTMAS]),
         "a day off (counted from day 0) must be a whole number, not datetime.date(2026, 12, 25)"),
        (lambda: cheapest_crew_windows([], RECOAT_PHASES, 1, MON_FRI), "the horizon holds no nights"),
        # By hand: from a Monday with days 0 (Monday) to 17 (Thursday) off, a recoat asked for on any of them begins
        # on Friday 18 and ends on Friday 32 (15 days); one asked for on Saturday 19 begins on Monday 21 and takes
        # the shortest, 12 days, to Friday 32. No start in a horizon of 20 days ends within it.
        (lambda: cheapest_crew_windows([1.0] * 20, RECOAT_PHASES, 1, MON_FRI, days_off=range(0, 18)),
         "the phases take at least 12 days (7 on the crew's working days, 5 calendar days), and every such downtime "
         "begun in the horizon runs longer than the horizon of 20 days allows"),
    ],
)
def test_bad_days_off_and_a_horizon_they_fill_are_refused_saying_why(call, message: str) -> None:
    with pytest.raises(ValueError, match=re.escape(message)):
        call()


# --- the site's list of days off ---------------------------------------------------------------------------------


def _admin_post(client, site, rows: list[dict], stored: int = 0, **changes):
    """The site's admin change form as a browser posts it, with ``rows`` in the crew days off inline (the first
    ``stored`` of them rows already stored)."""
    data = {"name": site.name, "slug": site.slug, "latitude_deg": "40", "longitude_deg": "-3", "elevation_m": "800",
            "time_zone": site.time_zone, "dust_climate": "", "look_ahead_days": "30",
            "crew_weekdays": ["1", "2", "3", "4", "5"],
            "crew_days_off-TOTAL_FORMS": str(len(rows)), "crew_days_off-INITIAL_FORMS": str(stored), **changes}
    for i, row in enumerate(rows):
        data.update({f"crew_days_off-{i}-{field}": value for field, value in row.items()})
        data[f"crew_days_off-{i}-site"] = site.pk
    return client.post(f"/admin/registry/site/{site.pk}/change/", data)


def _text(page: str) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", page)).split())


def test_an_engineer_lists_days_off_on_the_site_page_and_their_history_is_kept(engineer_in_admin, site) -> None:
    from observatory_ops.archive.history import changes

    page = _text(engineer_in_admin.get(f"/admin/registry/site/{site.pk}/change/").content.decode())
    assert "Crew days off Date Note" in page
    response = _admin_post(engineer_in_admin, site, [{"date": "2026-12-25", "note": "public holiday"},
                                                      {"date": "2027-01-01", "note": "public holiday"}])
    assert response.status_code == 302
    assert list(site.crew_days_off.values_list("date", "note")) == [(CHRISTMAS, "public holiday"),
                                                                     (NEW_YEAR, "public holiday")]
    assert [c.who for c in changes(site.crew_days_off.get(date=CHRISTMAS))] == ["engineer"]
    assert str(site.crew_days_off.get(date=CHRISTMAS)) == "Fri 25 Dec 2026 (public holiday)"


def test_the_admin_refuses_a_date_given_twice_naming_it_and_stores_nothing(engineer_in_admin, site) -> None:
    response = _admin_post(engineer_in_admin, site, [{"date": "2026-12-25", "note": "public holiday"},
                                                      {"date": "2026-12-25", "note": "Christmas"}], name="Renamed")
    assert response.status_code == 200
    assert ("Crew days off: Fri 25 Dec 2026 given on more than one row: give each date once."
            in _text(response.content.decode()))
    site.refresh_from_db()
    assert site.name == "Test Hill" and not site.crew_days_off.exists()


def test_the_admin_refuses_a_new_row_repeating_a_stored_date_naming_it(engineer_in_admin, site) -> None:
    from observatory_ops.registry.models import CrewDayOff

    stored = CrewDayOff.objects.create(site=site, date=CHRISTMAS, note="public holiday")
    response = _admin_post(engineer_in_admin, site, [{"id": stored.pk, "date": "2026-12-25", "note": "public holiday"},
                                                      {"date": "2026-12-25", "note": "again"}], stored=1)
    assert response.status_code == 200
    assert ("Fri 25 Dec 2026 is already listed among this site's crew days off: give each date once."
            in _text(response.content.decode()))
    assert list(site.crew_days_off.values_list("date", "note")) == [(CHRISTMAS, "public holiday")]


def test_a_stored_date_given_again_is_refused_on_its_date_field(site) -> None:
    from observatory_ops.registry.models import CrewDayOff

    CrewDayOff.objects.create(site=site, date=CHRISTMAS)
    with pytest.raises(ValidationError) as refused:
        CrewDayOff(site=site, date=CHRISTMAS, note="twice").full_clean()
    assert refused.value.message_dict == {
        "date": ["Fri 25 Dec 2026 is already listed among this site's crew days off: give each date once."]
    }


def test_an_engineer_takes_a_day_off_off_the_list(engineer_in_admin, site) -> None:
    from observatory_ops.registry.models import CrewDayOff

    stored = CrewDayOff.objects.create(site=site, date=CHRISTMAS)
    response = _admin_post(engineer_in_admin, site, [{"id": stored.pk, "date": "2026-12-25", "DELETE": "on"}],
                           stored=1)
    assert response.status_code == 302 and not site.crew_days_off.exists()


# --- the planner and the plan ------------------------------------------------------------------------------------


@pytest.fixture
def mirror(telescope, monkeypatch):
    """A 500 mm primary, and a sky of 4 moonless dark hours every night over December and January (every night
    costs the same), at a site whose crew is off on Christmas Day and New Year's Day. The planner's "today" (its
    search starts no earlier) is Monday 14 December 2026."""
    from observatory_ops.registry.models import CrewDayOff

    monkeypatch.setattr("observatory_ops.mirrors.views.site_today", lambda site, now=None: dt.date(2026, 12, 14))

    made = mirror_under_a_flat_sky(telescope, dt.date(2026, 12, 1), 62)
    for day in (CHRISTMAS, NEW_YEAR):
        CrewDayOff.objects.create(site=telescope.site, date=day, note="public holiday")
    return made


def test_the_planner_lists_the_days_off_inside_each_window_and_where_they_are_set(mirror, users, client) -> None:
    # By hand: from Monday 14 December 2026 over 16 nights, every night costing the same. Begun on Monday 14 the
    # recoat's realignment takes Wed 23, Thu 24 and, after Christmas and the weekend, Mon 28: 15 nights (12 with
    # no day off). Begun on Tuesday 15 it ends on Tuesday 29, also 15 nights, and overlaps; any later start ends
    # beyond the horizon. So one window, the earliest of the tie.
    client.force_login(users["viewer"])
    page = client.get(f"/mirrors/{mirror.pk}/recoat/", {"start": "2026-12-14", "horizon_days": "16"}).content.decode()
    text = _text(page)
    assert ("and not on the crew days off listed with the site's settings in the admin, such as public holidays: "
            "1 in this horizon") in text
    assert re.search(r"Mon 14 Dec 2026 Mon 28 Dec 2026 15 [\d.]+ Fri 25 Dec 2026 \(public holiday\)", text)
    assert "realignment and measurement Wed 23 Dec 2026 Mon 28 Dec 2026 3 at the telescope" in text
    assert len(re.findall(r'class="night chosen', page)) == 15


def test_the_planner_says_none_for_a_window_without_days_off(mirror, users, client) -> None:
    # By hand: from Monday 4 January 2027 the recoat fits Mon 4 - Fri 15 January, no day off inside it.
    client.force_login(users["viewer"])
    text = _text(client.get(f"/mirrors/{mirror.pk}/recoat/",
                            {"start": "2027-01-04", "horizon_days": "12"}).content.decode())
    assert re.search(r"Mon 04 Jan 2027 Fri 15 Jan 2027 12 [\d.]+ none", text)
    assert "0 in this horizon" in text


def test_a_plan_made_over_the_holidays_dates_its_orders_on_working_days(mirror, users) -> None:
    # By hand, from Wednesday 23 December 2026: removal Wed 23-Thu 24, transport Fri 25 (not crew work), strip and
    # coat Sat 26-Mon 28 at the plant, return Tue 29, reinstall Wed 30-Thu 31; the realignment would begin on
    # Friday 1 January, a day off, so it begins after the weekend, Mon 4-Wed 6 January.
    from observatory_ops.mirrors import services

    plan = services.recoat_plan_create(mirror, dt.date(2026, 12, 23), list(RECOAT_PHASES), 15.0, users["engineer"])
    assert (plan.starts_on, plan.ends_on) == (dt.date(2026, 12, 23), dt.date(2027, 1, 6))
    planned = {o.title.split(": ")[-1]: o.planned_date for o in plan.work_orders.all()}
    assert planned == {"removal": dt.date(2026, 12, 23), "strip and coat": dt.date(2026, 12, 26),
                       "reinstall": dt.date(2026, 12, 30), "realignment and measurement": dt.date(2027, 1, 4)}
    # Source: numpy.is_busday, Monday to Friday with the site's days off as holidays.
    for kind in ("removal", "reinstall", "realignment and measurement"):
        assert np.is_busday(planned[kind], weekmask="1111100", holidays=[CHRISTMAS, NEW_YEAR]), kind


def test_a_plan_asked_for_on_a_holiday_begins_with_the_crew_after_it(mirror, users) -> None:
    # By hand: asked for on Friday 25 December 2026, the removal waits over Christmas and the weekend to Monday 28.
    from observatory_ops.mirrors import services

    plan = services.recoat_plan_create(mirror, CHRISTMAS, list(RECOAT_PHASES), 12.0, users["engineer"])
    assert plan.starts_on == dt.date(2026, 12, 28)
    assert plan.work_orders.get(title__endswith="removal").planned_date == dt.date(2026, 12, 28)


@pytest.mark.parametrize("day", [dt.date(1926, 12, 25), dt.date(9999, 12, 31)])
def test_a_day_off_far_outside_any_plan_is_refused_as_mistyped(site, day):
    from observatory_ops.registry.models import CrewDayOff

    with pytest.raises(ValidationError, match="looks mistyped"):
        CrewDayOff(site=site, date=day, note="public holiday").full_clean()
    assert not CrewDayOff.objects.exists()


def test_the_add_site_page_starts_with_a_monday_to_friday_crew(admin_client):
    page = admin_client.get("/admin/registry/site/add/").content.decode()
    ticked = re.findall(r'<input type="checkbox" name="crew_weekdays" value="(\d)"[^>]*checked', page)
    assert ticked == list("12345")


def test_only_the_days_off_that_pause_work_at_the_telescope_are_listed_with_a_window():
    """A day off while the mirror is away at the plant (transport, coating: calendar days) changes nothing, so it
    is not listed beside the window; one inside a phase at the telescope is. Dates by hand, crew Mon-Fri, the
    default phases from Monday 3 August 2026: removal 3-4, transport 5, coating 6-8, return 9, reinstall 10-11,
    realignment 12-14."""
    from observatory_ops.mirrors.services import crew_windows

    first = dt.date(2026, 8, 3)
    off = {dt.date(2026, 8, 7): "plant's holiday", dt.date(2026, 8, 13): "public holiday"}
    cost = np.arange(30, dtype=float)  # each night dearer than the one before: the earliest start is cheapest
    (window,) = crew_windows(first, cost, list(RECOAT_PHASES), MON_FRI, off, alternatives=0)
    assert window["start"] == first
    assert window["days_off"] == [(dt.date(2026, 8, 13), "public holiday")]


def test_days_off_a_phase_at_the_telescope_waits_through_are_listed_too():
    """By hand, crew Mon-Fri, from Tuesday 15 December 2026 with 24 and 25 December off: removal 15-16,
    transport 17, coating 18-20, return 21, reinstall 22-23; the realignment waits through 24 and 25 December and
    the weekend and runs 28-30. Both days off held the work up."""
    from observatory_ops.mirrors.services import crew_windows

    first = dt.date(2026, 12, 15)
    off = {dt.date(2026, 12, 24): "closure", dt.date(2026, 12, 25): "closure"}
    cost = np.arange(40, dtype=float)
    (window,) = crew_windows(first, cost, list(RECOAT_PHASES), MON_FRI, off, alternatives=0)
    assert (window["start"], window["end"]) == (first, dt.date(2026, 12, 30))
    assert window["days_off"] == sorted(off.items())


def test_a_plan_whose_phases_a_day_off_listed_since_would_move_says_so_on_the_mirror_page(mirror, users, client):
    """Planned from Monday 3 August 2026 with no days off, then 11 August (the reinstall's second day) listed: laid
    out again the reinstall runs 10 and 12 August, so the page says what moved and to plan again."""
    from observatory_ops.mirrors import services
    from observatory_ops.registry.models import CrewDayOff

    plan = services.recoat_plan_create(mirror, dt.date(2026, 8, 3), list(RECOAT_PHASES), 12.0, users["engineer"])
    assert services.plan_out_of_step(plan) == ""
    CrewDayOff.objects.create(site=mirror.subsystem.telescope.site, date=dt.date(2026, 8, 11), note="flood")
    said = services.plan_out_of_step(plan)
    assert "reinstall Mon 10 Aug to Wed 12 Aug" in said and "Tue 11 Aug 2026 (flood)" in said
    client.force_login(users["viewer"])
    page = html.unescape(client.get(f"/mirrors/{mirror.pk}/").content.decode())
    assert said in page
    plan.work_orders.update(state="withdrawn")
    assert services.plan_out_of_step(plan) == ""  # nothing left to do on it
