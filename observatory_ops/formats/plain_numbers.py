"""How a number is written wherever a person or a program writes one: ASCII digits, an optional sign, one point for
decimals and an optional exponent (``PLAIN_NUMBER``): the nights log (``logbook.nights_csv``, the API) and every
form's number field (``install``, called by ``admin_site.ObservatoryAdminConfig.ready``).

Python's ``float()`` and ``int()``, which Django's number fields call, also read "1_0" as 10 and full-width digits
("５") as 5: a bad-input review booked ten fan filters on a finish form from "1_0" and stored a brake pressure of
10 bar. Such a number gets the field's own message for a number it cannot read, but for two slips, each said in one
wording: full-width digits ("１２", ``full_width_hint``), named by every form's number field (its "Enter a number" left
whoever typed them looking at a number) and the night form's; a decimal comma ("7,5", ``decimal_comma_hint``), named by
the night form and by the nights CSV import where one split a figure in two (the other forms that expect one say it in
their own message: the reading form's "0.87, not 0,87").
"""
from __future__ import annotations

import re

from django import forms
from django.core.exceptions import ValidationError

#: A number written plainly. "nan", "inf" and the like are not (the number fields refuse them anyway).
PLAIN_NUMBER = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")


#: The full-width forms of the characters of a plain number, as their ASCII ones. An input method for Chinese, Japanese
#: or Korean types them in its full-width mode; Unicode's Halfwidth and Fullwidth Forms block puts each at its ASCII
#: character's code point + 0xFEE0 (U+FF10 is "０").
FULL_WIDTH = str.maketrans({chr(ord(c) + 0xFEE0): c for c in "+-.0123456789eE"})

#: A figure whose one comma stands where a point would make it a plain number: a decimal comma ("7,5"), or a separator
#: of thousands when three digits follow it ("1,030").
COMMA_FIGURE = re.compile(r"(?P<whole>[+-]?[0-9]*),(?P<decimals>[0-9]+(?:[eE][+-]?[0-9]+)?)")


def full_width_hint(text: str) -> str | None:
    """What to do about a number typed in full-width digits ("１２"): "full-width digits: type 12 with the ordinary
    digits"; None when ``text`` has none, or is no plain number in ordinary ones either."""
    written = text.strip()
    ordinary = written.translate(FULL_WIDTH)
    if ordinary == written or not PLAIN_NUMBER.fullmatch(ordinary):
        return None
    return f"full-width digits: type {ordinary} with the ordinary digits"


def decimal_comma_hint(text: str, count: bool = False) -> str | None:
    """What to do about a figure written with a decimal comma ("7,5"): "figures take a point (7.5)"; None when no one
    comma in ``text`` would be a point of a plain number. Three digits after the comma may be a separator of thousands
    instead ("1,030"), and the hint says both ways: "figures take a point, and no separator of thousands (1.030 or
    1030)". A ``count`` (slews, brake cycles) is a whole number: "a count takes no separator of thousands (1030)", or
    "a count is a whole number" (a diff review: "1.030" offered for a count would be refused in its turn)."""
    comma = COMMA_FIGURE.fullmatch(text.strip())
    if comma is None:
        return None
    whole, decimals = comma.group("whole", "decimals")
    thousands = bool(whole.lstrip("+-") and re.fullmatch("[0-9]{3}", decimals))
    if count:
        return f"a count takes no separator of thousands ({whole}{decimals})" if thousands else (
            "a count is a whole number")
    if thousands:
        return f"figures take a point, and no separator of thousands ({whole}.{decimals} or {whole}{decimals})"
    return f"figures take a point ({whole}.{decimals})"


def _plain_only(to_python):
    def read(self, value):
        if isinstance(value, str) and value.strip() and not PLAIN_NUMBER.fullmatch(value.strip()):
            if hint := full_width_hint(value):
                raise ValidationError(f"{hint[:1].upper()}{hint[1:]}.", code="invalid")
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
