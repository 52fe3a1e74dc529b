"""Downtime windows: what each coming night costs to lose, and the cheapest run of consecutive nights.

A recoat (or any long job) takes the telescope down for a number of consecutive days, each of which
loses that day's night. A night's cost is the observing it would have given: its moonless dark hours
(from :mod:`nights`) times the fraction of dark hours the dome was open in that calendar month of past
years (from :mod:`forecast`), with booked observing runs made expensive or blocked. The cheapest window
is the run of consecutive nights with the smallest total cost, found with cumulative sums; the
alternatives are the next cheapest runs that do not overlap the ones already chosen.

The work our own crew does at the telescope (removal, reinstall, realignment) is done on the crew's working
days only: its working weekdays, less any listed day off (a public holiday, a site closure). Such a phase starts
on a working day and pauses over days off, and the telescope stays down meanwhile, so a downtime's length, and
the nights it loses, depend on the day it begins.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Iterable
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


@dataclass(frozen=True)
class Phase:
    """One step of a downtime job, the whole days it takes, and the kind of hands-on work it is
    ("" for a step without work at the telescope, such as transport)."""

    name: str
    days: int
    work: str = ""

    @property
    def needs_crew(self) -> bool:
        """True for work our own crew does at the telescope (:data:`CREW_WORK`), done on its working days."""
        return self.work in CREW_WORK


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


#: Short names of the ISO weekdays, Monday (1) to Sunday (7), as ``datetime.date.isoweekday`` numbers them.
WEEKDAY_NAMES: tuple[str, ...] = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")
EVERY_DAY: frozenset[int] = frozenset(range(1, 8))

#: The kind of work (``Phase.work``) of a downtime job our crew does at the telescope that is none of a recoat's
#: steps, such as the ``windows`` command's job of N working days.
TELESCOPE_WORK = "telescope work"

#: The kinds of work (``Phase.work``) our own crew does at the telescope. The coating is done at an outside
#: plant, and the mirror carried there and back by whoever drives it, on their own days: those phases run on
#: calendar days (common practice, no published source).
CREW_WORK: frozenset[str] = frozenset({"removal", "reinstall", "realignment", TELESCOPE_WORK})


def crew_weekdays_from(digits: str) -> frozenset[int]:
    """The crew's working days from their ISO weekday digits, e.g. ``"12345"`` for Monday to Friday.

    Parameters
    ----------
    digits : one digit per working day, 1 (Monday) to 7 (Sunday) as ISO 8601 and ``datetime.date.isoweekday``
        number them, each once, in any order.

    Returns
    -------
    frozenset of int: the ISO weekday numbers of the working days.

    Raises
    ------
    ValueError
        Naming the crew weekdays, when ``digits`` is empty, holds anything but the digits 1 to 7, or gives a
        day twice.
    """
    if not digits:
        raise ValueError("crew weekdays must give at least one working day, as ISO weekday digits "
                         "(1 Monday to 7 Sunday; 12345 for Monday to Friday)")
    wrong = sorted({c for c in digits if c not in "1234567"})
    if wrong:
        raise ValueError(f"crew weekdays may hold only the digits 1 (Monday) to 7 (Sunday), not "
                         f"{', '.join(repr(c) for c in wrong)}")
    twice = sorted({c for c in digits if digits.count(c) > 1})
    if twice:
        raise ValueError(f"crew weekdays give {', '.join(WEEKDAY_NAMES[int(c) - 1] for c in twice)} more than once: "
                         "give each working day once")
    return frozenset(int(c) for c in digits)


def weekdays_text(days: Iterable[int]) -> str:
    """Weekdays in short words, a run of three or more as a range: ``{1, 2, 3, 4, 5}`` is "Mon–Fri",
    ``{1, 3, 5, 6}`` "Mon, Wed, Fri, Sat"."""
    runs: list[list[int]] = []
    for day in sorted(set(days)):
        if runs and day == runs[-1][-1] + 1:
            runs[-1].append(day)
        else:
            runs.append([day])
    parts = []
    for run in runs:
        names = [WEEKDAY_NAMES[day - 1] for day in run]
        parts.extend([f"{names[0]}–{names[-1]}"] if len(run) >= 3 else names)
    return ", ".join(parts)


@dataclass(frozen=True)
class PhaseDays:
    """Where one phase falls: its first and last day, counted from the day the work may begin (day 0).

    ``last`` is ``first - 1`` for a phase of no days. The days between ``first`` and ``last`` include any
    days off a crew phase pauses over.
    """

    phase: Phase
    first: int
    last: int


def phase_days(
    phases: Iterable[Phase], first_weekday: int, crew_days: Iterable[int] = EVERY_DAY, *, days_off: Iterable[int] = ()
) -> list[PhaseDays]:
    """Lay ``phases`` one after another from day 0, each phase our crew does on the crew's working days.

    Method
    ------
    Each phase begins the day after the one before it ends. A phase of crew work (:attr:`Phase.needs_crew`)
    begins on the first working day from then and takes ``days`` working days, pausing over days off; any
    other phase takes ``days`` calendar days. A working day is one of ``crew_days`` that is not in
    ``days_off``. Once the first phase has begun, days off waited through or paused over pass with the
    telescope still down. The days are walked one at a time, so any pattern of days off is laid alike.

    Parameters
    ----------
    phases : the steps of the job, in order.
    first_weekday : ISO weekday of day 0, 1 (Monday) to 7 (Sunday) (``datetime.date.isoweekday``).
    crew_days : the crew's working days as ISO weekday numbers (:func:`crew_weekdays_from`).
    days_off : whole days the crew is off besides the weekdays outside ``crew_days`` (public holidays, site
        closures), as day numbers counted from day 0, each at least 0.

    Returns
    -------
    list of PhaseDays, one per phase, in order.

    Raises
    ------
    ValueError
        When a phase's days are not a whole number of at least 0 or all phases add up to none
        (:func:`total_days`), ``first_weekday`` is not 1..7, ``crew_days`` is empty or holds a number
        outside 1..7, or a day off is not a whole number of at least 0.
    """
    listed = list(phases)
    total_days(listed)
    return _laid(listed, 0, _crew_calendar(first_weekday, crew_days, days_off))


def cheapest_crew_windows(
    cost: ArrayLike,
    phases: Iterable[Phase],
    first_weekday: int,
    crew_days: Iterable[int] = EVERY_DAY,
    alternatives: int = 3,
    *,
    days_off: Iterable[int] = (),
    lost_from_start: bool = False,
) -> list[Window]:
    """The cheapest downtime for ``phases`` done on the crew's working days, then up to ``alternatives`` more.

    Method
    ------
    The phases are laid (:func:`phase_days`) from every night ``i`` of the horizon, giving the downtime's
    length ``L_i``; no window begins on a night where the first phase would wait for the crew (the window
    begun on the day the crew comes is that one). The cost of the window begun on night ``i`` is
    ``C[i + L_i] - C[i]`` from one cumulative sum ``C`` of the costs from 0 (:func:`_cheapest`): the nights of days
    off inside the downtime, weekly or listed, are lost too and count in it. The cheapest window is the smallest
    such cost (the earliest on a tie); each alternative is the cheapest window that overlaps none chosen before it:
    a greedy choice, so the windows come out cheapest first. Fewer alternatives come back when the horizon holds no
    more. With every day a working day and no day off, or no crew phase, every length is :func:`total_days`: the
    plain search of that many consecutive nights.

    With ``lost_from_start`` the telescope is out of service from night 0 whatever the window (its mirror already
    out): a window begun on night ``i`` loses every night to its end, ``C[i + L_i] - C[0]``, so the window that ends
    first is the cheapest, and a blocked night before a window blocks it as one inside it does.

    Parameters
    ----------
    cost : cost per night, >= 0, ``inf`` for a blocked night (:func:`night_cost`).
    phases : the steps of the job, in order (:data:`RECOAT_PHASES`).
    first_weekday : ISO weekday of night 0 of ``cost``, 1 (Monday) to 7 (Sunday).
    crew_days : the crew's working days as ISO weekday numbers (:func:`crew_weekdays_from`).
    alternatives : how many further windows to offer besides the cheapest, >= 0.
    days_off : whole days the crew is off besides the weekdays outside ``crew_days`` (public holidays, site
        closures), as night numbers of ``cost`` (0 is its first night), each at least 0.
    lost_from_start : count each window's cost from night 0, not from its own first night (above).

    Returns
    -------
    list of Window, the cheapest first; a window's ``days`` are the nights it loses, days off included.

    Raises
    ------
    ValueError
        On bad costs (not one-dimensional, negative or NaN), bad phases, weekday, crew days or days off as
        :func:`phase_days`, a negative ``alternatives``, an empty horizon, when no downtime begun with the crew
        in the horizon ends within it, or when every window contains a blocked night.
    """
    per_night = _costs(cost)
    _check_whole("number of alternatives", alternatives, 0)
    listed = list(phases)
    total_days(listed)
    works = _crew_calendar(first_weekday, crew_days, days_off)
    if per_night.size == 0:
        raise ValueError("the horizon holds no nights: give the cost of at least one night")
    lengths = np.zeros(per_night.size, dtype=np.int64)  # 0: no window begins on that night
    spans = []  # each start's downtime from the day the work begins, for the message below
    for start in range(per_night.size):
        laid = [p for p in _laid(listed, start, works) if p.phase.days]
        begins, ends = laid[0].first, laid[-1].last + 1
        spans.append(ends - begins)
        if begins == start:
            lengths[start] = ends - start
    shortest = min(spans)
    if shortest > per_night.size:
        raise ValueError(f"the phases take at least {downtime_words(listed, shortest)}, longer than the horizon of "
                         f"{per_night.size} days")
    if not np.any((lengths > 0) & (np.arange(per_night.size) + lengths <= per_night.size)):
        raise ValueError(f"the phases take at least {downtime_words(listed, shortest)}, and every such downtime "
                         f"begun in the horizon runs longer than the horizon of {per_night.size} days allows: "
                         "lengthen the horizon")
    chosen = _cheapest(per_night, lengths, alternatives, lost_from_start)
    if not chosen:
        raise ValueError(
            "every window for these phases contains a blocked night (a booked observing run): shorten a phase, "
            "lengthen the horizon or give booked nights a finite weight"
        )
    return chosen


def _crew_calendar(first_weekday: int, crew_days: Iterable[int], days_off: Iterable[int]) -> Callable[[int], bool]:
    """Whether the crew works on day ``d`` (counted from day 0, an ISO ``first_weekday``): one of ``crew_days``
    and not in ``days_off``. Checks the three as :func:`phase_days` says."""
    _check_weekday(first_weekday)
    working = frozenset(crew_days)
    if not working or not working <= EVERY_DAY:
        raise ValueError(
            f"crew weekdays must be one or more ISO weekdays 1 (Monday) to 7 (Sunday), not {sorted(working)}"
        )
    listed_off = list(days_off)
    for day in listed_off:
        _check_whole("a day off (counted from day 0)", day, 0)
    off = frozenset(listed_off)

    def works(day: int) -> bool:
        return (first_weekday - 1 + day) % 7 + 1 in working and day not in off

    return works


def shortest_downtime(phases: Iterable[Phase], crew_days: Iterable[int]) -> int:
    """The fewest days ``phases`` keep the telescope down with a crew working ``crew_days`` and no listed day off in
    the way (days off only lengthen it): laid as :func:`phase_days` lays them from each weekday, from the first day
    of the first phase that takes days to the last day of the last. A horizon shorter than this holds no window
    (:func:`cheapest_crew_windows` finds the same least over a horizon of a week or more without days off)."""
    listed = list(phases)
    spans = []
    for weekday in EVERY_DAY:
        laid = [p for p in phase_days(listed, weekday, crew_days) if p.phase.days]
        spans.append(laid[-1].last + 1 - laid[0].first)
    return min(spans)


def downtime_words(phases: Iterable[Phase], days: int) -> str:
    """A downtime of ``days`` for ``phases`` in words, saying how its days are made: "12 days (7 on the crew's working
    days, 5 calendar days)", with the days the work waits over weekdays the crew does not work or its days off."""
    listed = list(phases)
    crew = sum(p.days for p in listed if p.needs_crew)
    calendar = sum(p.days for p in listed if not p.needs_crew)
    waiting = days - crew - calendar
    made_of = f"{crew} on the crew's working days, {calendar} calendar day{'s' if calendar != 1 else ''}"
    if waiting:
        made_of += f", and {waiting} waiting over days the crew does not work"
    return f"{days} day{'s' if days != 1 else ''} ({made_of})"


def _laid(phases: list[Phase], start: int, works: Callable[[int], bool]) -> list[PhaseDays]:
    """The phases laid as :func:`phase_days` says, the first one from day ``start``, in the day numbers of ``works``.

    A crew phase finds its first working day: the crew works on at least one weekday and has finitely many
    days off, so it comes.
    """
    laid, day = [], start
    for phase in phases:
        if phase.days and phase.needs_crew:
            first = next(d for d in itertools.count(day) if works(d))
            last, rest = first, phase.days - 1
            while rest:
                last += 1
                if works(last):
                    rest -= 1
        else:
            first, last = day, day + phase.days - 1
        laid.append(PhaseDays(phase, first, last))
        day = last + 1
    return laid


def _cheapest(per_night: NDArray[np.float64], lengths: NDArray[np.int64], alternatives: int,
              lost_from_start: bool = False) -> list[Window]:
    """The greedy choice of :func:`cheapest_crew_windows` for a window of ``lengths[i]`` nights begun on night ``i``
    (0: none begins there), its cost counted from night 0 with ``lost_from_start``; an empty list when every window
    that fits holds a blocked night.

    Sums from one cumulative sum, ``C[i + lengths[i]] - C[i]``; blocked (infinite) nights are counted by a second
    cumulative sum, so a window holding one is never chosen and the infinities never enter the subtraction."""
    starts = np.arange(per_night.size)
    ends = starts + lengths
    fits = (lengths > 0) & (ends <= per_night.size)
    last = np.where(fits, ends, starts)  # in range for the look-ups below
    blocked = np.isinf(per_night)
    # Blocked nights are summed as 0 and counted apart, so the infinities never enter a subtraction.
    cumulative = np.concatenate(([0], np.cumsum(np.where(blocked, 0.0, per_night))))
    held = np.concatenate(([0], np.cumsum(blocked)))
    counted_from = np.zeros_like(starts) if lost_from_start else starts
    sums = cumulative[last] - cumulative[counted_from]
    candidates = np.where(fits & (held[last] == held[counted_from]), sums, np.inf)
    chosen = []
    for _ in range(alternatives + 1):
        start = int(np.argmin(candidates))
        if np.isinf(candidates[start]):
            break
        chosen.append(Window(start_index=start, days=int(lengths[start]), cost=float(sums[start])))
        candidates[(starts < ends[start]) & (ends > start)] = np.inf
    return chosen


def _costs(cost: ArrayLike) -> NDArray[np.float64]:
    per_night = _numbers("cost", cost)
    if np.any(np.isnan(per_night)) or np.any(per_night < 0):
        raise ValueError("night costs must not be negative or NaN (use inf for a blocked night)")
    return per_night


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


def _check_weekday(weekday: object) -> None:
    _check_whole("first weekday", weekday, 1)
    if weekday > 7:
        raise ValueError(f"first weekday must be an ISO weekday, 1 (Monday) to 7 (Sunday), not {weekday}")
