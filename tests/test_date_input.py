"""Dates typed into a form: ISO 8601 (YYYY-MM-DD, what a browser's date field sends) and the month as a word, as the
pages show dates ("23 Mar 2027"); never the month-first "06/01/2026", which reads as 6 January at a site that writes
the day first and as 1 June where the month comes first (ISO 8601:2019 is the unambiguous form)."""
from __future__ import annotations

import calendar
import datetime as dt
import html

import numpy as np
import pytest
from django import forms
from django.core.exceptions import ValidationError
from django.urls import reverse


@pytest.mark.parametrize("typed", ["2026-01-06", "6 Jan 2026", "06 January 2026", "Jan 6, 2026"])
def test_unambiguous_dates_are_read(typed):
    assert forms.DateField().clean(typed) == dt.date(2026, 1, 6)


@pytest.mark.parametrize("typed", ["06/01/2026", "06/01/26", "01/06/2026"])
def test_a_date_with_slashes_is_refused_not_guessed(typed):
    with pytest.raises(ValidationError):
        forms.DateField().clean(typed)
    with pytest.raises(ValidationError):
        forms.DateTimeField().clean(f"{typed} 10:00")


def test_a_date_and_time_is_read_in_iso_order():
    assert forms.DateTimeField().clean("2026-01-06 21:30").replace(tzinfo=None) == dt.datetime(2026, 1, 6, 21, 30)


def test_a_date_not_read_says_which_formats_are():
    """Django's own "Enter a valid date." named no format; a person typing a date without a date picker needs one."""
    with pytest.raises(ValidationError, match=r"Enter the date as YYYY-MM-DD \(2027-03-23\) or as 23 Mar 2027\."):
        forms.DateField().clean("06/01/2026")
    with pytest.raises(ValidationError, match=r"Enter the date and time as YYYY-MM-DD HH:MM \(2027-03-23 21:30\)\."):
        forms.DateTimeField().clean("tomorrow evening")


def test_the_projects_own_forms_say_it_too():
    """A diff review: the admin's discovery built the apps' forms before the messages were set, so their date fields
    kept Django's."""
    from observatory_ops.logbook.forms import CorrectionForm, ReadingForm, ServiceRecordForm
    from observatory_ops.mirrors.forms import MeasurementForm

    for form, name in ((ServiceRecordForm, "performed_on"), (CorrectionForm, "performed_on"),
                       (MeasurementForm, "measured_on"), (ReadingForm, "taken_at")):
        assert form.base_fields[name].error_messages["invalid"].startswith("Enter the date"), form


# --- a date written in an accepted shape that names no day ------------------------------------------------------


def _days_in_month(year: int, month: int) -> int:
    """The month's length by numpy's datetime64 calendar (proleptic Gregorian, ISO 8601): an independent count."""
    first = np.datetime64(f"{year:04d}-{month:02d}", "M")
    return int(((first + 1).astype("datetime64[D]") - first.astype("datetime64[D]")).astype(int))


@pytest.mark.parametrize("year", [1900, 2000, 2023, 2024, 2026])  # 1900 and 2000: the Gregorian century rule
def test_the_field_reads_exactly_the_days_of_the_calendar_and_names_the_month_length_of_the_others(year):
    for month in range(1, 13):
        length = _days_in_month(year, month)
        for day in range(1, 32):
            typed = f"{year}-{month:02d}-{day:02d}"
            if day <= length:
                assert forms.DateField().clean(typed) == dt.date(year, month, day)
                continue
            with pytest.raises(ValidationError) as refused:
                forms.DateField().clean(typed)
            assert refused.value.messages == [
                f"{typed} is no such date: {calendar.month_name[month]} {year} has {length} days."
            ]


@pytest.mark.parametrize("typed, told", [
    ("31 Apr 2026", "31 Apr 2026 is no such date: April 2026 has 30 days."),
    ("Feb 29, 2026", "Feb 29, 2026 is no such date: February 2026 has 28 days."),
    ("30 February 2024", "30 February 2024 is no such date: February 2024 has 29 days."),
    ("2026-13-01", "2026-13-01 is no such date: there is no month 13."),
    ("2026-00-10", "2026-00-10 is no such date: there is no month 0."),
    ("2026-04-00", "2026-04-00 is no such date: April 2026 has 30 days."),
    ("0000-01-01", "0000-01-01 is no such date: there is no year 0."),
])
def test_an_impossible_date_in_any_accepted_shape_is_told_which_part_does_not_exist(typed, told):
    with pytest.raises(ValidationError) as refused:
        forms.DateField().clean(typed)
    assert refused.value.messages == [told]


@pytest.mark.parametrize("typed", ["2026-04-31 21:30", "2026-04-31T21:30", "31 Apr 2026 21:30"])
def test_a_date_and_time_on_no_such_day_is_told_so(typed):
    with pytest.raises(ValidationError) as refused:
        forms.DateTimeField().clean(typed)
    assert refused.value.messages == [f"{typed} is no such date: April 2026 has 30 days."]


@pytest.mark.django_db
def test_the_service_form_names_the_impossible_day_and_stores_nothing(client, telescope, users):
    from observatory_ops.logbook.models import ServiceRecord
    from observatory_ops.registry.services import subsystem_create

    drive = subsystem_create(telescope, "axis1_drive", "RA drive", counting_from=dt.date(2026, 1, 1))
    client.force_login(users["technician"])
    page = client.post(reverse("service-log", args=[drive.pk]), {
        "performed_on": "2026-02-29", "hours_spent": "1", "summary": "greased",
    }).content.decode()
    assert "2026-02-29 is no such date: February 2026 has 28 days." in html.unescape(page)
    assert not ServiceRecord.objects.exists()


def test_a_month_name_in_full_where_the_format_takes_its_abbreviation_is_not_called_no_such_date():
    """A diff review: "31 April 2026 10:00" was told "no such date", then "30 April 2026 10:00" the general message:
    the date-and-time formats read the month's abbreviation only."""
    for typed in ("31 April 2026 10:00", "30 April 2026 10:00"):
        with pytest.raises(ValidationError) as refused:
            forms.DateTimeField().clean(typed)
        assert refused.value.messages == ["Enter the date and time as YYYY-MM-DD HH:MM (2027-03-23 21:30)."]
