"""Condition triggers: the Theil-Sen trend and the day it reaches a limit (no database)."""
from __future__ import annotations

import itertools
import statistics

import numpy as np
import pytest

from observatory_ops.calc.trend import trend_to_limit


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
