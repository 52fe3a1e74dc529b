"""When will a trigger reach its limit: expected usage per future night and the date it adds up.

Method
------
Expected open hours of a coming night = its dark hours (from :mod:`nights`) x ``F_m``, the open fraction of its
calendar month m: ``F_m = sum(open hours) / sum(dark hours)`` over the logged nights of month m in all past
years (above 1 where the dome opens in twilight, as to cool before dark: those hours are used too), or the
prior :data:`PRIOR_OPEN_FRACTION` while month m has fewer than :data:`MIN_NIGHTS_FOR_HISTORY` logged nights
(:func:`monthly_open_fraction`). A month whose use its darkness does not lead (``F_m`` above
:data:`DARKNESS_LEADS_UP_TO`, or no dark hours at all: a summer of twilight far from the equator) expects each coming
night at its mean open hours a logged night instead (:func:`monthly_use_by_night`; the band below still compares
such a month with its dark hours x the other years' fraction, which holds its total, not its spread over the nights).
Slews, travel and brake cycles follow from their rates per open hour, and dust from the month's mean PM10.

The forecast band comes from the relative month-to-month spread ``s``: the sample standard deviation of
``A / E - 1`` over complete past months (:func:`monthly_spread`), where A is a month's logged open hours and E its
dark hours x the open fraction of the same calendar month in the *other* years (leave-one-out,
:func:`months_left_out`). A month is never compared with a fraction fitted from itself: with one year of log every
month would match its own fraction exactly and the band would shrink to nothing. Leave-one-out cross-validation:
M. Stone, "Cross-validatory choice and assessment of statistical predictions", J. R. Statist. Soc. B 36 (1974)
111-147 (from memory); the sample standard deviation with n - 1: NIST/SEMATECH e-Handbook of Statistical Methods,
section 1.3.5.6 (from memory). Taking months as independent, the relative deviation of m months' sum is
``s / sqrt(m)`` (Bienaymé: the variance of a sum of independent terms is the sum of their variances; from
memory) (:func:`days_reached`).
"""
from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

#: Fraction of dark hours the dome is open, used for a calendar month with fewer than
#: :data:`MIN_NIGHTS_FOR_HISTORY` logged nights. A clear-sky fraction of about one half is typical of
#: small-observatory sites (common practice, no published source).
PRIOR_OPEN_FRACTION = 0.5
#: Relative month-to-month spread used when a site has too little history to measure its own: a
#: deliberately wide default of our own (a third of a month's usage), replaced by the site's own spread once
#: :data:`MIN_MONTHS_FOR_SPREAD` complete months can each be compared with the same month of other years
#: (:func:`months_left_out`: each compared month needs the same month logged in another year, so a log of fifteen
#: months at the very least, three calendar months seen twice).
PRIOR_MONTHLY_SPREAD = 0.35
#: A calendar month needs this many logged nights before its own open fraction replaces the prior; and a past
#: (year, month) needs as many before it counts in the spread. Two thirds of a month, a choice of our own: a month's
#: ratio of open to expected hours from fewer nights is mostly the weather of those nights (its noise grows as one
#: over the square root of the nights), and the spread is meant to describe whole months.
MIN_NIGHTS_FOR_HISTORY = 20
#: Complete months compared (:func:`months_left_out`) before the site's own spread replaces the prior: a standard
#: deviation from fewer is too unsteady to narrow a band (a choice of our own).
MIN_MONTHS_FOR_SPREAD = 6


#: Above this open fraction a month's use is not led by its darkness: its dome opens in twilight, or under a sky never
#: fully dark, far more than it is dark (a site at 52 N in summer), and its dark hours, few and shared unevenly over
#: the month, would expect nothing on one night and more than the whole night on another (a review of a site at
#: 52.2 N: none in June with 105 h logged, 19 h on the last night of July). Such a month is taken by the night
#: (:func:`monthly_use_by_night`). One and a half, a choice of our own: a dome that opens in twilight to cool before
#: dark stays below it in the short nights of a mid-latitude summer.
DARKNESS_LEADS_UP_TO = 1.5


def _month_sums(
    months: ArrayLike, open_hours: ArrayLike, dark_hours: ArrayLike
) -> tuple[NDArray[np.int64], NDArray[np.float64], NDArray[np.float64]]:
    """Per calendar month (index 0 = January), over the logged nights: how many, their open hours and their dark
    hours, each summed."""
    months = np.asarray(months, dtype=int)
    count = np.bincount(months - 1, minlength=12)[:12]
    sum_open = np.bincount(months - 1, weights=np.asarray(open_hours, dtype=float), minlength=12)[:12]
    sum_dark = np.bincount(months - 1, weights=np.asarray(dark_hours, dtype=float), minlength=12)[:12]
    return count, sum_open, sum_dark


def monthly_use_by_night(
    months: ArrayLike, open_hours: ArrayLike, dark_hours: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
    """The months taken by the night, not by their darkness, and their mean open hours a logged night.

    Method
    ------
    A calendar month m with :data:`MIN_NIGHTS_FOR_HISTORY` logged nights or more whose open hours are more than
    :data:`DARKNESS_LEADS_UP_TO` times its dark hours, or whose logged nights have no dark hours at all (the Sun never
    18 deg down), expects each coming night at ``sum(open hours) / (logged nights)`` of month m in all past years:
    the month's use kept, the same on each of its nights.

    Returns
    -------
    per_night : array of 12 values, index 0 = January: the mean open hours a logged night where ``by_night``, else
        NaN.
    by_night : array of 12 booleans.
    """
    count, sum_open, sum_dark = _month_sums(months, open_hours, dark_hours)
    by_night = (count >= MIN_NIGHTS_FOR_HISTORY) & (sum_open > DARKNESS_LEADS_UP_TO * sum_dark)
    per_night = np.full(12, np.nan)
    per_night[by_night] = sum_open[by_night] / count[by_night]
    return per_night, by_night


def monthly_open_fraction(
    months: ArrayLike, open_hours: ArrayLike, dark_hours: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
    """Fraction of dark hours the dome was open, per calendar month, from past nights.

    Method
    ------
    For each month m = 1..12: ``sum(open_hours) / sum(dark_hours)`` over the logged nights of that
    month in all past years: open hours per dark hour, above 1 where the dome opens in twilight (to cool before
    dark, say), which the forecast of open hours keeps (a cap at 1 would forecast a summer that opens at sunset far
    short). Months with fewer than
    :data:`MIN_NIGHTS_FOR_HISTORY` nights use :data:`PRIOR_OPEN_FRACTION` instead.

    Returns
    -------
    fraction : array of 12 values, index 0 = January.
    from_history : array of 12 booleans, False where the prior was used.
    """
    count, sum_open, sum_dark = _month_sums(months, open_hours, dark_hours)
    from_history = (count >= MIN_NIGHTS_FOR_HISTORY) & (sum_dark > 0)
    fraction = np.full(12, PRIOR_OPEN_FRACTION)
    fraction[from_history] = sum_open[from_history] / sum_dark[from_history]
    return fraction, from_history


def logged_per_month(nights: ArrayLike) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """How much history each calendar month's open fraction rests on: logged nights, and years with any.

    Parameters
    ----------
    nights : ``datetime64[D]`` dates of logged nights.

    Returns
    -------
    nights, years : arrays of 12 counts, index 0 = January.
    """
    months = np.asarray(nights, dtype="datetime64[D]").astype("datetime64[M]").astype(np.int64)  # since 1970-01
    count = np.bincount(months % 12, minlength=12)
    years = np.bincount(np.unique(months) % 12, minlength=12)  # one (year, month) pair counts one year
    return count, years


def months_left_out(
    month_keys: ArrayLike, open_hours: ArrayLike, dark_hours: ArrayLike, first_incomplete: int
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Each complete past (year, month) of the log against the same calendar month of the other years.

    Method
    ------
    Nights are grouped by (year, month). For each group g of calendar month m: ``A_g`` = its open hours and
    ``E_g = D_g x F_m(-g)``, with ``D_g`` its dark hours and ``F_m(-g)`` the open fraction of month m over the
    logged nights of every *other* year (``sum(open) / sum(dark)``, as :func:`monthly_open_fraction`: above 1 where
    the dome opens in twilight): leave-one-out, so no month is judged by a fraction made from itself. The nights of
    ``first_incomplete`` (the month still being logged) and later are left out altogether, so the night logged last
    cannot move the spread. A group is compared only when it is well logged: with at least
    :data:`MIN_NIGHTS_FOR_HISTORY` logged nights of its own, and at least as many nights of month m logged in the
    other years.

    Parameters
    ----------
    month_keys : the (year, month) of each logged night as months since January 1970
        (``datetime64[M]`` as an integer, so ``key % 12`` is the calendar month, 0 = January).
    open_hours, dark_hours : of each logged night.
    first_incomplete : the month key from which months are not complete yet; they and later ones are left out.

    Returns
    -------
    actual, expected : ``A_g`` and ``E_g`` of each compared group, oldest first (for :func:`monthly_spread`).
    """
    keys = np.asarray(month_keys, dtype=np.int64)
    complete = keys < first_incomplete
    keys = keys[complete]
    open_h = np.asarray(open_hours, dtype=float)[complete]
    dark_h = np.asarray(dark_hours, dtype=float)[complete]
    if keys.size == 0:
        return np.zeros(0), np.zeros(0)
    groups, index = np.unique(keys, return_inverse=True)
    nights = np.bincount(index)
    actual = np.bincount(index, weights=open_h)
    dark = np.bincount(index, weights=dark_h)
    calendar = groups % 12
    other_nights = np.bincount(calendar, weights=nights, minlength=12)[calendar] - nights
    other_open = np.bincount(calendar, weights=actual, minlength=12)[calendar] - actual
    other_dark = np.bincount(calendar, weights=dark, minlength=12)[calendar] - dark
    compared = (nights >= MIN_NIGHTS_FOR_HISTORY) & (other_nights >= MIN_NIGHTS_FOR_HISTORY) & (other_dark > 0)
    fraction = other_open[compared] / other_dark[compared]
    return actual[compared], dark[compared] * fraction


def monthly_spread(actual_per_month: ArrayLike, expected_per_month: ArrayLike) -> float:
    """Relative month-to-month variation of usage around the model.

    Method
    ------
    The sample standard deviation (n - 1) of ``actual / expected - 1`` over past months with non-zero
    expectation (from :func:`months_left_out`). Needs at least :data:`MIN_MONTHS_FOR_SPREAD` months; otherwise
    :data:`PRIOR_MONTHLY_SPREAD`.
    """
    actual = np.asarray(actual_per_month, dtype=float)
    expected = np.asarray(expected_per_month, dtype=float)
    ok = expected > 0
    if ok.sum() < MIN_MONTHS_FOR_SPREAD:
        return PRIOR_MONTHLY_SPREAD
    return float(np.std(actual[ok] / expected[ok] - 1.0, ddof=1))


def days_reached(
    remaining: ArrayLike, expected_per_day: ArrayLike, spread: float = 0.0, start: ArrayLike | None = None
) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
    """Day offsets at which expected usage adds up to each ``remaining`` amount, with a band.

    Method
    ------
    Day 0 is the first forecast day, and each amount counts from its own ``start`` day s (0 when not given):
    ``C_s(k)`` is the expected usage of days s to k. The forecast is the first day k >= s with
    ``C_s(k) >= remaining``. Monthly deviations from the model are taken as independent with relative standard
    deviation ``spread`` (:func:`monthly_spread`), so over ``m = (k - s + 1) / 30.44`` months the sum's relative
    deviation is ``spread / sqrt(max(m, 1))``; the earliest day is the first with ``C_s(k) * (1 + that) >=
    remaining`` and the latest the first with ``C_s(k) * (1 - that) >= remaining``: a one-sigma band (about
    68 %). Vectorised over ``remaining`` by binary search on the cumulative curves, one set of curves per
    distinct start.

    Returns
    -------
    forecast, earliest, latest : integer day offsets from day 0; -1 where the horizon is too short; the
    amount's start where nothing remains.
    """
    per_day = np.asarray(expected_per_day, dtype=float)
    if np.any(per_day < 0):
        raise ValueError("expected usage per day cannot be negative")
    remaining = np.atleast_1d(np.asarray(remaining, dtype=float))
    starts = np.broadcast_to(np.asarray(0 if start is None else start, dtype=np.int64), remaining.shape)
    if np.any(starts < 0):
        raise ValueError("a start day cannot be before day 0")
    days = np.empty((3, remaining.size), dtype=np.int64)
    for s in np.unique(starts):  # usually one: every amount counting from day 0
        chosen = starts == s
        found = _days_reached_from_zero(remaining[chosen], per_day[s:], spread)
        days[:, chosen] = np.where(found >= 0, found + s, -1)
    return days[0], days[1], days[2]


def _days_reached_from_zero(
    remaining: NDArray[np.float64], per_day: NDArray[np.float64], spread: float
) -> NDArray[np.int64]:
    """:func:`days_reached` for amounts that all count from day 0: forecast, earliest and latest as three rows."""
    cumulative = np.cumsum(per_day)
    months = np.maximum(np.arange(1, len(per_day) + 1) / 30.44, 1.0)
    relative = spread / np.sqrt(months)

    def first_day(curve: NDArray[np.float64]) -> NDArray[np.int64]:
        monotone = np.maximum.accumulate(curve) if curve.size else curve
        index = np.searchsorted(monotone, remaining, side="left")
        index = np.where(index >= len(curve), -1, index)
        return np.where(remaining <= 0, 0, index).astype(np.int64)

    return np.array([
        first_day(cumulative),
        first_day(cumulative * (1.0 + relative)),
        first_day(cumulative * np.maximum(1.0 - relative, 0.0)),
    ], dtype=np.int64).reshape(3, remaining.size)
