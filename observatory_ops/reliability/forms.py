"""The reliability page's choice of period, ``from`` and ``to``, and of one telescope, ``telescope``, in the address (a
GET form, so a choice can be linked to and bookmarked)."""
from __future__ import annotations

import datetime as dt

from django import forms

from .selectors import Period

#: The address's names of the two days, as the CSV downloads (``exports.period``) name them too, and of the telescope.
FROM, TO, TELESCOPE = "from", "to", "telescope"


class PeriodForm(forms.Form):
    """From and to, days at the site, both included, each between the site's first logged night and its today. Either
    may be left empty: from the first logged night, to today. Both empty: the page's default figures. Telescope: one
    of the site's ``telescopes`` whose subsystems alone count, or empty for all (a site with two telescopes could not
    tell which one's drives failed)."""

    def __init__(self, data, *, first_night: dt.date | None, today: dt.date, telescopes=()):
        super().__init__(data)
        self.first_night, self.today = first_night, today
        self.telescopes = {str(t.pk): t for t in telescopes}
        bounds = {"type": "date", "max": today.isoformat()}
        if first_night:
            bounds["min"] = first_night.isoformat()
        # "from" is a Python keyword, so the fields are set here rather than declared on the class.
        self.fields[FROM] = forms.CharField(
            label="From", required=False, widget=forms.DateInput(attrs=bounds),
            help_text="empty: from the first logged night",
        )
        self.fields[TO] = forms.CharField(
            label="To", required=False, widget=forms.DateInput(attrs=bounds), help_text="empty: to today",
        )
        if len(self.telescopes) > 1:
            self.fields[TELESCOPE] = forms.ChoiceField(
                label="Telescope", required=False,
                choices=[("", "all"), *((k, t.name) for k, t in self.telescopes.items())],
                help_text="all: every telescope's subsystems, by kind",
                error_messages={"invalid_choice": "%(value)s is not one of this site's telescopes: choose one from the "
                                                  "list, or all."},
            )

    def clean_from(self) -> dt.date | None:
        return self._day(FROM, "From empty to start at the first logged night")

    def clean_to(self) -> dt.date | None:
        return self._day(TO, "To empty to end today")

    def _day(self, name: str, empty: str) -> dt.date | None:
        """The day typed in field ``name``, None when left empty; ValidationError in words when it is not a day of
        the calendar, or lies outside the log: before the first logged night or after the site's today."""
        text = self.cleaned_data[name].strip()
        if not text:
            return None
        try:
            day = dt.date.fromisoformat(text)
        except ValueError:
            raise forms.ValidationError(
                f"{text} is not a day of the calendar: give a date as YYYY-MM-DD, such as "
                f"{self.today:%Y-%m-%d}."
            ) from None
        if self.first_night is None:
            raise forms.ValidationError(
                f"no night is logged at this site yet, so there is no period to choose: leave {empty}."
            )
        if day > self.today:
            raise forms.ValidationError(
                f"{day:%d %b %Y} is in the future: the site's today is {self.today:%d %b %Y}, and nothing is logged "
                f"after it. Choose a day up to today, or leave {empty}."
            )
        if day < self.first_night:
            raise forms.ValidationError(
                f"{day:%d %b %Y} is before the site's first logged night, {self.first_night:%d %b %Y}: no operating "
                f"hours are logged before it. Choose a day from then on, or leave {empty}."
            )
        return day

    def clean(self):
        data = super().clean()
        first, last = data.get(FROM), data.get(TO)
        if first and last and first > last:
            self.add_error(FROM, f"{first:%d %b %Y} is after To, {last:%d %b %Y}: the period would hold no day. "
                                 "Choose a From on or before To.")
        return data

    def telescope(self):
        """The telescope chosen (``registry.Telescope``), None for all; read from a form with a bad period too."""
        return self.telescopes.get((getattr(self, "cleaned_data", None) or {}).get(TELESCOPE) or "")

    def period(self) -> Period | None:
        """The period chosen (valid forms only), None for the default: neither day given."""
        first, last = self.cleaned_data.get(FROM), self.cleaned_data.get(TO)
        if first is None and last is None:
            return None
        return Period(first or self.first_night, last or self.today)
