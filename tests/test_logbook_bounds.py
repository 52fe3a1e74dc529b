"""Specifications for how far back a service date may lie and which readings are plausible.

A refused service record or reading names the problem and stores nothing; the pages show the message
(no server error). The bounds are our own plausibility bounds (``logbook.quantities.PLAUSIBLE_RANGE``,
``logbook.nights_csv.MAX_YEARS_BACK``), not published limits.
"""
from __future__ import annotations

import datetime as dt
import math

import pytest
from django.core.exceptions import ValidationError
from django.urls import reverse
from django.utils import timezone

from observatory_ops.logbook import services
from observatory_ops.logbook.models import Reading, ServiceRecord
from observatory_ops.logbook.nights_csv import earliest_accepted
from observatory_ops.logbook.quantities import PLAUSIBLE_RANGE, QUANTITIES, value_problem
from observatory_ops.planning.services import site_today
from observatory_ops.registry.services import subsystem_create

pytestmark = pytest.mark.django_db


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    return recomputes_recorded


@pytest.fixture
def drive(telescope):
    return subsystem_create(telescope, "axis1_drive", "RA drive", counting_from=dt.date(2026, 1, 1))


# --- service dates ----------------------------------------------------------------------------------------


def test_a_service_date_more_than_15_years_back_is_refused_naming_the_earliest_accepted(drive, users, recomputes):
    earliest = earliest_accepted(site_today(drive.telescope.site))
    for day in (dt.date(1800, 1, 1), earliest - dt.timedelta(days=1)):
        with pytest.raises(ValidationError) as refused:
            services.service_record_log(drive, None, day, users["technician"], "greased")
        assert refused.value.messages == [
            f"service date {day} is more than 15 years ago; the earliest accepted is {earliest}"
        ]
    assert not ServiceRecord.objects.exists() and recomputes == []
    services.service_record_log(drive, None, earliest, users["technician"], "greased")
    assert ServiceRecord.objects.get().performed_on == earliest


def test_a_correction_cannot_move_a_record_more_than_15_years_back(drive, users):
    original = services.service_record_log(drive, None, dt.date(2026, 1, 5), users["technician"], "greased")
    with pytest.raises(ValidationError, match="is more than 15 years ago; the earliest accepted is"):
        services.service_record_correct(original, users["technician"], "greased", performed_on=dt.date(1900, 1, 1))
    assert list(ServiceRecord.objects.all()) == [original]


def test_the_service_form_refuses_a_date_far_back_with_the_message_and_stores_nothing(client, drive, users):
    client.force_login(users["technician"])
    earliest = earliest_accepted(site_today(drive.telescope.site))
    response = client.post(reverse("service-log", args=[drive.pk]), {
        "performed_on": "1900-01-01", "hours_spent": "1", "summary": "greased",
    })
    assert response.status_code == 200
    assert f"Service date 1900-01-01 is more than 15 years ago; the earliest accepted is {earliest}." in (
        response.content.decode()
    )
    assert not ServiceRecord.objects.exists()


# --- readings ---------------------------------------------------------------------------------------------


def test_every_quantity_has_a_plausible_range_and_only_temperature_goes_below_zero():
    assert set(PLAUSIBLE_RANGE) == set(QUANTITIES)
    for code, (low, high) in PLAUSIBLE_RANGE.items():
        assert math.isfinite(low) and math.isfinite(high) and low < high, code
        assert (low < 0) == (code == "temperature_c"), code


@pytest.mark.parametrize("code", sorted(QUANTITIES))
def test_a_reading_is_accepted_across_its_range_and_refused_beyond_it(code):
    low, high = PLAUSIBLE_RANGE[code]
    for value in (low, (low + high) / 2, high):
        assert value_problem(code, value) is None, (code, value)
    for value in (low - 0.01, high * 1.001 + 0.01, -math.inf, math.inf, math.nan, 1e300):
        assert value_problem(code, value), (code, value)


@pytest.mark.parametrize(
    ("code", "value", "message"),
    [
        ("settle_time_s", 1e300, "Settle time after a slew cannot be above 3,600 s (got 1e+300); "
                                 "a larger reading is not plausible"),
        ("settle_time_s", -0.2, "Settle time after a slew cannot be negative (got -0.2)"),
        ("temperature_c", -91, "Temperature cannot be below -90 degC (got -91)"),
        ("temperature_c", 151, "Temperature cannot be above 150 degC (got 151); a larger reading is not plausible"),
        ("supply_voltage_v", 2300, "Supply voltage cannot be above 1,000 V (got 2300)"),
        ("reflectance", 1.2, "a reflectance is a fraction between 0 and 1"),
        ("motor_current_a", math.nan, "Motor current must be a finite number"),
    ],
)
def test_an_implausible_reading_is_refused_by_the_service_and_nothing_is_stored(
    drive, users, recomputes, code, value, message
):
    with pytest.raises(ValidationError) as refused:
        services.reading_log(drive, code, value, timezone.now(), users["technician"])
    assert refused.value.messages[0].startswith(message)
    assert not Reading.objects.exists() and recomputes == []


def test_a_cold_night_temperature_is_a_plausible_reading(drive, users):
    services.reading_log(drive, "temperature_c", -40.0, timezone.now(), users["technician"])
    assert Reading.objects.get().value == -40.0


def test_the_reading_form_refuses_an_absurd_value_with_a_message(client, drive, users):
    client.force_login(users["technician"])
    response = client.post(reverse("reading-log", args=[drive.pk]), {
        "quantity": "settle_time_s", "value": "1e300", "taken_at": timezone.localtime().strftime("%Y-%m-%dT%H:%M"),
    })
    assert response.status_code == 200
    assert b"Settle time after a slew cannot be above 3,600 s (got 1e+300)" in response.content
    assert not Reading.objects.exists()
