"""Dates typed into a form: ISO 8601 (YYYY-MM-DD, what a browser's date field sends) and the month as a word, as the
pages show dates ("23 Mar 2027"); never the month-first "06/01/2026", which reads as 6 January at a site that writes
the day first and as 1 June where the month comes first (ISO 8601:2019 is the unambiguous form)."""
from __future__ import annotations

import datetime as dt

import pytest
from django import forms
from django.core.exceptions import ValidationError


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
