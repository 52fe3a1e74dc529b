"""Specifications for observatory_ops.calc.windows: night costs, the cheapest downtime window, recoat phases.

References checked against:
- hand-computed sums over small arrays (worked in the comments beside each case);
- a brute-force search (every window summed on its own, in Python) for the law the cumulative sums must keep;
- PyEphem (``ephem``), an independent ephemeris library (libastro), for the full-moon and new-moon instants:
  with uniform weather and no bookings the cheapest 7-day window is centred on a full moon.

The site is invented coordinates with a real IANA time zone. No database is used.
"""

from __future__ import annotations

import datetime as dt
from functools import cache

import ephem
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from observatory_ops.calc.night_of import night_of
from observatory_ops.calc.nights import Site, nights_for_range
from observatory_ops.calc.windows import (
    EVERY_DAY,
    RECOAT_PHASES,
    TELESCOPE_WORK,
    Phase,
    Window,
    cheapest_crew_windows,
    night_cost,
    total_days,
)

INF = np.inf

# --- night_cost ---------------------------------------------------------------------------------------


def test_cost_is_moonless_dark_hours_times_the_open_fraction() -> None:
    # By hand: 10 x 0.5 = 5, 8 x 0.5 = 4, 0 x 0.25 = 0, 6 x 1 = 6.
    cost = night_cost([10.0, 8.0, 0.0, 6.0], [0.5, 0.5, 0.25, 1.0])
    np.testing.assert_allclose(cost, [5.0, 4.0, 0.0, 6.0])


def test_booked_nights_cost_booked_weight_times_more() -> None:
    # By hand: the second night is booked, 4 x 3 = 12; the others as above.
    cost = night_cost([10.0, 8.0, 0.0, 6.0], [0.5, 0.5, 0.25, 1.0], booked=[False, True, False, False], booked_weight=3)
    np.testing.assert_allclose(cost, [5.0, 12.0, 0.0, 6.0])


def test_booked_nights_are_blocked_by_default_even_without_moonless_hours() -> None:
    # By hand: both booked nights become inf; the third has no moonless hours (full moon) and is still
    # blocked, not NaN (inf x 0) and not free.
    cost = night_cost([10.0, 8.0, 0.0, 6.0], [0.5, 0.5, 0.25, 1.0], booked=[False, True, True, False])
    np.testing.assert_array_equal(cost, [5.0, INF, INF, 6.0])


def test_no_bookings_leave_costs_unweighted() -> None:
    hours, fraction = [3.0, 7.5], [0.4, 0.8]
    np.testing.assert_array_equal(night_cost(hours, fraction, booked=[False, False]), night_cost(hours, fraction))


# --- the plain search: the cheapest run of N consecutive nights ---------------------------------------


def plain_windows(cost, days, alternatives=3) -> list[Window]:
    """The cheapest run of ``days`` consecutive nights, then up to ``alternatives`` more: the production search,
    ``cheapest_crew_windows``, for one job of ``days`` days with a crew working every day and no day off (as the
    ``windows`` command searches at a bare position)."""
    return cheapest_crew_windows(cost, [Phase("work at the telescope", days, TELESCOPE_WORK)], 1, EVERY_DAY,
                                 alternatives)


#: Two-day sums of HAND_COST, by hand: starts 0..7 -> 6, 2, 5, 4, 0, 9, 11, 4.
HAND_COST = [5.0, 1.0, 1.0, 4.0, 0.0, 0.0, 9.0, 2.0, 2.0]


def test_cheapest_window_and_alternatives_match_the_hand_computed_sums() -> None:
    # By hand, from the two-day sums above: the cheapest starts at 4 (0). Starts 3..5 overlap it; of the
    # rest the cheapest starts at 1 (2). Starts 0..2 now overlap; of 6 (11) and 7 (4), 7. Start 6
    # overlaps 7, so nothing is left.
    windows = plain_windows(HAND_COST, days=2, alternatives=3)
    assert windows == [Window(4, 2, 0.0), Window(1, 2, 2.0), Window(7, 2, 4.0)]


def test_fewer_alternatives_than_asked_come_back_when_the_horizon_holds_no_more() -> None:
    assert len(plain_windows(HAND_COST, days=2, alternatives=10)) == 3
    assert plain_windows(HAND_COST, days=2, alternatives=0) == [Window(4, 2, 0.0)]


def test_a_window_as_long_as_the_horizon_is_the_whole_horizon() -> None:
    # By hand: 5 + 1 + 1 + 4 + 0 + 0 + 9 + 2 + 2 = 24.
    assert plain_windows(HAND_COST, days=9) == [Window(0, 9, 24.0)]


def test_one_day_windows_are_the_cheapest_nights_apart() -> None:
    # By hand: costs 5, 1, 1, 4 -> nights 1 and 2 (1 each, earlier first on the tie), then 3 (4).
    assert plain_windows([5.0, 1.0, 1.0, 4.0], days=1, alternatives=2) == [
        Window(1, 1, 1.0),
        Window(2, 1, 1.0),
        Window(3, 1, 4.0),
    ]


def test_windows_never_contain_a_blocked_night() -> None:
    # By hand: two-day sums of [1, inf, 1, 5, 5, 1] are inf, inf, 6, 10, 6. The cheapest are 2 and 4
    # (6 each, the earlier first); start 3 overlaps both and 0 and 1 hold the blocked night.
    windows = plain_windows([1.0, INF, 1.0, 5.0, 5.0, 1.0], days=2, alternatives=3)
    assert windows == [Window(2, 2, 6.0), Window(4, 2, 6.0)]


def test_a_cheap_window_across_a_blocked_night_loses_to_a_dear_one_without() -> None:
    # By hand: the free nights 0, 1, 3, 4 lie between blocked nights 2 and 5, so every three-day window
    # starting at 0..5 holds one; the only window left starts at 6: 60 + 70 + 80 = 210.
    cost = [0.0, 0.0, INF, 0.0, 0.0, INF, 60.0, 70.0, 80.0]
    assert plain_windows(cost, days=3, alternatives=0) == [Window(6, 3, 210.0)]


def test_windows_follow_the_booked_runs_that_night_cost_blocks() -> None:
    # By hand: costs 4, 1, blocked, 1, 1, 4 -> three-day sums inf, inf, inf, 6: only the last fits.
    cost = night_cost([4.0, 1.0, 1.0, 1.0, 1.0, 4.0], [1.0] * 6, booked=[False, False, True, False, False, False])
    assert plain_windows(cost, days=3) == [Window(3, 3, 6.0)]


@settings(max_examples=200, deadline=None)
@given(
    cost=st.lists(st.one_of(st.integers(0, 20).map(float), st.just(INF)), min_size=1, max_size=40),
    days=st.integers(1, 8),
    alternatives=st.integers(0, 6),
)
def test_windows_agree_with_a_brute_force_search_and_never_overlap(
    cost: list[float], days: int, alternatives: int
) -> None:
    # Source: a brute-force search, every window's cost summed on its own in Python (whole numbers, so
    # the sums are exact). Laws: the first window is the cheapest of all windows without a blocked
    # night, the rest come cheapest first, no two overlap, none holds a blocked night, and when fewer
    # than asked come back every remaining free window overlaps a chosen one.
    if days > len(cost):
        with pytest.raises(ValueError, match="longer than the horizon"):
            plain_windows(cost, days, alternatives)
        return
    free = {start: sum(cost[start : start + days]) for start in range(len(cost) - days + 1)}
    free = {start: total for start, total in free.items() if total != INF}
    if not free:
        with pytest.raises(ValueError, match="contains a blocked night"):
            plain_windows(cost, days, alternatives)
        return
    windows = plain_windows(cost, days, alternatives)
    assert windows[0].cost == min(free.values())
    assert [w.cost for w in windows] == sorted(w.cost for w in windows)
    assert all(free[w.start_index] == w.cost and w.days == days for w in windows)
    starts = [w.start_index for w in windows]
    assert all(abs(a - b) >= days for i, a in enumerate(starts) for b in starts[i + 1 :])
    assert 1 <= len(windows) <= alternatives + 1
    if len(windows) < alternatives + 1:
        assert all(any(abs(start - s) < days for s in starts) for start in free)


@given(
    cost=st.lists(st.one_of(st.integers(0, 20).map(float), st.just(INF)), min_size=1, max_size=40),
    days=st.integers(1, 8),
)
def test_lost_from_start_prices_every_night_to_the_window_s_end_and_the_soonest_wins(
    cost: list[float], days: int
) -> None:
    # Source: a brute-force search, every window's cost summed from night 0 to its end in Python (the telescope out
    # from night 0 whatever the window, its mirror already out). Law: costs never fall as windows end later, so the
    # first window is the earliest without a blocked night from night 0 to its end.
    if days > len(cost):
        return
    free = {start: sum(cost[: start + days]) for start in range(len(cost) - days + 1)}
    free = {start: total for start, total in free.items() if total != INF}
    one_job = [Phase("work at the telescope", days, TELESCOPE_WORK)]
    if not free:
        with pytest.raises(ValueError, match="contains a blocked night"):
            cheapest_crew_windows(cost, one_job, 1, EVERY_DAY, 0, lost_from_start=True)
        return
    [first] = cheapest_crew_windows(cost, one_job, 1, EVERY_DAY, 0, lost_from_start=True)
    assert first.start_index == min(free) and first.cost == free[min(free)]


def test_lost_from_start_by_hand() -> None:
    # HAND_COST from night 0, two days: ends after nights 1..8 -> 6, 7, 11, 11, 11, 20, 22, 24: the first window wins,
    # where from its own first night the one begun on night 4 (0 + 0) did.
    [first] = cheapest_crew_windows(HAND_COST, [Phase("work", 2, TELESCOPE_WORK)], 1, EVERY_DAY, 0,
                                    lost_from_start=True)
    assert (first.start_index, first.cost) == (0, 6.0)
    assert plain_windows(HAND_COST, 2, 0)[0].start_index == 4


# --- the outside reference: full moons from PyEphem -----------------------------------------------------

#: Invented site in the Arizona desert; America/Phoenix keeps no daylight-saving time.
SITE = Site(latitude_deg=30.0, longitude_deg=-110.0, elevation_m=1500.0, time_zone="America/Phoenix")
FIRST_NIGHT = dt.date(2026, 12, 25)
NIGHTS = 220
#: Six consecutive lunations from the first new moon of 2027.
LUNATIONS = 6
#: Any constant will do: uniform weather scales every night's cost alike.
UNIFORM_OPEN_FRACTION = 0.6


def _instant(moment: ephem.Date) -> dt.datetime:
    return moment.datetime().replace(tzinfo=dt.UTC)


def _night_index(moment: ephem.Date) -> int:
    """Index in the night table of the site's local night (noon to noon) that holds a PyEphem instant."""
    return (night_of(_instant(moment), SITE.time_zone) - FIRST_NIGHT).days


@cache
def uniform_weather_cost() -> np.ndarray:
    nights = nights_for_range(SITE, FIRST_NIGHT, NIGHTS)
    return night_cost(nights.moonless_dark_hours, np.full(NIGHTS, UNIFORM_OPEN_FRACTION))


def new_moons() -> list[ephem.Date]:
    """PyEphem's new-moon instants: LUNATIONS + 1 of them from the first of 2027."""
    moments = [ephem.next_new_moon(ephem.Date(dt.datetime(2027, 1, 1)))]
    while len(moments) <= LUNATIONS:
        moments.append(ephem.next_new_moon(moments[-1]))
    return moments


def test_cheapest_week_of_each_lunation_is_centred_within_two_days_of_the_full_moon() -> None:
    # Source: PyEphem next_new_moon / next_full_moon instants for January to July 2027, each turned into
    # the site's local night (noon to noon, America/Phoenix). Each lunation's horizon runs from the night
    # of one new moon to the night before the next; the 7-day window's centre is its fourth night.
    cost = uniform_weather_cost()
    moons = new_moons()
    for new, next_new in zip(moons, moons[1:], strict=False):
        first, stop = _night_index(new), _night_index(next_new)
        full = _night_index(ephem.next_full_moon(new))
        window = plain_windows(cost[first:stop], days=7, alternatives=0)[0]
        centre = first + window.start_index + 3
        assert abs(centre - full) <= 2, (
            f"lunation from {_instant(new):%Y-%m-%d}: cheapest week centred on night {centre}, full moon night {full}"
        )


def test_the_cheapest_weeks_of_half_a_year_fall_one_on_each_full_moon() -> None:
    # Source: PyEphem next_full_moon instants, as above. Over a horizon of six whole lunations the cheapest
    # window and its five alternatives are the six full-moon weeks, each within two days of its own full moon.
    cost = uniform_weather_cost()
    moons = new_moons()
    first, stop = _night_index(moons[0]), _night_index(moons[-1])
    fulls = sorted(_night_index(ephem.next_full_moon(new)) for new in moons[:-1])
    windows = plain_windows(cost[first:stop], days=7, alternatives=LUNATIONS - 1)
    centres = sorted(first + w.start_index + 3 for w in windows)
    assert len(centres) == LUNATIONS
    assert all(abs(centre - full) <= 2 for centre, full in zip(centres, fulls, strict=True)), (centres, fulls)


# --- recoat phases ---------------------------------------------------------------------------------------


def test_recoat_takes_the_sum_of_its_phases() -> None:
    # By hand: 2 + 1 + 3 + 1 + 2 + 3 = 12 days for the default phases.
    assert [phase.name for phase in RECOAT_PHASES] == [
        "removal",
        "transport",
        "strip and coat",
        "return",
        "reinstall",
        "realignment and measurement",
    ]
    assert total_days(RECOAT_PHASES) == 12


def test_a_phase_of_zero_days_is_allowed_when_others_take_time() -> None:
    assert total_days([Phase("transport", 0), Phase("coat in the dome", 4)]) == 4


# --- bad input -----------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("make", "message"),
    [
        (lambda: plain_windows(HAND_COST, days=10),
         r"the phases take at least 10 days \(10 on the crew's working days, 0 calendar days\), longer than the "
         "horizon of 9 days"),
        (lambda: plain_windows(HAND_COST, days=0), "the phases add up to no days at all"),
        (lambda: plain_windows(HAND_COST, days=2.5), "days of phase 'work at the telescope' must be a whole number"),
        (lambda: plain_windows(HAND_COST, days=True), "days of phase 'work at the telescope' must be a whole number"),
        (lambda: plain_windows(HAND_COST, days=2, alternatives=-1), "number of alternatives must be at least 0"),
        (lambda: plain_windows([1.0, INF, 1.0], days=2), "every window for these phases contains a blocked night"),
        (lambda: plain_windows([1.0, np.nan, 1.0], days=1), "night costs must not be negative or NaN"),
        (lambda: plain_windows([1.0, -2.0, 1.0], days=1), "night costs must not be negative or NaN"),
        (lambda: plain_windows([[1.0, 2.0]], days=1), "cost must be a one-dimensional array"),
        (lambda: plain_windows(["a", "b"], days=1), "cost must hold real numbers"),
        (lambda: night_cost([1.0, 2.0], [0.5]), "open fraction has 1 values for 2 nights"),
        (lambda: night_cost([1.0, -2.0], [0.5, 0.5]), "moonless dark hours must be finite and not negative"),
        (lambda: night_cost([1.0, INF], [0.5, 0.5]), "moonless dark hours must be finite and not negative"),
        (lambda: night_cost([1.0, 2.0], [0.5, 1.5]), "open fraction must lie between 0 and 1"),
        (lambda: night_cost([1.0, 2.0], [0.5, np.nan]), "open fraction must lie between 0 and 1"),
        (lambda: night_cost([1.0, 2.0], [0.5, 0.5], booked=[True]), "booked has 1 values for 2 nights"),
        (lambda: night_cost([1.0, 2.0], [0.5, 0.5], booked=[1, 0]), "booked must hold True or False"),
        (lambda: night_cost([1.0], [0.5], booked=[True], booked_weight=0.5), "booked weight must be a number of at"),
        (lambda: night_cost([1.0], [0.5], booked=[True], booked_weight=np.nan), "booked weight must be a number"),
        (lambda: night_cost([1.0], [0.5], booked=[True], booked_weight="3"), "booked weight must be a number"),
        (lambda: total_days([Phase("removal", 2), Phase("transport", -1)]), "days of phase 'transport' must be at"),
        (lambda: total_days([Phase("removal", 1.5)]), "days of phase 'removal' must be a whole number"),
        (lambda: total_days([Phase("removal", 0)]), "the phases add up to no days at all"),
        (lambda: total_days([]), "the phases add up to no days at all"),
    ],
)
def test_bad_input_raises_value_error_naming_the_problem(make, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        make()
