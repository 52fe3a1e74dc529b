"""Why a date written in a readable shape names no day of the calendar ("2026-04-31": April 2026 has 30 days), for
every place a person writes a date: the nights log (``logbook.nights_csv``, the API) and every form's date field
(``install``, called by ``admin_site.ObservatoryAdminConfig.ready``).

A date the forms cannot read at all keeps the general message (``formats.en.formats.DATE_INVALID``): it names the
accepted shapes. One written in an accepted shape but with a day, month or year that does not exist is told which."""
from __future__ import annotations

import calendar
import re

from django import forms

#: The month written as a word, lower case: "%b" reads its abbreviation ("Apr"), "%B" its full name ("April").
_MONTH_WORDS = {"%b": {calendar.month_abbr[n].lower(): n for n in range(1, 13)},
                "%B": {calendar.month_name[n].lower(): n for n in range(1, 13)}}

#: What each directive of the input formats (formats/en/formats.py) matches, named by its part of the date.
_DIRECTIVES = {"%Y": r"(?P<year>[0-9]{4})", "%m": r"(?P<month>[0-9]{1,2})", "%d": r"(?P<day>[0-9]{1,2})",
               "%b": r"(?P<month_word>[A-Za-z]+)", "%B": r"(?P<month_word>[A-Za-z]+)",
               "%H": r"[0-9]{1,2}", "%M": r"[0-9]{1,2}", "%S": r"[0-9]{1,2}", "%f": r"[0-9]{1,6}"}


def why_no_such_date(year: int, month: int, day: int) -> str | None:
    """Why ``year``-``month``-``day`` is no day of the (proleptic Gregorian) calendar, or None if it is one."""
    if not 1 <= month <= 12:
        return f"there is no month {month}"
    if year == 0:
        return "there is no year 0"
    days = calendar.monthrange(year, month)[1]
    if not 1 <= day <= days:
        return f"{calendar.month_name[month]} {year} has {days} days"
    return None


def _parts(value: str, format: str) -> tuple[int, int, int] | None:
    """(year, month, day) as ``value`` writes them in the shape of ``format``, or None if it has another shape."""
    pattern = "".join(_DIRECTIVES.get(piece, re.escape(piece)) for piece in re.split(r"(%[A-Za-z])", format))
    written = re.fullmatch(pattern, value.strip())
    if not written:
        return None
    parts = written.groupdict()
    word = next((d for d in ("%b", "%B") if d in format), None)  # a format writes the month one way
    month = int(parts["month"]) if parts.get("month") else _MONTH_WORDS[word].get(parts["month_word"].lower())
    if month is None:
        return None
    return int(parts["year"]), month, int(parts["day"])


def no_such_date_refused(value: str, format: str) -> None:
    """Raise a ValidationError naming the problem when ``value``, written in the shape of ``format``, names no day."""
    parts = _parts(value, format)
    problem = why_no_such_date(*parts) if parts else None
    if problem:
        raise forms.ValidationError(f"{value.strip()} is no such date: {problem}.", code="no_such_date")


#: Shapes a date and time is also read in before the input formats (Django's ``parse_datetime``: ISO 8601, as
#: ``<input type="datetime-local">`` sends it).
_ISO_DATETIMES = ("%Y-%m-%dT%H:%M", "%Y-%m-%dT%H:%M:%S")


def _telling_which_part(to_python):
    """A field's ``to_python`` that, where the field's own would say only that a value cannot be read, first says which
    part of a date written in one of its shapes does not exist."""
    def read(self, value):
        try:
            return to_python(self, value)
        except forms.ValidationError as exc:
            if exc.code == "invalid" and isinstance(value, str):
                shapes = self.input_formats if isinstance(self, forms.DateField) else (*_ISO_DATETIMES,
                                                                                        *self.input_formats)
                for format in shapes:
                    no_such_date_refused(value, format)
            raise
    return read


def install() -> None:
    """Every date field of every form (the pages' and the admin's) says which part of a date does not exist."""
    forms.DateField.to_python = _telling_which_part(forms.DateField.to_python)
    forms.DateTimeField.to_python = _telling_which_part(forms.DateTimeField.to_python)
