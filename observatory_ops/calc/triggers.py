"""What a trigger and a plan owe: value against limit, and the due status.

A service plan has one or more triggers and is due at whichever comes first. Each trigger carries
the figures that explain it (value now, limit, rate, forecast date), so a page can say why.
"""
from __future__ import annotations

import datetime as dt
from collections.abc import Iterable
from dataclasses import dataclass

OVERDUE = "overdue"
DUE = "due"
LATER = "later"
STATUSES = (OVERDUE, DUE, LATER)
#: The metric of a calendar trigger (``planning.metrics.CALENDAR_DAYS``).
CALENDAR_DAYS = "calendar_days"


@dataclass(frozen=True)
class TriggerState:
    """One trigger evaluated at a moment: enough to explain itself on a page."""

    metric: str
    value: float
    limit: float
    rate_per_day: float | None
    forecast: dt.date | None
    earliest: dt.date | None = None
    latest: dt.date | None = None
    basis: str = ""
    rising: bool = True  # False for a reading that falls toward its limit (reflectance, pressure)
    unit: str = ""
    #: A counter's log behind by many nights: the first night it counts that is not logged, and how many from it to
    #: yesterday (its value is the logged nights' alone; the forecast counts these at the expected rate). None / 0:
    #: not said.
    unlogged_from: dt.date | None = None
    unlogged_nights: int = 0
    #: A counter not at its limit by the logged nights, whose expected use passed it on a night not logged yet: that
    #: night (its forecast is then today). None otherwise.
    reached_unlogged_on: dt.date | None = None
    #: What takes the telescope out on nights before the forecast day, counted as no use ("the closure of T70 for
    #: mount overhaul"); "" when nothing does.
    steps_over: str = ""

    @property
    def reached(self) -> bool:
        return self.value >= self.limit if self.rising else self.value <= self.limit

    @property
    def fraction(self) -> float:
        """How far toward the limit, 1.0 = reached (value / limit, or limit / value when falling)."""
        if self.rising:
            return self.value / self.limit if self.limit else float("inf")
        return self.limit / self.value if self.value > 0 else float("inf")


def due_status(state: TriggerState, today: dt.date, look_ahead_days: int) -> str:
    """``overdue`` once the limit is reached, ``due`` when forecast inside the look-ahead, else ``later``.

    A trigger whose forecast date is unknown (no usage to extrapolate) is ``later`` until its value
    reaches the limit. A calendar limit falls due on its day and is overdue from the next: work done
    on the due day is on time (a forecast review read "overdue" on the due date itself).
    """
    if state.reached and state.metric == CALENDAR_DAYS and state.forecast == today:
        return DUE
    if state.reached:
        return OVERDUE
    if state.forecast is not None and state.forecast <= today + dt.timedelta(days=look_ahead_days):
        return DUE
    return LATER


def governing(states: Iterable[TriggerState]) -> TriggerState:
    """The trigger that makes the plan due first: whichever comes first.

    Reached triggers come first (the most exceeded one), then the earliest forecast; a trigger with
    no forecast comes last, ordered by the share of its limit used.
    """
    far = dt.date.max

    def key(s: TriggerState) -> tuple:
        return (not s.reached, -s.fraction if s.reached else 0.0, s.forecast or far, -s.fraction)

    states = list(states)
    if not states:
        raise ValueError("a plan needs at least one trigger")
    return min(states, key=key)
