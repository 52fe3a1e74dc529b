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


#: How far the newest reading may lie from the trend, on the side away from the limit, before the page asks whether
#: the unit was adjusted without a service logged: 3 robust standard deviations of the other readings' residuals (the
#: Hampel identifier, |x - median| > 3 x 1.4826 x MAD; Leys et al. 2013, J. Exp. Soc. Psychol. 49:764, recommend 3).
STEP_SPREADS = 3.0
#: The MAD's consistency constant for a normal distribution (1 / Phi^-1(3/4)), as scipy.stats.median_abs_deviation
#: with scale="normal" uses.
MAD_NORMAL = 1.482602218505602


def newest_off_the_line(days: ArrayLike, values: ArrayLike, fit: Trend, rising: bool = True) -> float | None:
    """How many robust spreads the newest reading lies from ``fit``, away from the limit, when more than
    ``STEP_SPREADS``; None otherwise (or with fewer than ``MIN_READINGS`` others to measure the spread by).

    The residuals (reading minus the line) of all readings but the newest give the centre (their median) and the
    spread (``MAD_NORMAL`` times their median absolute deviation). A newest reading far on the good side of the line is
    most often a unit adjusted, cleaned or repaired with no service logged: the trend still mixes readings from before
    and after, and forecasts the limit from the old ones. A spread of 0 (the others exactly on a line) counts any
    departure as far."""
    days = np.asarray(days, dtype=float)
    values = np.asarray(values, dtype=float)
    if len(days) < MIN_READINGS + 1:
        return None
    residuals = values - (fit.intercept + fit.slope_per_day * days)
    others = residuals[:-1]
    centre = float(np.median(others))
    spread = MAD_NORMAL * float(np.median(np.abs(others - centre)))
    away = (centre - residuals[-1]) if rising else (residuals[-1] - centre)
    if away <= 0:
        return None
    if spread == 0:
        return float("inf")
    return away / spread if away > STEP_SPREADS * spread else None
