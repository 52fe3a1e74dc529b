"""Downtime windows: what each coming night costs to lose, and the cheapest run of consecutive nights.

A recoat (or any long job) takes the telescope down for a number of consecutive days, each of which
loses that day's night. A night's cost is the observing it would have given: its moonless dark hours
(from :mod:`nights`) times the fraction of dark hours the dome was open in that calendar month of past
years (from :mod:`forecast`), with booked observing runs made expensive or blocked. The cheapest window
is the run of consecutive nights with the smallest total cost, found with cumulative sums; the
alternatives are the next cheapest runs that do not overlap the ones already chosen.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray


def night_cost(
    moonless_dark_hours: ArrayLike,
    open_fraction: ArrayLike,
    booked: ArrayLike | None = None,
    booked_weight: float = np.inf,
) -> NDArray[np.float64]:
    """The cost of losing each night: the expected usable moonless open hours lost.

    Method
    ------
    ``cost = moonless_dark_hours x open_fraction``: the hours with the Sun below -18 deg and the Moon
    down, times the chance that the dome would have been open (the fraction of dark hours it was open in
    the same calendar month of past years, :func:`forecast.monthly_open_fraction`). Moonless hours are
    the measure because a window taken in bright time spares the faint-object work most small
    observatories schedule in dark time (common practice, no published source). A night inside a booked
    observing run costs ``booked_weight`` times as much; with the default ``np.inf`` it is blocked: its
    cost is infinite even when it has no moonless hours, so no window may contain it.

    Parameters
    ----------
    moonless_dark_hours : hours per night, >= 0 (``NightTable.moonless_dark_hours``).
    open_fraction : per night, 0..1: the open fraction of the month the night falls in.
    booked : per night, True inside a booked observing run; None for no bookings.
    booked_weight : factor >= 1 for booked nights; ``np.inf`` blocks them.

    Returns
    -------
    Cost per night, hours; ``inf`` for blocked nights.

    Raises
    ------
    ValueError
        When the arrays are not one-dimensional or differ in length, when hours are negative or not
        finite, a fraction lies outside 0..1, or ``booked_weight`` is below 1 or not a number.
    """
    hours = _numbers("moonless dark hours", moonless_dark_hours)
    fraction = _numbers("open fraction", open_fraction, hours.size)
    if not np.all(np.isfinite(hours) & (hours >= 0)):
        raise ValueError("moonless dark hours must be finite and not negative")
    if not np.all((fraction >= 0) & (fraction <= 1)):
        raise ValueError("open fraction must lie between 0 and 1 on every night")
    cost = hours * fraction
    if booked is None:
        return cost
    in_run = _per_night("booked", booked, hours.size)
    if in_run.dtype != np.bool_:
        raise ValueError(f"booked must hold True or False per night, not values of type {in_run.dtype}")
    if not isinstance(booked_weight, (int, float, np.integer, np.floating)) or not booked_weight >= 1:
        raise ValueError(f"booked weight must be a number of at least 1 (a booked night never costs less), "
                         f"not {booked_weight!r}")
    # inf x 0 would be NaN on a booked night without moonless hours; a blocked night is blocked regardless.
    return np.where(in_run, np.inf if math.isinf(booked_weight) else cost * booked_weight, cost)


@dataclass(frozen=True)
class Window:
    """A run of consecutive nights: indices ``start_index`` .. ``start_index + days - 1`` of the cost array.

    ``cost`` is the sum of their costs (expected usable moonless open hours lost).
    """

    start_index: int
    days: int
    cost: float


def cheapest_windows(cost: ArrayLike, days: int, alternatives: int = 3) -> list[Window]:
    """The cheapest run of ``days`` consecutive nights, then up to ``alternatives`` more, cheapest first.

    Method
    ------
    Sliding-window sums from one cumulative sum, ``S[i] = C[i + days] - C[i]`` with ``C`` the cumulative
    cost from 0; blocked (infinite) nights are counted by a second cumulative sum, so a window holding
    one is never chosen and the infinities never enter the subtraction. The cheapest window is the
    smallest ``S`` (the earliest one on a tie); each alternative is the cheapest window that overlaps
    none chosen before it (windows starting fewer than ``days`` apart overlap): a greedy choice, so the
    windows come out cheapest first. Fewer alternatives come back when the horizon holds no more.

    Parameters
    ----------
    cost : cost per night, >= 0, ``inf`` for a blocked night (:func:`night_cost`).
    days : length of the window, 1..len(cost).
    alternatives : how many further windows to offer besides the cheapest, >= 0.

    Returns
    -------
    list of Window, the cheapest first.

    Raises
    ------
    ValueError
        When ``cost`` is not one-dimensional or holds negative or NaN values, when ``days`` is below 1
        or longer than the horizon, when ``alternatives`` is negative, or when every window of ``days``
        contains a blocked night.
    """
    per_night = _numbers("cost", cost)
    if np.any(np.isnan(per_night)) or np.any(per_night < 0):
        raise ValueError("night costs must not be negative or NaN (use inf for a blocked night)")
    _check_whole("window length", days, 1)
    _check_whole("number of alternatives", alternatives, 0)
    if days > per_night.size:
        raise ValueError(f"a window of {days} days is longer than the horizon of {per_night.size} days")

    blocked = np.isinf(per_night)
    sums = _window_sums(np.where(blocked, 0.0, per_night), days)
    candidates = np.where(_window_sums(blocked.astype(np.int64), days) == 0, sums, np.inf)
    if np.all(np.isinf(candidates)):
        raise ValueError(
            f"every window of {days} days contains a blocked night (a booked observing run): "
            "shorten the window, lengthen the horizon or give booked nights a finite weight"
        )
    chosen = []
    for _ in range(alternatives + 1):
        start = int(np.argmin(candidates))
        if np.isinf(candidates[start]):
            break
        chosen.append(Window(start_index=start, days=days, cost=float(sums[start])))
        candidates[max(start - days + 1, 0) : start + days] = np.inf
    return chosen


@dataclass(frozen=True)
class Phase:
    """One step of a downtime job, the whole days it takes, and the kind of hands-on work it is
    ("" for a step without work at the telescope, such as transport)."""

    name: str
    days: int
    work: str = ""


#: The steps of recoating a primary mirror and their usual lengths in days for a small observatory's
#: 0.5-2 m mirror coated at an outside plant a day's drive away (common practice, no published source).
RECOAT_PHASES: tuple[Phase, ...] = (
    Phase("removal", 2, "removal"),
    Phase("transport", 1),
    Phase("strip and coat", 3, "coating"),
    Phase("return", 1),
    Phase("reinstall", 2, "reinstall"),
    Phase("realignment and measurement", 3, "realignment"),
)


def total_days(phases: Iterable[Phase]) -> int:
    """Days of downtime for a job made of ``phases`` done one after another: the sum of their days.

    Raises
    ------
    ValueError
        When a phase's days are not a whole number or negative (naming the phase), or the total is zero.
    """
    listed = list(phases)
    for phase in listed:
        _check_whole(f"days of phase {phase.name!r}", phase.days, 0)
    total = sum(phase.days for phase in listed)
    if total == 0:
        raise ValueError("the phases add up to no days at all: give at least one phase a duration")
    return total


def _window_sums(values: NDArray, days: int) -> NDArray:
    cumulative = np.concatenate(([0], np.cumsum(values)))
    return cumulative[days:] - cumulative[:-days]


def _per_night(name: str, values: ArrayLike, nights: int | None = None) -> NDArray:
    array = np.asarray(values)
    if array.ndim != 1:
        raise ValueError(f"{name} must be a one-dimensional array with one value per night")
    if nights is not None and array.size != nights:
        raise ValueError(f"{name} has {array.size} values for {nights} nights")
    return array


def _numbers(name: str, values: ArrayLike, nights: int | None = None) -> NDArray[np.float64]:
    array = _per_night(name, values, nights)
    if not (np.issubdtype(array.dtype, np.integer) or np.issubdtype(array.dtype, np.floating)):
        raise ValueError(f"{name} must hold real numbers, not values of type {array.dtype}")
    return array.astype(np.float64)


def _check_whole(name: str, value: object, smallest: int) -> None:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise ValueError(f"{name} must be a whole number, not {value!r}")
    if value < smallest:
        raise ValueError(f"{name} must be at least {smallest}, not {value}")
