"""Condition triggers: the robust trend of recent readings and the day it reaches a limit."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike
from scipy import stats

#: Default settle-time limit after a slew, seconds: a well-tuned direct-drive telescope mount settles
#: within about 1 s (common practice, no published source).
SETTLE_TIME_LIMIT_S = 1.0
#: Servo loop rate of such a mount, Hz, for reference on the drive pages (common practice, no published
#: source): about 1 kHz.
SERVO_LOOP_HZ = 1000.0
#: Fewest readings a trend is fitted to.
MIN_READINGS = 3


@dataclass(frozen=True)
class Trend:
    """A Theil-Sen line through readings, value = intercept + slope * day, with its slope interval."""

    slope_per_day: float
    intercept: float
    slope_low: float
    slope_high: float
    n_points: int
    crossing_day: float | None
    earliest_day: float | None
    latest_day: float | None

    def value_at(self, day: float) -> float:
        return self.intercept + self.slope_per_day * day


def trend_to_limit(days: ArrayLike, values: ArrayLike, limit: float, rising: bool = True) -> Trend:
    """Fit readings robustly and extrapolate to the day they reach ``limit``.

    Method
    ------
    Theil-Sen estimator (median of pairwise slopes; Sen 1968, Theil 1950) via
    ``scipy.stats.theilslopes`` with its 95 % confidence interval on the slope. The crossing day solves
    ``intercept + slope * day = limit``; the band uses the slope's interval with the line pivoting on
    the median point, as theilslopes does. A trend that moves away from the limit has no crossing.

    Parameters
    ----------
    days : days of the readings, relative to any origin.
    values : the readings.
    limit : the limit being approached.
    rising : True when the reading grows toward the limit (settle time), False when it falls
        (reflectance, brake pressure).
    """
    days = np.asarray(days, dtype=float)
    values = np.asarray(values, dtype=float)
    if days.shape != values.shape:
        raise ValueError("days and values must have the same length")
    if len(days) < MIN_READINGS:
        raise ValueError(f"a trend needs at least {MIN_READINGS} readings, got {len(days)}")
    if not (np.isfinite(days).all() and np.isfinite(values).all()):
        raise ValueError("every reading and day must be a finite number")
    if np.ptp(days) == 0:
        raise ValueError("the readings must be taken on at least two different days")
    with np.errstate(over="ignore", invalid="ignore"):  # an overflow is caught just below
        slope, intercept, low, high = stats.theilslopes(values, days, alpha=0.95)
    if not np.isfinite([slope, intercept, low, high]).all():  # differences overflowed: absurd readings
        raise ValueError("the readings are too far apart to fit a trend")
    pivot_x, pivot_y = np.median(days), np.median(values)

    def crossing(s: float) -> float | None:
        toward = s > 0 if rising else s < 0
        if not toward:
            return None
        return float(pivot_x + (limit - pivot_y) / s)

    fast, slow = (high, low) if rising else (low, high)
    return Trend(
        slope_per_day=float(slope),
        intercept=float(intercept),
        slope_low=float(low),
        slope_high=float(high),
        n_points=len(days),
        crossing_day=crossing(slope),
        earliest_day=crossing(fast),
        latest_day=crossing(slow),
    )


#: How far the newest reading may lie from the line of the readings before it, on the side away from the limit, before
#: the page asks whether the unit was adjusted without a service logged: 3 robust standard deviations of those readings'
#: residuals (the Hampel identifier, |x - median| > 3 x 1.4826 x MAD; Leys et al. 2013, J. Exp. Soc. Psychol. 49:764,
#: recommend 3).
STEP_SPREADS = 3.0
#: The MAD's consistency constant for a normal distribution (1 / Phi^-1(3/4)), as scipy.stats.median_abs_deviation
#: with scale="normal" uses.
MAD_NORMAL = 1.482602218505602
#: Fewest readings before the newest that it is judged against. With fewer, their spread is too rough a measure: a diff
#: review's simulation of readings on a line with noise alone flagged the newest 4 to 9 % of the time with 3 to 7.
STEP_FEWEST_BEFORE = 6


def resolution(values: ArrayLike) -> float:
    """The largest power of ten, 1 at most, every value is a whole multiple of (readings rounded to 0.1 s: 0.1), to a
    millionth of it; 0 when there is none down to 1e-6 (values not rounded). Not above 1: counts that happen to be
    tens are not known to be rounded to tens."""
    values = np.asarray(values, dtype=float)
    for exponent in range(0, -7, -1):
        unit = 10.0 ** exponent
        scaled = values / unit
        if np.all(np.abs(scaled - np.round(scaled)) <= 1e-6):
            return unit
    return 0.0


@dataclass(frozen=True)
class OffTheLine:
    """A newest reading far on the good side of the readings before it (``newest_off_the_line``): how many of their
    robust spreads away, and the value their line gives on its day."""

    spreads: float
    expected: float


def newest_off_the_line(days: ArrayLike, values: ArrayLike, limit: float, rising: bool = True,
                        within_days: float | None = None) -> OffTheLine | None:
    """The newest reading when it lies far from the Theil-Sen line of the readings before it, away from ``limit``,
    the way an adjustment, cleaning or repair with no service logged puts it; None otherwise. The trend still mixes
    readings from before and after such work, and forecasts the limit from the old ones.

    Far means all of (each our own condition, common practice, no published source, but the first):
    - more than ``STEP_SPREADS`` robust spreads from the median of the earlier readings' residuals (the Hampel
      identifier), the spread (``MAD_NORMAL`` x their median absolute deviation) taken as at least the readings'
      ``resolution`` (readings rounded to 0.1 s spread by 0.1 s at least: a diff review's 0.8 then 0.7 s read as 170
      spreads);
    - back to the level the earlier line starts at, within one spread (an adjusted unit reads as it did before its
      readings rose);
    - more than half the earlier line's own rise, which moves toward the limit;
    - with at least ``STEP_FEWEST_BEFORE`` readings before it;
    - and, with ``within_days``, the trend of all the readings reaching the limit within that many days of the newest
      (where the forecast is near, and the sentence matters).
    On weekly readings with noise alone, flat or rising, this names the newest in under 1 % of series with a year as
    ``within_days``; it names about 70 % of adjustments back to the starting level (tests/test_calc_trend.py simulates
    both)."""
    days = np.asarray(days, dtype=float)
    values = np.asarray(values, dtype=float)
    if len(days) < STEP_FEWEST_BEFORE + 1 or np.ptp(days[:-1]) == 0:
        return None
    before = trend_to_limit(days[:-1], values[:-1], limit, rising)
    toward = before.slope_per_day > 0 if rising else before.slope_per_day < 0
    residuals = values[:-1] - (before.intercept + before.slope_per_day * days[:-1])
    centre = float(np.median(residuals))
    spread = max(MAD_NORMAL * float(np.median(np.abs(residuals - centre))), resolution(values))
    expected = before.value_at(float(days[-1]))
    away = (centre - (values[-1] - expected)) if rising else ((values[-1] - expected) - centre)
    start = before.value_at(float(days[0]))
    back = values[-1] <= start + spread if rising else values[-1] >= start - spread
    rise = abs(before.slope_per_day) * float(np.ptp(days[:-1]))
    if spread <= 0 or not toward or not back or away <= STEP_SPREADS * spread or away <= rise / 2:
        return None
    if within_days is not None:
        crossing = trend_to_limit(days, values, limit, rising).crossing_day
        if crossing is None or crossing - days[-1] > within_days:
            return None
    return OffTheLine(away / spread, expected)
