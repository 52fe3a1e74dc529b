"""Specifications for observatory_ops.calc.triggers: a trigger's status and the trigger that governs its plan.

The rules themselves are ours: a limit reached is overdue, a forecast inside the site's look-ahead is due, whichever
trigger comes first governs, the most exceeded of those already past their limit first (common practice, no published
source: maintenance is planned on the first trigger to fire, and the one furthest past its limit is the most urgent).
Each case below is worked by hand beside it.
"""
from __future__ import annotations

import datetime as dt
import math

import pytest

from observatory_ops.calc.triggers import DUE, LATER, OVERDUE, TriggerState, due_status, governing

TODAY = dt.date(2026, 6, 15)
LOOK_AHEAD = 14


def rising(value: float, limit: float, forecast: dt.date | None = None, metric: str = "open_hours") -> TriggerState:
    return TriggerState(metric=metric, value=value, limit=limit, rate_per_day=None, forecast=forecast)


def falling(value: float, limit: float, forecast: dt.date | None = None) -> TriggerState:
    return TriggerState(metric="reading", value=value, limit=limit, rate_per_day=None, forecast=forecast, rising=False)


# --- the value/limit fraction -----------------------------------------------------------------------------------


def test_a_rising_counter_is_value_over_limit():
    # 450 of 500 h: 450 / 500 = 0.9; at the limit 1.0; past it 600 / 500 = 1.2
    assert rising(450, 500).fraction == pytest.approx(0.9)
    assert rising(500, 500).fraction == pytest.approx(1.0) and rising(500, 500).reached
    assert rising(600, 500).fraction == pytest.approx(1.2)


def test_a_reading_falling_toward_its_limit_is_limit_over_value():
    # A reflectance of 0.85 against a recoat line of 0.828: 0.828 / 0.85 = 0.97412 (hand division), not yet reached;
    # at 0.80 it is 0.828 / 0.80 = 1.035, reached: the fraction passes 1 as the value falls past the limit, as a
    # rising counter's does as it climbs past it (common practice, no published source).
    assert falling(0.85, 0.828).fraction == pytest.approx(0.828 / 0.85) == pytest.approx(0.97412, abs=1e-5)
    assert not falling(0.85, 0.828).reached
    assert falling(0.80, 0.828).fraction == pytest.approx(1.035)
    assert falling(0.80, 0.828).reached and falling(0.828, 0.828).reached  # at the limit counts as reached
    assert falling(0.0, 0.828).fraction == math.inf  # nothing left: as far past the limit as can be


def test_a_limit_of_zero_is_reached_at_once_and_infinitely_exceeded():
    assert rising(0, 0).reached and rising(3, 0).fraction == math.inf


# --- due_status and the look-ahead band -------------------------------------------------------------------------


@pytest.mark.parametrize(("state", "status"), [
    (rising(500, 500), OVERDUE),  # at the limit
    (rising(520, 500, TODAY + dt.timedelta(days=90)), OVERDUE),  # past it, whatever the forecast says
    (falling(0.80, 0.828), OVERDUE),  # a reflectance below its recoat line
])
def test_a_limit_reached_is_overdue(state, status):
    assert due_status(state, TODAY, LOOK_AHEAD) == status


def test_a_calendar_limit_is_due_on_its_day_and_overdue_from_the_next():
    # Every 180 days from 17 Dec 2025: due 15 Jun 2026 (hand count: 14 + 31 + 28 + 31 + 30 + 31 + 15 = 180). On that
    # day it is due, as work done that day is on time (logbook.services.due_before); from 16 Jun, overdue.
    # A forecast review read "overdue, 180 of 180 days" on the due date (common practice, no published source).
    on_the_day = rising(180, 180, TODAY, metric="calendar_days")
    assert on_the_day.reached and due_status(on_the_day, TODAY, LOOK_AHEAD) == DUE
    assert due_status(on_the_day, TODAY + dt.timedelta(days=1), LOOK_AHEAD) == OVERDUE
    assert due_status(rising(181, 180, TODAY - dt.timedelta(days=1), metric="calendar_days"), TODAY,
                      LOOK_AHEAD) == OVERDUE
    # A counter at its limit is overdue whatever its forecast day: its hours are used up.
    assert due_status(rising(500, 500, TODAY), TODAY, LOOK_AHEAD) == OVERDUE
    assert dt.date(2025, 12, 17) + dt.timedelta(days=180) == TODAY


def test_the_look_ahead_band_includes_its_last_day():
    # Look-ahead 14 days from 15 Jun 2026: due up to and including 29 Jun 2026, later from 30 Jun 2026.
    assert due_status(rising(10, 500, dt.date(2026, 6, 29)), TODAY, LOOK_AHEAD) == DUE
    assert due_status(rising(10, 500, dt.date(2026, 6, 30)), TODAY, LOOK_AHEAD) == LATER
    assert due_status(rising(10, 500, TODAY), TODAY, LOOK_AHEAD) == DUE  # forecast today, not reached yet
    # A look-ahead of 0 days: only a forecast of today is due.
    assert due_status(rising(10, 500, TODAY), TODAY, 0) == DUE
    assert due_status(rising(10, 500, TODAY + dt.timedelta(days=1)), TODAY, 0) == LATER


def test_a_forecast_already_past_but_not_reached_is_due_not_overdue():
    # Overdue is for a limit reached; a forecast that slipped into the past (the log not sent yet) is still due.
    assert due_status(rising(10, 500, TODAY - dt.timedelta(days=3)), TODAY, LOOK_AHEAD) == DUE


def test_no_forecast_is_later_until_the_limit_is_reached():
    assert due_status(rising(499, 500), TODAY, LOOK_AHEAD) == LATER
    assert due_status(falling(0.83, 0.828), TODAY, LOOK_AHEAD) == LATER


# --- governing: the order among triggers ------------------------------------------------------------------------


def test_of_the_limits_already_passed_the_most_exceeded_governs():
    # 550 / 500 = 1.10, 1300 / 1000 = 1.30, 0.828 / 0.72 = 1.15: the 1.30 one governs, though its forecast (the day
    # it was reached) is the latest of the three.
    a = rising(550, 500, TODAY - dt.timedelta(days=30))
    b = rising(1300, 1000, TODAY - dt.timedelta(days=2), metric="slews")
    c = falling(0.72, 0.828, TODAY - dt.timedelta(days=10))
    assert governing([a, b, c]) is b
    assert governing([a, c]) is c  # 1.15 before 1.10


def test_a_limit_passed_governs_before_any_forecast():
    passed = rising(501, 500)
    soon = rising(10, 500, TODAY)  # forecast today, a fraction of only 0.02
    assert governing([soon, passed]) is passed


def test_of_the_limits_not_yet_reached_the_earliest_forecast_governs_whatever_its_fraction():
    early = rising(10, 500, TODAY + dt.timedelta(days=5))  # 0.02 of its limit
    late = rising(490, 500, TODAY + dt.timedelta(days=6))  # 0.98, but a day later
    assert governing([late, early]) is early


def test_a_trigger_with_no_forecast_comes_last_and_among_those_the_largest_fraction_first():
    far = rising(1, 500, TODAY + dt.timedelta(days=1000))
    none_high = rising(480, 500)  # 0.96
    none_low = falling(0.95, 0.828)  # 0.828 / 0.95 = 0.87
    assert governing([none_high, far, none_low]) is far
    assert governing([none_low, none_high]) is none_high


def test_a_plan_without_triggers_is_a_clear_error():
    with pytest.raises(ValueError, match="at least one trigger"):
        governing([])


def test_the_due_sentence_on_a_calendar_limits_day_says_due_today_not_reached():
    """A diff review read "due ... 339 / 339 days ... limit reached on 05 Dec 2026" on the due day: "reached" beside
    "due" read as late. The sentence says due today, overdue from tomorrow; the day after, limit reached."""
    from observatory_ops.planning.services import reason_text

    on_the_day = TriggerState(metric="calendar_days", value=180, limit=180, rate_per_day=1.0, forecast=TODAY,
                              unit="days")
    assert reason_text(on_the_day) == "Calendar days: 180 of 180 days; due today, 15 Jun 2026: overdue from tomorrow."
    day_after = TriggerState(metric="calendar_days", value=181, limit=180, rate_per_day=1.0, forecast=TODAY,
                             unit="days")
    assert reason_text(day_after) == "Calendar days: 181 of 180 days; limit reached on 15 Jun 2026."
