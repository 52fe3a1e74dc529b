"""How a number is written wherever a person or a program writes one: ASCII digits, an optional sign, one point for
decimals and an optional exponent (``PLAIN_NUMBER``): the nights log (``logbook.nights_csv``, the API) and every
form's number field (``install``, called by ``admin_site.ObservatoryAdminConfig.ready``).

Python's ``float()`` and ``int()``, which Django's number fields call, also read "1_0" as 10 and full-width digits
("５") as 5: a bad-input review booked ten fan filters on a finish form from "1_0" and stored a brake pressure of
10 bar. Such a number gets the field's own message for a number it cannot read."""
from __future__ import annotations

import re

from django import forms
from django.core.exceptions import ValidationError

#: A number written plainly. "nan", "inf" and the like are not (the number fields refuse them anyway).
PLAIN_NUMBER = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")


def _plain_only(to_python):
    def read(self, value):
        if isinstance(value, str) and value.strip() and not PLAIN_NUMBER.fullmatch(value.strip()):
            raise ValidationError(self.error_messages["invalid"], code="invalid")
        return to_python(self, value)

    return read


class PlainNumberInput(forms.TextInput):
    """A number field's box on the pages: text, so what is typed reaches the rule above as typed. A browser's own number
    box filters the keys itself: a walk-through typed "1_0" into a finish form's count and Chromium showed and sent 10,
    "1,5" hours became 15. ``inputmode`` still brings up the keyboard of digits on a phone or tablet; "numeric" (no
    point) where ``attrs`` say so, for counts of whole things."""

    def __init__(self, attrs=None):
        super().__init__({"inputmode": "decimal", **(attrs or {})})


def install() -> None:
    """Every number field of every form (the pages' and the admin's) reads a number only as ``PLAIN_NUMBER`` writes
    it, from a box of text (``PlainNumberInput``)."""
    for field in (forms.FloatField, forms.IntegerField, forms.DecimalField):
        field.to_python = _plain_only(field.to_python)
        field.widget = PlainNumberInput
