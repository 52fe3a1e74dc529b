"""Condition triggers: the Theil-Sen trend and the day it reaches a limit (no database).

References used below:
- Sen (1968), "Estimates of the regression coefficient based on Kendall's tau", J. Amer. Statist. Assoc. 63,
  1379-1389, and Theil (1950): the slope is the median of the pairwise slopes; its confidence interval is read off
  the ordered pairwise slopes at ranks M1 = (N - C) / 2 and M2 + 1 = (N + C) / 2 + 1, with C = z sqrt(Var S) and
  Var S = n (n - 1) (2 n + 5) / 18 the variance of Kendall's S without ties (Sen 1968, eq. 2.6; also Gilbert (1987),
  Statistical Methods for Environmental Pollution Monitoring, section 16.5; both from memory). ``sen_interval``
  below computes it by hand in plain Python, with the normal quantile from the standard library
  (``statistics.NormalDist``), not scipy: calc.trend itself calls ``scipy.stats.theilslopes``, so that cannot be
  its reference. Ranks that are not whole are rounded to the nearest rank (a convention); the data sets below are
  chosen where M1 and M2 are all but whole (n = 7: 3.97 and 17.03; n = 5: 1.00 and 9.00), so the rounding is
  unambiguous.
- Hand arithmetic for the crossing days, from the line through the median point (Conover's convention).
"""
from __future__ import annotations

import itertools
import statistics

import numpy as np
import pytest

from observatory_ops.calc.trend import trend_to_limit


def sen_interval(days, values, confidence: float = 0.95) -> tuple[float, float, float]:
    """Theil-Sen slope and its confidence interval from their definition (Sen 1968), in plain Python.

    Returns (slope, low, high): the median of the pairwise slopes, and the ordered pairwise slopes at the
    1-based ranks round(M1) and round(M2) + 1. Readings with tied days or tied values are refused here, since
    Var S would then need Sen's tie correction.
    """
    days, values = [float(d) for d in days], [float(v) for v in values]
    n = len(days)
    assert len(set(days)) == n and len(set(values)) == n, "sen_interval: no ties, so Var S needs no correction"
    slopes = sorted((values[j] - values[i]) / (days[j] - days[i]) for i, j in itertools.combinations(range(n), 2))
    big_n = len(slopes)
    z = statistics.NormalDist().inv_cdf(1 - (1 - confidence) / 2)
    c = z * (n * (n - 1) * (2 * n + 5) / 18) ** 0.5
    m1, m2 = round((big_n - c) / 2), round((big_n + c) / 2)
    return statistics.median(slopes), slopes[m1 - 1], slopes[m2]  # 1-based ranks m1 and m2 + 1


def test_slope_is_the_median_of_pairwise_slopes():
    # Sen (1968) / Theil (1950): the slope is the median of (y_j - y_i) / (x_j - x_i) over all pairs,
    # computed here by brute force, independently of scipy.
    days = [0, 7, 15, 30, 44, 61, 75]
    values = [0.52, 0.55, 0.61, 0.60, 0.71, 0.74, 0.90]  # one outlier at the end
    pairwise = [(values[j] - values[i]) / (days[j] - days[i]) for i, j in itertools.combinations(range(7), 2)]
    fit = trend_to_limit(days, values, limit=1.0)
    assert fit.slope_per_day == pytest.approx(statistics.median(pairwise))
    # The intercept passes the line through the medians (Conover's convention, as scipy uses).
    assert fit.intercept == pytest.approx(np.median(values) - fit.slope_per_day * np.median(days))


def test_crossing_day_of_an_exact_line_is_known_analytically():
    # 0.5 + 0.004 d reaches 1.0 at d = 125; falling 0.9 - 0.001 d reaches 0.8 at d = 100.
    rising = trend_to_limit([0, 10, 20, 30], [0.5, 0.54, 0.58, 0.62], limit=1.0)
    assert rising.crossing_day == pytest.approx(125)
    falling = trend_to_limit([0, 10, 20, 30], [0.9, 0.89, 0.88, 0.87], limit=0.8, rising=False)
    assert falling.crossing_day == pytest.approx(100)


def test_a_trend_moving_away_from_the_limit_never_crosses():
    fit = trend_to_limit([0, 10, 20], [0.9, 0.8, 0.7], limit=1.0)
    assert fit.crossing_day is None


@pytest.mark.parametrize(
    "days, values, message",
    [([0, 1], [1, 2], "at least 3"), ([5, 5, 5], [1, 2, 3], "two different days"), ([0, 1, 2], [1, 2], "same length")],
)
def test_bad_input_is_a_clear_message(days, values, message):
    with pytest.raises(ValueError, match=message):
        trend_to_limit(days, values, limit=1.0)


@pytest.mark.parametrize("values", [[1.0, float("nan"), 2.0], [1.0, float("inf"), 2.0], [-1e308, 0.0, 1e308]])
def test_values_that_cannot_be_fitted_are_refused_not_turned_into_infinities(values):
    with pytest.raises(ValueError):
        trend_to_limit([0.0, 1.0, 2.0], values, limit=5.0)


# The readings of the first test above: 7 readings, 21 pairwise slopes, no tied days or values.
DAYS = [0, 7, 15, 30, 44, 61, 75]
VALUES = [0.52, 0.55, 0.61, 0.60, 0.71, 0.74, 0.90]


def test_slope_interval_is_sens_rank_interval_computed_by_hand():
    # Sen (1968): Var S = 7 * 6 * 19 / 18 = 44.33, sqrt = 6.658; z(97.5 %) = 1.960, C = 13.05;
    # M1 = (21 - 13.05) / 2 = 3.97 -> 4, M2 = (21 + 13.05) / 2 = 17.03 -> 17. Of the 21 ordered slopes, the 4th is
    # (0.60 - 0.52) / (30 - 0) = 1/375 and the 18th (M2 + 1) is (0.90 - 0.60) / (75 - 30) = 1/150 (ranked by hand).
    fit = trend_to_limit(DAYS, VALUES, limit=1.0)
    slope, low, high = sen_interval(DAYS, VALUES, 0.95)
    assert fit.slope_per_day == pytest.approx(slope, rel=1e-12)
    assert (fit.slope_low, fit.slope_high) == pytest.approx((low, high), rel=1e-12)
    assert (fit.slope_low, fit.slope_high) == pytest.approx((1 / 375, 1 / 150), rel=1e-12)
    assert fit.slope_low < fit.slope_per_day < fit.slope_high


def test_earliest_and_latest_days_of_a_rising_trend_by_hand():
    # Hand arithmetic from Sen's interval above, the line pivoting on the median point (30 days, 0.61):
    # the steepest slope reaches 1.0 first, 30 + (1.0 - 0.61) / (1/150) = 30 + 58.5 = 88.5 days;
    # the shallowest last, 30 + 0.39 * 375 = 30 + 146.25 = 176.25 days.
    fit = trend_to_limit(DAYS, VALUES, limit=1.0)
    assert fit.earliest_day == pytest.approx(88.5, rel=1e-9)
    assert fit.latest_day == pytest.approx(176.25, rel=1e-9)
    assert fit.earliest_day < fit.crossing_day < fit.latest_day


def test_earliest_and_latest_days_of_a_falling_trend_by_hand():
    # The same readings mirrored, 1.5 - value (0.98 ... 0.60): Sen's interval is (-1/150, -1/375), by hand as above
    # with the signs changed, and the median point (30 days, 0.89). The steepest fall reaches 0.5 first,
    # 30 + (0.5 - 0.89) / (-1/150) = 88.5 days; the shallowest last, 30 + 0.39 * 375 = 176.25 days.
    falling = [round(1.5 - v, 2) for v in VALUES]
    fit = trend_to_limit(DAYS, falling, limit=0.5, rising=False)
    slope, low, high = sen_interval(DAYS, falling, 0.95)
    assert (fit.slope_low, fit.slope_high) == pytest.approx((low, high), rel=1e-12)
    assert (fit.slope_low, fit.slope_high) == pytest.approx((-1 / 150, -1 / 375), rel=1e-9)
    assert fit.earliest_day == pytest.approx(88.5, rel=1e-9)
    assert fit.latest_day == pytest.approx(176.25, rel=1e-9)
    assert fit.earliest_day < fit.crossing_day < fit.latest_day


def test_a_band_end_whose_slope_points_away_from_the_limit_has_no_day():
    # Sen (1968) with n = 5: Var S = 5 * 4 * 15 / 18 = 16.67, C = 1.960 * 4.082 = 8.00, M1 = 1.00 -> 1 and
    # M2 = 9.00 -> 9, so the interval runs from the least to the greatest (10th) of the 10 pairwise slopes, by hand
    # (0.49 - 0.52) / 10 = -0.003 and (0.53 - 0.49) / 10 = 0.004. The negative end never reaches a limit above, so
    # latest_day is None; the steep end, pivoting on the median point (20 days, 0.505), reaches 1.0 at
    # 20 + 0.495 / 0.004 = 20 + 123.75 = 143.75 days (hand arithmetic).
    days, values = [0, 10, 20, 30, 40], [0.50, 0.52, 0.49, 0.53, 0.505]
    fit = trend_to_limit(days, values, limit=1.0)
    _, low, high = sen_interval(days, values, 0.95)
    assert (fit.slope_low, fit.slope_high) == pytest.approx((low, high), rel=1e-12)
    assert (fit.slope_low, fit.slope_high) == pytest.approx((-0.003, 0.004), rel=1e-9)
    assert fit.latest_day is None
    assert fit.earliest_day == pytest.approx(143.75, rel=1e-9)


# --- the newest reading far off the line (calc.trend.newest_off_the_line) -------------------------------------
# Reference: the Hampel identifier, |x - median| > 3 x MAD scaled to a normal standard deviation (Leys et al. 2013,
# J. Exp. Soc. Psychol. 49:764; the constant 1 / Phi^-1(3/4) from the standard library's NormalDist here), the MAD
# itself from scipy.stats.median_abs_deviation(scale="normal"), the line of the earlier readings from
# scipy.stats.theilslopes: independent of the function's own arithmetic. Its other conditions are our own (common
# practice, no published source).


def test_the_normal_consistency_constant_is_one_over_the_upper_quartile_of_the_normal():
    from observatory_ops.calc.trend import MAD_NORMAL

    assert MAD_NORMAL == pytest.approx(1 / statistics.NormalDist().inv_cdf(0.75), rel=1e-12)


def test_a_settle_time_adjusted_without_a_service_is_named_off_the_line():
    """Settle time creeping up 0.05 s a week with a little scatter, then an adjustment: 0.45 s, far under the line."""
    from scipy import stats
    from scipy.stats import median_abs_deviation

    from observatory_ops.calc.trend import STEP_SPREADS, newest_off_the_line

    days = np.array([0, 7, 14, 21, 28, 35, 42, 49.0])
    values = np.array([0.50, 0.56, 0.59, 0.66, 0.70, 0.74, 0.81, 0.45])
    slope, intercept, _, _ = stats.theilslopes(values[:-1], days[:-1])
    residuals = values[:-1] - (intercept + slope * days[:-1])
    spread = max(median_abs_deviation(residuals, scale="normal"), 0.01)  # the readings are to 0.01 s
    expected = intercept + slope * days[-1]
    away = np.median(residuals) - (values[-1] - expected)
    assert away > STEP_SPREADS * spread
    off = newest_off_the_line(days, values, 1.0, rising=True, within_days=365)
    assert off.spreads == pytest.approx(away / spread, rel=1e-9) and off.expected == pytest.approx(expected, rel=1e-9)
    # The same reading on the far side (toward the limit) is not a step down: the limit's own warning covers it.
    assert newest_off_the_line(days, [*values[:-1], 1.2], 1.0, True) is None
    # Back to where the readings started, not below all of them (a second diff review's case), and to 0.1 s.
    assert newest_off_the_line(range(0, 56, 7), [0.5, 0.6, 0.7, 0.8, 0.9, 1.0, 1.1, 0.5], 1.5) is not None


def test_a_reading_within_the_scatter_rounded_readings_or_too_few_are_not_named():
    """The diff review's cases: 0.8 then 0.7 s on readings rounded to 0.1 s (a spread of 0 up to rounding read as 170
    spreads), and a newest reading not back near where the readings started."""
    from observatory_ops.calc.trend import newest_off_the_line

    days = [0, 7, 14, 21, 28, 35, 42, 49]
    assert newest_off_the_line(days, [0.50, 0.56, 0.59, 0.66, 0.70, 0.74, 0.81, 0.83], 1.0) is None
    assert newest_off_the_line(days, [0.5, 0.5, 0.6, 0.6, 0.7, 0.7, 0.8, 0.7], 1.0) is None
    assert newest_off_the_line(days, [0.50, 0.56, 0.59, 0.66, 0.70, 0.74, 0.81, 0.65], 1.0) is None
    assert newest_off_the_line([0, 7, 14, 21, 28, 35], [0.5, 0.55, 0.6, 0.7, 0.8, 0.3], 1.0) is None  # 5 before it


def test_the_resolution_is_the_power_of_ten_the_readings_are_rounded_to():
    from observatory_ops.calc.trend import resolution

    assert resolution([0.5, 0.6, 0.7]) == 0.1 and resolution([0.56, 0.59]) == 0.01
    assert resolution([0.1 + 0.2, 0.5]) == 0.1  # a sum's binary digits aside
    assert resolution([-2.5, 1.5]) == 0.1 and resolution([123456789.1, 3]) == 0.1
    assert resolution([100, 90]) == 1  # tens are not known to be rounded to tens
    assert resolution([0.123456789]) == 0.0


def test_a_falling_quantity_is_off_the_line_above_it():
    """Brake air pressure falling toward its lower limit, then restored: the step is upward, away from the limit."""
    from observatory_ops.calc.trend import newest_off_the_line

    days = [0, 10, 20, 30, 40, 50, 60]
    values = [6.0, 5.9, 5.85, 5.7, 5.62, 5.5, 6.1]
    assert newest_off_the_line(days, values, 5.0, rising=False) is not None
    assert newest_off_the_line(days, values, 5.0, rising=True) is None  # for a rising quantity that is toward it


@pytest.mark.parametrize("slope", [0.0, 0.0005, 0.001, 0.003, 0.006])
@pytest.mark.parametrize("readings", [7, 12])
def test_noise_alone_names_the_newest_reading_in_under_1_percent_of_series(slope, readings):
    """A diff review simulated readings with Gaussian noise and no adjustment: the first rule named the newest 4 to
    9 % of the time with 4 to 8 readings. Weekly readings from 0.5 s, noise 0.03 s, flat or rising up to 0.006 s a
    day, the limit 1 s, named only within a year of its forecast; 1,500 series each, a fixed seed (numpy's default
    generator): a count, not a timing."""
    from observatory_ops.calc.trend import newest_off_the_line

    generator = np.random.default_rng(20261205)
    days = np.arange(readings) * 7.0
    named = sum(newest_off_the_line(days, 0.5 + slope * days + generator.normal(0, 0.03, readings), 1.0,
                                    within_days=365) is not None for _ in range(1500))
    assert named / 1500 < 0.01


def test_most_adjustments_back_to_the_starting_level_are_named():
    """A second diff review: the rule that the newest must lie beyond every earlier reading named half the real
    adjustments. Readings rising 0.006 s a day with noise 0.03 s, the newest back at 0.5 s give or take the noise: at
    least 60 % named (about 70 % in the simulation), 1,000 series, a fixed seed."""
    from observatory_ops.calc.trend import newest_off_the_line

    generator = np.random.default_rng(7)
    days = np.arange(8) * 7.0

    def adjusted():
        values = 0.5 + 0.006 * days + generator.normal(0, 0.03, 8)
        values[-1] = 0.5 + generator.normal(0, 0.03)
        return values

    named = sum(newest_off_the_line(days, adjusted(), 1.0, within_days=365) is not None for _ in range(1000))
    assert named / 1000 > 0.6
