"""When will a trigger reach its limit: expected usage per future night and the date it adds up.

The expected usage of each coming night is that night's dark hours (from :mod:`nights`) times the
fraction of dark hours the dome was open in the same calendar month of past years; slews, travel and
brake cycles follow from their rates per open hour, and dust from the month's mean PM10.
"""
from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

#: Fraction of dark hours the dome is open, used for a calendar month with fewer than
#: :data:`MIN_NIGHTS_FOR_HISTORY` logged nights. A clear-sky fraction of about one half is typical of
#: small-observatory sites (common practice, no published source).
PRIOR_OPEN_FRACTION = 0.5
#: Relative month-to-month spread used when a site has too little history to measure its own: a
#: deliberately wide default of our own (a third of a month's usage), replaced by the site's own spread
#: after six logged months.
PRIOR_MONTHLY_SPREAD = 0.35
#: A calendar month needs this many logged nights before its own open fraction replaces the prior.
MIN_NIGHTS_FOR_HISTORY = 20


def monthly_open_fraction(
    months: ArrayLike, open_hours: ArrayLike, dark_hours: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
    """Fraction of dark hours the dome was open, per calendar month, from past nights.

    Method
    ------
    For each month m = 1..12: ``sum(open_hours) / sum(dark_hours)`` over the logged nights of that
    month in all past years, capped at 1 (a dome may open in twilight). Months with fewer than
    :data:`MIN_NIGHTS_FOR_HISTORY` nights use :data:`PRIOR_OPEN_FRACTION` instead.

    Returns
    -------
    fraction : array of 12 values, index 0 = January.
    from_history : array of 12 booleans, False where the prior was used.
    """
    months = np.asarray(months, dtype=int)
    open_h = np.asarray(open_hours, dtype=float)
    dark_h = np.asarray(dark_hours, dtype=float)
    count = np.bincount(months - 1, minlength=12)[:12]
    sum_open = np.bincount(months - 1, weights=open_h, minlength=12)[:12]
    sum_dark = np.bincount(months - 1, weights=dark_h, minlength=12)[:12]
    from_history = (count >= MIN_NIGHTS_FOR_HISTORY) & (sum_dark > 0)
    fraction = np.full(12, PRIOR_OPEN_FRACTION)
    fraction[from_history] = np.minimum(sum_open[from_history] / sum_dark[from_history], 1.0)
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


def monthly_spread(actual_per_month: ArrayLike, expected_per_month: ArrayLike) -> float:
    """Relative month-to-month variation of usage around the model.

    Method
    ------
    The sample standard deviation of ``actual / expected - 1`` over past months with non-zero
    expectation. Needs at least six months; otherwise :data:`PRIOR_MONTHLY_SPREAD`.
    """
    actual = np.asarray(actual_per_month, dtype=float)
    expected = np.asarray(expected_per_month, dtype=float)
    ok = expected > 0
    if ok.sum() < 6:
        return PRIOR_MONTHLY_SPREAD
    return float(np.std(actual[ok] / expected[ok] - 1.0, ddof=1))


def days_reached(remaining: ArrayLike, expected_per_day: ArrayLike, spread: float = 0.0) -> tuple[
    NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]
]:
    """Day offsets at which expected usage adds up to each ``remaining`` amount, with a band.

    Method
    ------
    ``C(k)`` is the cumulative expected usage by the end of day k (day 0 = the first forecast day).
    The forecast is the first day with ``C(k) >= remaining``. Monthly deviations from the model are
    taken as independent with relative standard deviation ``spread`` (:func:`monthly_spread`), so over
    ``m = (k + 1) / 30.44`` months the sum's relative deviation is ``spread / sqrt(max(m, 1))``; the
    earliest day is the first with ``C(k) * (1 + that) >= remaining`` and the latest the first with
    ``C(k) * (1 - that) >= remaining``: a one-sigma band (about 68 %). Vectorised over ``remaining``
    by binary search on the cumulative curves.

    Returns
    -------
    forecast, earliest, latest : integer day offsets; -1 where the horizon is too short; 0 where
    nothing remains.
    """
    per_day = np.asarray(expected_per_day, dtype=float)
    if np.any(per_day < 0):
        raise ValueError("expected usage per day cannot be negative")
    remaining = np.atleast_1d(np.asarray(remaining, dtype=float))
    cumulative = np.cumsum(per_day)
    months = np.maximum(np.arange(1, len(per_day) + 1) / 30.44, 1.0)
    relative = spread / np.sqrt(months)

    def first_day(curve: NDArray[np.float64]) -> NDArray[np.int64]:
        monotone = np.maximum.accumulate(curve) if curve.size else curve
        index = np.searchsorted(monotone, remaining, side="left")
        index = np.where(index >= len(curve), -1, index)
        return np.where(remaining <= 0, 0, index).astype(np.int64)

    return (
        first_day(cumulative),
        first_day(cumulative * (1.0 + relative)),
        first_day(cumulative * np.maximum(1.0 - relative, 0.0)),
    )
