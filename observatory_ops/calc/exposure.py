"""Usage accumulated since a service, and the dust weighting of open-dome hours.

Wear of fans, filters, seals and optical surfaces follows how long the dome was open and how dirty
the air was while it was open. A dust-weighted open hour counts an hour in clean air as one and an
hour in dusty air as more than one.
"""
from __future__ import annotations

import datetime as dt

import numpy as np
from numpy.typing import ArrayLike, NDArray

#: Clean-air reference for PM10, ug/m3: the WHO 2005 air-quality guideline for the annual mean of PM10
#: (from memory). Air at or below it weighs one hour per open hour.
CLEAN_AIR_PM10_UGM3 = 20.0

#: The most dust sensitivity a plan or a mirror takes. Our own bound, no published source: the catalogue's plans use
#: 0.5 to 1.5, and at 10 an open hour at twice the clean-air PM10 already counts as 11; a bad-input review's 1e300
#: counted 1e303 dust-weighted hours.
DUST_SENSITIVITY_MAX = 10


def dust_weight(pm10_ugm3: ArrayLike, sensitivity: float) -> NDArray[np.float64]:
    """Weight of one open hour in air with the given PM10 concentration.

    Method
    ------
    ``w = 1 + s * max(0, PM10 - PM_ref) / PM_ref`` with ``PM_ref`` = :data:`CLEAN_AIR_PM10_UGM3` and
    ``s`` the plan's sensitivity (0: dust does not matter, 1: an hour at twice the reference counts as
    two). The weight never falls below 1, so clean air still wears at the plain hourly rate, and it
    grows linearly with the excess over clean air. A missing reading (NaN) counts as clean air.
    This is our own model; its only claim is monotony, which the tests check.

    Parameters
    ----------
    pm10_ugm3 : array of mean PM10 concentrations in ug/m3 while the dome was open.
    sensitivity : the plan's dust sensitivity ``s``, >= 0.
    """
    if sensitivity < 0:
        raise ValueError(f"dust sensitivity must be 0 or more, not {sensitivity}")
    return 1.0 + sensitivity * dust_excess(pm10_ugm3)


def dust_excess(pm10_ugm3: ArrayLike) -> NDArray[np.float64]:
    """``max(0, PM10 - PM_ref) / PM_ref``, the excess over clean air in :func:`dust_weight` (NaN: clean air, 0).

    The weight is linear in it, so the mean weight of many hours is ``1 + s * (their mean excess)``, whatever ``s``;
    it is not the weight of their mean PM10, since the excess is 0 below the reference (a month of nights at 10 and
    30 ug/m3 averages 20, clean air, while half its hours weigh more than one)."""
    pm10 = np.nan_to_num(np.asarray(pm10_ugm3, dtype=float), nan=CLEAN_AIR_PM10_UGM3)
    return np.maximum(pm10 - CLEAN_AIR_PM10_UGM3, 0.0) / CLEAN_AIR_PM10_UGM3


def dust_weight_formula(sensitivity: float) -> str:
    """:func:`dust_weight` in words, with a plan's sensitivity in it, for the basis a page shows."""
    ref = f"{CLEAN_AIR_PM10_UGM3:g}"
    return (f"each open hour weighs 1 + {sensitivity:g} x max(0, PM10 - {ref}) / {ref} (PM10 in µg/m³, "
            f"{ref} = clean air; {sensitivity:g} = this plan's dust sensitivity)")


def dust_weighted_hours(open_hours: ArrayLike, pm10_ugm3: ArrayLike, sensitivity: float) -> NDArray[np.float64]:
    """Dust-weighted open hours per night: ``open_hours * dust_weight(pm10, s)`` (see :func:`dust_weight`)."""
    return np.asarray(open_hours, dtype=float) * dust_weight(pm10_ugm3, sensitivity)


def accumulated_since(
    nights: NDArray[np.datetime64], per_night: ArrayLike, since: NDArray[np.datetime64]
) -> NDArray[np.float64]:
    """Sum of a per-night quantity over all nights on or after each ``since`` date.

    Method
    ------
    One cumulative sum over the sorted nights and a binary search per start date, so thousands of
    plans sharing one site's log cost one pass over the log. A service done on day D resets the count
    before the night of D (the night belongs to the local date of its evening).

    Parameters
    ----------
    nights : sorted ``datetime64[D]`` array of logged nights.
    per_night : the quantity per night (open hours, slews, ...), same length as ``nights``.
    since : ``datetime64[D]`` array of start dates, one per plan.
    """
    totals = running_totals(_per_night(nights, per_night))
    return totals[-1] - total_before(nights, totals, since)


def _per_night(nights: ArrayLike, per_night: ArrayLike) -> NDArray[np.float64]:
    values = np.asarray(per_night, dtype=float)
    if values.shape != np.shape(nights):
        raise ValueError("per_night must have one value per night")
    return values


def running_totals(per_night: ArrayLike) -> NDArray[np.float64]:
    """The running totals every count here is read from: ``totals[i]`` is the sum of the first ``i`` nights' values
    (``totals[0] = 0``, ``totals[-1]`` the whole log). Computed once per log and read with :func:`total_before` and
    :func:`total_between`, a binary search each, so a caller asking many dates of one log sums it once."""
    return np.concatenate([[0.0], np.cumsum(np.asarray(per_night, dtype=float))])


def total_before(nights: ArrayLike, totals: NDArray[np.float64], day: ArrayLike) -> NDArray[np.float64]:
    """Sum of the nights logged before each ``day``, the night of ``day`` itself not counted.

    ``nights`` is the sorted ``datetime64[D]`` log and ``totals`` its :func:`running_totals`. The same rule as
    :func:`accumulated_since`: a night belongs to the local date of its evening, so a service on day D resets the
    count before the night of D, and ``total_before(D2) - total_before(D1)`` counts the nights of D1 up to the night
    before D2. A scalar ``day`` gives a scalar.
    """
    index = np.searchsorted(np.asarray(nights, dtype="datetime64[D]"), np.asarray(day, dtype="datetime64[D]"))
    return totals[index]


def total_between(
    nights: ArrayLike, totals: NDArray[np.float64], since: ArrayLike, until: ArrayLike
) -> NDArray[np.float64]:
    """Sum over the nights on or after ``since`` and before ``until``: from the night of ``since`` (a service that
    day resets the count before its night, as in :func:`accumulated_since`) to the night before ``until`` (a
    measurement made on day D has seen the nights before D). Nothing where ``until`` is on or before ``since``.
    ``nights`` and ``totals`` as for :func:`total_before`; ``since`` and ``until`` broadcast together."""
    nights = np.asarray(nights, dtype="datetime64[D]")
    start = np.searchsorted(nights, np.asarray(since, dtype="datetime64[D]"))
    end = np.searchsorted(nights, np.asarray(until, dtype="datetime64[D]"))
    return totals[np.maximum(end, start)] - totals[start]


def running_since(
    nights: NDArray[np.datetime64], per_night: ArrayLike, since: dt.date | np.datetime64
) -> tuple[NDArray[np.datetime64], NDArray[np.float64]]:
    """Each logged night on or after ``since`` with the sum from the night of ``since`` through it: the running
    count a chart draws, by the rule of :func:`accumulated_since` (a service on day D resets the count before the
    night of D). One binary search and one cumulative sum of the nights counted.

    Parameters
    ----------
    nights : sorted ``datetime64[D]`` array of logged nights.
    per_night : the quantity per night, same length as ``nights``.
    since : the one start date.
    """
    nights = np.asarray(nights, dtype="datetime64[D]")
    values = _per_night(nights, per_night)
    first = int(np.searchsorted(nights, np.datetime64(since, "D")))
    return nights[first:], np.cumsum(values[first:])


def reached_on(
    nights: NDArray[np.datetime64], per_night: ArrayLike, since: NDArray[np.datetime64], limit: ArrayLike
) -> NDArray[np.datetime64]:
    """The night on which the sum from each ``since`` date first reached its ``limit`` (NaT: not yet).

    Method
    ------
    The same cumulative sum as :func:`accumulated_since`; a binary search for the first night whose
    running total since the start date is at least the limit. Per-night values must not be negative.
    """
    values = np.asarray(per_night, dtype=float)
    if np.any(values < 0):
        raise ValueError("per-night values cannot be negative")
    nights = np.asarray(nights, dtype="datetime64[D]")
    totals = running_totals(values)
    first = np.searchsorted(nights, np.asarray(since, dtype="datetime64[D]"))
    index = np.searchsorted(totals, totals[first] + np.asarray(limit, dtype=float), side="left")
    found = index <= len(nights)
    out = np.full(len(first), np.datetime64("NaT"), dtype="datetime64[D]")
    out[found] = nights[np.maximum(index[found] - 1, 0)]
    return out
