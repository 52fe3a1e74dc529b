"""A reading trigger's limit at an end of what its quantity can read is refused, naming the limit and why.

Rising to the lowest value a reading can take (a settle time "at most 0 s"), every reading is past the limit; falling
to it, a reading reaches it only at that value itself, never on the way down; at the highest value, the other way
round. The ends are ``logbook.quantities.PLAUSIBLE_RANGE``: a duration, a current, a level cannot be negative (by
definition), a reflectance is a fraction from 0 to 1 (by definition); the other ends, and the lowest temperature (the
coldest air on record, about -89 degC, from memory), are plausibility bounds of our own (common practice, no published
source). A limit is reached at it (``calc.triggers.TriggerState.reached``: value >= limit rising, <= falling).
"""
from __future__ import annotations

import datetime as dt

import pytest
from django.core.exceptions import ValidationError

from observatory_ops.logbook.quantities import PLAUSIBLE_RANGE, QUANTITIES
from observatory_ops.planning.metrics import READING
from observatory_ops.planning.models import Trigger
from observatory_ops.planning.services import HORIZON_DAYS, site_today
from observatory_ops.registry.services import subsystem_create
from tests.conftest import constant_sky
from tests.test_register_and_plan_bounds import _unchanged

pytestmark = pytest.mark.django_db

ABOVE, BELOW = Trigger.Direction.ABOVE, Trigger.Direction.BELOW


@pytest.fixture
def drive(telescope):
    """An axis 1 drive with the catalogue's plan, whose settle-time trigger rises to its limit; the site's sky cached
    (the admin's save recomputes the site)."""
    today = site_today(telescope.site)
    constant_sky(telescope.site, today - dt.timedelta(days=30), today + dt.timedelta(days=HORIZON_DAYS + 1))
    return subsystem_create(telescope, "axis1_drive", "Axis 1", counting_from=today - dt.timedelta(days=365))


def _refusal(trigger: Trigger) -> str:
    with pytest.raises(ValidationError) as refused:
        trigger.full_clean()
    return " ".join(refused.value.message_dict["limit"])


def _reading(drive, quantity: str, limit: float, direction: str) -> Trigger:
    return Trigger(plan=drive.plans.get(), metric=READING, quantity=quantity, limit=limit, direction=direction)


def test_a_settle_time_rising_to_0_s_is_refused_as_past_at_every_reading(drive):
    assert PLAUSIBLE_RANGE["settle_time_s"][0] == 0  # a duration is never negative
    says = _refusal(_reading(drive, "settle_time_s", 0, ABOVE))
    assert says == ("Limit: a settle time after a slew is never below 0 s, so every reading would be past a limit of "
                    "0 s: the plan would be overdue from its first reading on. Give the highest reading still "
                    "acceptable, above 0 s.")


def test_a_level_falling_to_0_is_refused_as_reached_by_no_falling_reading(drive):
    says = _refusal(_reading(drive, "encoder_signal_pct", 0, BELOW))
    assert says.startswith("Limit: an encoder signal level is never below 0 %, so no reading could fall past a limit "
                           "of 0 %: the plan would come due only at a reading of 0 % itself, never on the way down.")


@pytest.mark.parametrize(("quantity", "limit", "direction", "says"), [
    # The highest end: a reflectance is at most 1 (a fraction, by definition); a settle time above 3,600 s is refused
    # as not plausible (our own bound).
    ("reflectance", 1, BELOW, "Limit: a band reflectance is never above 1 (no higher reading is taken), so every "
                              "reading would be past a limit of 1:"),
    ("settle_time_s", 3600, ABOVE, "no reading could rise past a limit of 3,600 s"),
    ("following_error_arcsec", 0, ABOVE, "Limit: an RMS following error is never below 0 arcsec"),
    ("rcd_trip_time_ms", 0, ABOVE, "Limit: an RCD trip time is never below 0 ms"),
])
def test_a_limit_at_either_end_of_its_quantitys_range_is_refused(drive, quantity, limit, direction, says):
    assert limit in PLAUSIBLE_RANGE[quantity]
    assert says in _refusal(_reading(drive, quantity, limit, direction))


@pytest.mark.parametrize("direction", [ABOVE, BELOW])
def test_0_degc_is_a_limit_either_way_as_a_temperature_can_be_below_it(drive, direction):
    assert PLAUSIBLE_RANGE["temperature_c"][0] < 0
    _reading(drive, "temperature_c", 0, direction).full_clean()


@pytest.mark.parametrize("quantity", sorted(QUANTITIES))
def test_a_limit_just_inside_the_range_is_taken_either_way(drive, quantity):
    low, high = PLAUSIBLE_RANGE[quantity]
    for limit in (max(low, 0) + (high - max(low, 0)) * 1e-3, high - (high - max(low, 0)) * 1e-3):
        for direction in (ABOVE, BELOW):
            _reading(drive, quantity, limit, direction).full_clean()


def test_a_usage_limit_of_0_keeps_its_own_message(drive):
    assert _refusal(Trigger(plan=drive.plans.get(), metric="calendar_days", limit=0)) == (
        "A usage or calendar limit must be more than zero.")


# --- in the admin, as the engineer sets it ------------------------------------------------------------------------


def test_the_admin_refuses_a_settle_time_limit_of_0_and_keeps_the_stored_one(engineer_in_admin, drive):
    plan = drive.plans.get()
    trigger = plan.triggers.get(metric=READING)
    url = f"/admin/planning/serviceplan/{plan.pk}/change/"
    data = _unchanged(engineer_in_admin, url)
    row = next(key[: -len("-id")] for key, value in data.items() if key.endswith("-id") and value == str(trigger.pk))
    data[f"{row}-limit"] = "0"
    response = engineer_in_admin.post(url, data)
    assert response.status_code == 200, "saved, not refused"
    errors = [" ".join(form.errors.get("limit", [])) for inline in response.context["inline_admin_formsets"]
              for form in inline.formset.forms]
    assert any("so every reading would be past a limit of 0 s" in text for text in errors)
    assert Trigger.objects.get(pk=trigger.pk).limit == trigger.limit > 0
