"""Specifications for dust weighting, accumulation and the usage forecast (pure, no database).

observatory_ops.calc.exposure and observatory_ops.calc.forecast. Outside references: the WHO 2005 PM10 guideline
(from memory) for the clean-air reference; hand arithmetic written beside each case, closed-form results for a
constant rate, and plain-Python references (a loop, math.fsum, statistics.stdev) or pandas that share no code with
the vectorised functions; Bienaymé's formula for the forecast band. The dust weighting, the open fraction per
calendar month and the band's month-by-month spread are the project's own model: the hand arithmetic checks that
the code does what the model says, not the model itself (common practice, no published source).
"""
from __future__ import annotations

import datetime as dt
import math
import statistics

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from observatory_ops.calc.exposure import (
    CLEAN_AIR_PM10_UGM3,
    accumulated_since,
    dust_weight,
    dust_weighted_hours,
    running_since,
    running_totals,
    total_before,
    total_between,
)
from observatory_ops.calc.forecast import (
    MIN_NIGHTS_FOR_HISTORY,
    PRIOR_MONTHLY_SPREAD,
    PRIOR_OPEN_FRACTION,
    days_reached,
    logged_per_month,
    monthly_open_fraction,
    monthly_spread,
)

FAST = settings(max_examples=80, deadline=None)
pm10s = st.floats(0, 2000, allow_nan=False)
hours = st.floats(0, 24, allow_nan=False)
sensitivities = st.floats(0, 5, allow_nan=False)


def days(*isodates: str) -> np.ndarray:
    return np.array(isodates, dtype="datetime64[D]")


# --- dust weighting ---------------------------------------------------------------------------------


def test_clean_air_reference_is_twenty_ugm3():
    # Source: the WHO 2005 air-quality guideline for the annual mean of PM10, 20 ug/m3 (from memory, as
    # calc/exposure.py says). The weighting formula below is written with PM_ref = 20 ug/m3.
    assert CLEAN_AIR_PM10_UGM3 == 20.0


@pytest.mark.parametrize(
    ("pm10", "sensitivity", "weight"),
    [
        (60.0, 1.0, 1 + 1.0 * (60 - 20) / 20),  # = 3
        (20.0, 1.0, 1 + 1.0 * (20 - 20) / 20),  # = 1: at the reference, an hour is an hour
        (5.0, 2.0, 1 + 2.0 * 0 / 20),  # = 1: cleaner than the reference still counts one (max(0, 5 - 20) = 0)
        (50.0, 0.5, 1 + 0.5 * (50 - 20) / 20),  # = 1.75
        (500.0, 0.0, 1 + 0.0 * (500 - 20) / 20),  # = 1: a plan insensitive to dust
        (float("nan"), 3.0, 1.0),  # not measured counts as clean air
    ],
)
def test_dust_weight_matches_hand_computed_cases(pm10, sensitivity, weight):
    # The weighting is the project's own model (calc/exposure.py): common practice, no published source. Hand
    # arithmetic of w = 1 + s * max(0, PM10 - 20) / 20 beside each case.
    assert float(dust_weight(pm10, sensitivity)) == pytest.approx(weight, rel=1e-12)


def test_dust_weight_is_vectorised_over_pm10():
    # s = 1: 10 -> 1 (below reference), 20 -> 1, 40 -> 1 + 20/20 = 2, 100 -> 1 + 80/20 = 5
    np.testing.assert_allclose(dust_weight([10, 20, 40, 100], 1.0), [1.0, 1.0, 2.0, 5.0], rtol=1e-12)


def test_dust_weighted_hours_multiply_open_hours_by_the_weight():
    # Hand arithmetic of the project's own model (common practice, no published source).
    # 8 h at PM10 40, s = 1: 8 * (1 + 20/20) = 16; 6.5 h not measured: 6.5 * 1 = 6.5; closed at PM10 200: 0 * 10 = 0
    np.testing.assert_allclose(
        dust_weighted_hours([8.0, 6.5, 0.0], [40.0, np.nan, 200.0], 1.0), [16.0, 6.5, 0.0], rtol=1e-12
    )


def test_negative_dust_sensitivity_is_refused_with_a_clear_error():
    with pytest.raises(ValueError, match="dust sensitivity"):
        dust_weight([30.0], -0.1)


@FAST
@given(pm10=pm10s, more=pm10s, sensitivity=sensitivities)
def test_dust_weight_never_decreases_with_more_dust_and_never_falls_below_one(pm10, more, sensitivity):
    low, high = dust_weight(pm10, sensitivity), dust_weight(pm10 + more, sensitivity)
    assert 1.0 <= low <= high


@FAST
@given(open_h=hours, more_h=hours, pm10=pm10s, more_dust=pm10s, sensitivity=sensitivities)
def test_weighted_exposure_never_decreases_with_more_dust_or_more_hours_and_is_never_negative(
    open_h, more_h, pm10, more_dust, sensitivity
):
    base = float(dust_weighted_hours(open_h, pm10, sensitivity))
    assert base >= 0.0
    assert float(dust_weighted_hours(open_h + more_h, pm10, sensitivity)) >= base
    assert float(dust_weighted_hours(open_h, pm10 + more_dust, sensitivity)) >= base


# --- accumulation since a service -------------------------------------------------------------------


def test_accumulated_since_counts_nights_on_and_after_the_service_date():
    nights = days("2025-01-01", "2025-01-02", "2025-01-03", "2025-01-04", "2025-01-05")
    per_night = [1.0, 2.0, 3.0, 4.0, 5.0]
    since = days("2025-01-01", "2025-01-03", "2025-01-06", "2024-12-01", "2025-01-04")
    # 1+2+3+4+5 = 15; from the 3rd: 3+4+5 = 12; after the last night: 0; before the first: 15; from the 4th: 4+5 = 9
    np.testing.assert_allclose(accumulated_since(nights, per_night, since), [15.0, 12.0, 0.0, 15.0, 9.0])


def test_accumulated_since_handles_gaps_in_the_log():
    nights = days("2025-01-01", "2025-01-03", "2025-01-07")
    since = days("2025-01-02", "2025-01-07", "2025-01-08")
    # from the 2nd: 2 + 4 = 6 (the 2nd itself is not logged); from the 7th: 4; from the 8th: nothing logged, 0
    np.testing.assert_allclose(accumulated_since(nights, [1.0, 2.0, 4.0], since), [6.0, 4.0, 0.0])


def test_accumulated_since_on_an_empty_log_is_zero():
    assert accumulated_since(days(), [], days("2025-01-01")).tolist() == [0.0]


def test_accumulated_since_refuses_a_value_count_that_does_not_match_the_nights():
    with pytest.raises(ValueError, match="one value per night"):
        accumulated_since(days("2025-01-01", "2025-01-02"), [1.0], days("2025-01-01"))


@st.composite
def logs(draw):
    offsets = sorted(draw(st.sets(st.integers(0, 1500), max_size=120)))
    start = dt.date(2023, 1, 1)
    nights = [start + dt.timedelta(days=o) for o in offsets]
    values = draw(st.lists(st.floats(0, 1e4, allow_nan=False), min_size=len(nights), max_size=len(nights)))
    since = [start + dt.timedelta(days=o) for o in draw(st.lists(st.integers(-10, 1510), min_size=1, max_size=8))]
    return nights, values, since


@FAST
@given(log=logs())
def test_accumulated_since_equals_a_plain_python_sum(log):
    nights, values, since = log
    got = accumulated_since(np.array(nights, dtype="datetime64[D]"), values, np.array(since, dtype="datetime64[D]"))
    for start, total in zip(since, got, strict=True):
        expected = math.fsum(v for night, v in zip(nights, values, strict=True) if night >= start)
        assert total == pytest.approx(expected, rel=1e-9, abs=1e-6)


@FAST
@given(
    log=logs(), which=st.integers(0, 10**6), more_h=st.floats(0, 12), more_dust=pm10s, sensitivity=sensitivities,
    seed=st.integers(0, 2**32 - 1),
)
def test_accumulated_dust_exposure_never_decreases_when_any_night_gets_more_dust_or_hours(
    log, which, more_h, more_dust, sensitivity, seed
):
    nights, _values, since = log
    if not nights:
        return
    rng = np.random.default_rng(seed)
    open_h = rng.uniform(0, 12, len(nights))
    pm10 = np.where(rng.random(len(nights)) < 0.2, np.nan, rng.uniform(0, 300, len(nights)))
    i = which % len(nights)
    night_arr, since_arr = np.array(nights, dtype="datetime64[D]"), np.array(since, dtype="datetime64[D]")
    before = accumulated_since(night_arr, dust_weighted_hours(open_h, pm10, sensitivity), since_arr)
    dustier, longer = pm10.copy(), open_h.copy()
    dustier[i] = (0.0 if np.isnan(pm10[i]) else pm10[i]) + more_dust
    longer[i] += more_h
    # Differences of a cumulative sum round at the last bit of the running total, hence the tiny allowance.
    slack = 1e-12 * (1.0 + float(np.sum(dust_weighted_hours(longer, dustier, sensitivity))))
    for changed in (dust_weighted_hours(open_h, dustier, sensitivity), dust_weighted_hours(longer, pm10, sensitivity)):
        after = accumulated_since(night_arr, changed, since_arr)
        assert np.all(after >= before - slack)
    assert np.all(before >= 0.0)



def test_running_totals_and_the_totals_between_two_nights_match_hand_arithmetic():
    # Source: hand arithmetic. Nights 1, 2, 3 and 5 Jan (the 4th not logged) with 1, 2, 4, 8 h.
    nights = days("2025-01-01", "2025-01-02", "2025-01-03", "2025-01-05")
    totals = running_totals([1.0, 2.0, 4.0, 8.0])
    # 0; 1; 1 + 2 = 3; 3 + 4 = 7; 7 + 8 = 15
    assert totals.tolist() == [0.0, 1.0, 3.0, 7.0, 15.0]
    # Before the 1st: nothing; before the 3rd: 1 + 2 = 3 (the night of the 3rd not counted); before the 5th:
    # 1 + 2 + 4 = 7; after the log: 15. A scalar day gives a scalar.
    assert total_before(nights, totals, days("2025-01-01", "2025-01-03", "2025-01-05", "2025-02-01")).tolist() == [
        0.0, 3.0, 7.0, 15.0]
    assert float(total_before(nights, totals, dt.date(2025, 1, 4))) == 7.0
    # A service on the 2nd counts from its night: to before the 5th, 2 + 4 = 6; to before the 6th, 2 + 4 + 8 = 14;
    # to before the 2nd itself, or an earlier day, nothing; to before the 4th (not logged), 2 + 4 = 6.
    until = days("2025-01-05", "2025-01-06", "2025-01-02", "2024-12-30", "2025-01-04")
    assert total_between(nights, totals, dt.date(2025, 1, 2), until).tolist() == [6.0, 14.0, 0.0, 0.0, 6.0]
    # To the end of the log, the same as accumulated_since: from the 2nd, 2 + 4 + 8 = 14.
    assert float(accumulated_since(nights, [1.0, 2.0, 4.0, 8.0], days("2025-01-02"))[0]) == 14.0


def test_running_since_gives_each_night_from_the_service_with_its_running_total():
    # Source: hand arithmetic. A service on the 3rd counts the night of the 3rd (4), then the 5th: 4 + 8 = 12.
    nights = days("2025-01-01", "2025-01-02", "2025-01-03", "2025-01-05")
    counted, totals = running_since(nights, [1.0, 2.0, 4.0, 8.0], dt.date(2025, 1, 3))
    assert counted.tolist() == [dt.date(2025, 1, 3), dt.date(2025, 1, 5)] and totals.tolist() == [4.0, 12.0]
    # From the 4th (not logged): the 5th alone, 8; from after the log: nothing; from before it: 1, 3, 7, 15.
    assert running_since(nights, [1.0, 2.0, 4.0, 8.0], dt.date(2025, 1, 4))[1].tolist() == [8.0]
    assert running_since(nights, [1.0, 2.0, 4.0, 8.0], dt.date(2025, 1, 6))[1].tolist() == []
    assert running_since(nights, [1.0, 2.0, 4.0, 8.0], dt.date(2024, 6, 1))[1].tolist() == [1.0, 3.0, 7.0, 15.0]
    with pytest.raises(ValueError, match="one value per night"):
        running_since(nights, [1.0], dt.date(2025, 1, 1))


@FAST
@given(log=logs(), data=st.data())
def test_totals_between_two_nights_equal_a_plain_python_sum(log, data):
    """Checked against a plain-Python sum over the nights (math.fsum), sharing no code with the cumulative sums."""
    nights, values, since = log
    until = [day + dt.timedelta(days=data.draw(st.integers(-20, 400))) for day in since]
    night_arr = np.array(nights, dtype="datetime64[D]")
    got = total_between(night_arr, running_totals(values), np.array(since, dtype="datetime64[D]"),
                        np.array(until, dtype="datetime64[D]"))
    for start, end, total in zip(since, until, got, strict=True):
        expected = math.fsum(v for night, v in zip(nights, values, strict=True) if start <= night < end)
        assert total == pytest.approx(expected, rel=1e-9, abs=1e-6)
    counted, running = running_since(night_arr, values, since[0])
    kept = [(night, v) for night, v in zip(nights, values, strict=True) if night >= since[0]]
    assert counted.astype(object).tolist() == [night for night, _ in kept]
    for i, total in enumerate(running):
        assert total == pytest.approx(math.fsum(v for _, v in kept[: i + 1]), rel=1e-9, abs=1e-6)


# --- the day a limit is reached ---------------------------------------------------------------------


def test_constant_rate_reaches_the_limit_on_the_analytically_known_day():
    # 100 remaining at 4 per day: cumulative 4 * (k + 1) >= 100 first at k + 1 = 25, i.e. day index 24, the 25th day.
    forecast, earliest, latest = days_reached([100.0], np.full(60, 4.0))
    assert (forecast[0], earliest[0], latest[0]) == (24, 24, 24)


@FAST
@given(rate=st.integers(1, 50), remaining=st.integers(1, 2000))
def test_constant_whole_rate_reaches_the_limit_on_day_ceil_remaining_over_rate_minus_one(rate, remaining):
    # Whole numbers keep the cumulative sum exact, so the closed form k = ceil(R / r) - 1 must hold exactly.
    horizon = remaining // rate + 5
    forecast, _, _ = days_reached([float(remaining)], np.full(horizon, float(rate)))
    assert forecast[0] == -(-remaining // rate) - 1


def test_one_sigma_band_within_the_first_month():
    # The band: a sum of m independent months, each with relative spread s, has variance m (s C/m)^2 (Bienaymé's
    # formula: the variance of a sum of uncorrelated terms is the sum of their variances), so its relative deviation
    # is s / sqrt(m); a month is 30.44 = 365.2425 / 12 days (the mean Gregorian month). That the months' deviations
    # are independent is the project's assumption (common practice, no published source).
    # spread 0.2, 40 remaining at 4 per day; within the first month the relative deviation is 0.2 / sqrt(1).
    # forecast: 4 (k+1) >= 40 -> k + 1 = 10 -> k = 9
    # earliest: 4 (k+1) * 1.2 >= 40 -> k + 1 >= 8.33 -> k = 8   (k = 7: 32 * 1.2 = 38.4 < 40)
    # latest:   4 (k+1) * 0.8 >= 40 -> k + 1 >= 12.5 -> k = 12  (k = 11: 48 * 0.8 = 38.4 < 40)
    forecast, earliest, latest = days_reached([40.0], np.full(60, 4.0), spread=0.2)
    assert (forecast[0], earliest[0], latest[0]) == (9, 8, 12)


def test_one_sigma_band_narrows_with_the_square_root_of_the_months():
    # Bienaymé's formula (variance of a sum = sum of the variances) gives the 1 / sqrt(m) narrowing; 30.44 =
    # 365.2425 / 12 days per month (the mean Gregorian month), as the previous test says.
    # spread 0.3, 200 remaining at 2 per day. After n = k + 1 days, m = n / 30.44 months and the band is
    # C * (1 +- 0.3 / sqrt(m)) = 2n +- 0.6 * sqrt(30.44 n).
    # forecast: 2n >= 200 -> n = 100 -> k = 99
    # earliest: n = 85: 170 + 0.6 * sqrt(2587.4) = 170 + 30.52 = 200.52 >= 200; n = 84: 168 + 30.34 = 198.34 -> k = 84
    # latest:   n = 118: 236 - 0.6 * sqrt(3591.92) = 236 - 35.96 = 200.04 >= 200; n = 117: 198.19 -> k = 117
    forecast, earliest, latest = days_reached([200.0], np.full(400, 2.0), spread=0.3)
    assert (forecast[0], earliest[0], latest[0]) == (99, 84, 117)


def test_nothing_remaining_is_day_zero_and_beyond_the_horizon_is_minus_one():
    forecast, earliest, latest = days_reached([0.0, -5.0, 1e6, 10.0], np.full(30, 1.0), spread=0.2)
    assert forecast.tolist() == [0, 0, -1, 9]
    assert earliest.tolist()[:3] == [0, 0, -1]
    assert latest.tolist()[:3] == [0, 0, -1]


def test_no_expected_usage_never_reaches_the_limit():
    forecast, _, _ = days_reached([1.0], np.zeros(100))
    assert forecast.tolist() == [-1]


def test_negative_expected_usage_is_refused_with_a_clear_error():
    with pytest.raises(ValueError, match="cannot be negative"):
        days_reached([1.0], [1.0, -0.5])


def first_day_by_loop(remaining: float, per_day: list[float]) -> int:
    if remaining <= 0:
        return 0
    total = 0.0
    for k, usage in enumerate(per_day):
        total += usage
        if total >= remaining:
            return k
    return -1


@FAST
@given(
    per_day=st.lists(st.floats(0, 20, allow_nan=False), min_size=0, max_size=200),
    remaining=st.lists(st.floats(-10, 3000, allow_nan=False), min_size=1, max_size=6),
    spread=st.floats(0, 0.9),
)
def test_days_reached_matches_a_plain_loop_and_the_band_brackets_the_forecast(per_day, remaining, spread):
    forecast, earliest, latest = days_reached(remaining, per_day, spread)
    assert forecast.tolist() == [first_day_by_loop(r, per_day) for r in remaining]
    for f, e, late in zip(forecast, earliest, latest, strict=True):
        if late != -1:
            assert f != -1 and e <= f <= late
        if f != -1:
            assert e != -1 and e <= f


def test_an_amount_counts_from_its_own_start_day():
    """A plan serviced after the first forecast day counts expected use from its service on, not before.
    Hand arithmetic: per day 5, 5, then 1 a day. 3 from day 0: 5 >= 3 on day 0. 3 from day 2: 1 + 1 + 1 on days
    2, 3, 4, so day 4 (offsets stay counted from day 0). Nothing remaining from day 2: day 2 itself. From day 9,
    past the ten days given: never."""
    per_day = [5, 5, 1, 1, 1, 1, 1, 1, 1, 1]
    forecast, earliest, latest = days_reached([3, 3, 0, 3], per_day, start=[0, 2, 2, 9])
    assert forecast.tolist() == [0, 4, 2, -1]
    assert earliest.tolist() == latest.tolist() == forecast.tolist()  # no spread: no band
    with pytest.raises(ValueError, match="before day 0"):
        days_reached([3], per_day, start=[-1])


@FAST
@given(
    per_day=st.lists(st.floats(0, 20, allow_nan=False), min_size=0, max_size=120),
    remaining=st.lists(st.floats(-10, 2000, allow_nan=False), min_size=1, max_size=6),
    spread=st.floats(0, 0.9),
    data=st.data(),
)
def test_from_a_start_day_the_forecast_and_band_are_those_of_the_days_from_it(per_day, remaining, spread, data):
    """Counted from day s, everything (forecast, and a band whose months run from s) is the forecast of the days
    from s on, shifted by s; the forecast is checked against the plain loop on those days."""
    starts = data.draw(st.lists(st.integers(0, len(per_day) + 2), min_size=len(remaining), max_size=len(remaining)))
    got = days_reached(remaining, per_day, spread, starts)
    for i, (r, s) in enumerate(zip(remaining, starts, strict=True)):
        alone = days_reached([r], per_day[s:], spread)
        assert [g[i] for g in got] == [int(a[0]) + s if a[0] >= 0 else -1 for a in alone]
        loop = first_day_by_loop(r, per_day[s:])
        assert got[0][i] == (loop + s if loop >= 0 else -1)


# --- open fraction per calendar month and its spread ------------------------------------------------


def test_monthly_open_fraction_matches_hand_computed_months():
    # The open fraction per calendar month and the 20 nights it needs are the project's own model (common practice,
    # no published source); hand arithmetic beside each month.
    months, open_h, dark_h = [], [], []

    def add(month: int, count: int, opened: float, dark: float) -> None:
        months.extend([month] * count)
        open_h.extend([opened] * count)
        dark_h.extend([dark] * count)

    add(1, 20, 4.0, 10.0)  # January: 20 * 4 / (20 * 10) = 0.4
    add(2, 19, 4.0, 10.0)  # February: 19 nights, one short of the 20 needed -> prior
    add(3, 25, 11.0, 10.0)  # March: 275 / 250 = 1.1 (opened in twilight: kept, not capped at 1)
    add(4, 20, 2.0, 0.0)  # April: no dark hours at all -> prior
    add(12, 10, 2.0, 12.0)  # December of one year ...
    add(12, 12, 6.0, 12.0)  # ... and of the next: (10*2 + 12*6) / (22 * 12) = 92 / 264
    fraction, from_history = monthly_open_fraction(months, open_h, dark_h)
    expected = np.full(12, PRIOR_OPEN_FRACTION)
    expected[[0, 2, 11]] = [0.4, 1.1, 92 / 264]
    np.testing.assert_allclose(fraction, expected, rtol=1e-12)
    assert from_history.tolist() == [True, False, True, False, False, False, False, False, False, False, False, True]
    assert MIN_NIGHTS_FOR_HISTORY == 20


def test_monthly_spread_is_the_sample_standard_deviation_of_relative_deviations():
    # Checked against hand arithmetic and Python's statistics.stdev (the sample standard deviation, n - 1).
    actual = [90, 110, 100, 120, 80, 100, 0]
    expected = [100, 100, 100, 100, 100, 100, 0]  # the last month expected nothing and is left out
    # ratios - 1: -0.1, 0.1, 0, 0.2, -0.2, 0; squares sum to 0.1; sample variance 0.1 / 5 = 0.02
    assert monthly_spread(actual, expected) == pytest.approx(math.sqrt(0.02), rel=1e-12)
    assert monthly_spread(actual, expected) == pytest.approx(statistics.stdev([-0.1, 0.1, 0, 0.2, -0.2, 0]), rel=1e-12)


def test_monthly_spread_needs_six_months_before_replacing_the_prior():
    # Six months and the prior spread are our own choice (common practice, no published source).
    assert monthly_spread([90, 110, 100, 120, 80], [100] * 5) == PRIOR_MONTHLY_SPREAD


def test_logged_per_month_matches_a_hand_count():
    # Hand count: January has 5 Jan 2024, 7 Jan 2025, 31 Jan 2025 (3 nights, in 2 years: 2024 and 2025); February
    # 29 Feb 2024 (1 night, 1 year); December 31 Dec 2023 and 1 Dec 2025 (2 nights, 2 years); no other month.
    nights = days("2024-01-05", "2025-01-07", "2025-01-31", "2024-02-29", "2023-12-31", "2025-12-01")
    count, years = logged_per_month(nights)
    assert count.tolist() == [3, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 2]
    assert years.tolist() == [2, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 2]
    assert logged_per_month(days())[0].tolist() == [0] * 12  # an empty log: nothing anywhere


@FAST
@given(offsets=st.sets(st.integers(0, 3000), max_size=200))
def test_logged_per_month_matches_pandas(offsets):
    """Checked against pandas (an independent library): nights per calendar month by ``DatetimeIndex.month``, and
    years per month as the number of distinct years among that month's nights."""
    pd = pytest.importorskip("pandas")
    nights = np.datetime64("2022-03-15") + np.array(sorted(offsets), dtype="timedelta64[D]")
    count, years = logged_per_month(nights)
    index = pd.DatetimeIndex(nights)
    frame = pd.DataFrame({"month": index.month, "year": index.year})
    expected_count = frame["month"].value_counts().reindex(range(1, 13), fill_value=0)
    expected_years = frame.groupby("month")["year"].nunique().reindex(range(1, 13), fill_value=0)
    assert count.tolist() == expected_count.tolist()
    assert years.tolist() == expected_years.tolist()


def test_reached_on_names_the_night_the_running_total_passed_the_limit():
    from observatory_ops.calc.exposure import reached_on

    nights = np.array(["2026-01-01", "2026-01-02", "2026-01-03", "2026-01-05"], dtype="datetime64[D]")
    since = np.array(["2026-01-01", "2026-01-02", "2026-01-02"], dtype="datetime64[D]")
    # From 1 Jan: 5, 10 -> a limit of 10 is reached on 2 Jan. From 2 Jan: 5, 10, 15 -> 15 on 5 Jan (the
    # 4th is not logged); a limit of 100 is never reached (NaT).
    got = reached_on(nights, [5, 5, 5, 5], since, [10, 15, 100])
    assert got[0] == np.datetime64("2026-01-02") and got[1] == np.datetime64("2026-01-05")
    assert np.isnat(got[2])
