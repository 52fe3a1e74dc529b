"""Every form's number field reads a number only as the nights format writes it (formats/plain_numbers.py): Python's
float() and int(), which Django's fields call, also read "1_0" as 10 and full-width "５" as 5 (a bad-input review
stored a brake pressure of 10 bar from "1_0" and booked ten fan filters on a finish form)."""
from __future__ import annotations

import datetime as dt
import re
import unicodedata

import pytest
from django import forms
from django.utils import timezone
from test_measurement_wavelength import mirror  # noqa: F401  (the fixture, used by name)

from observatory_ops.formats.plain_numbers import decimal_comma_hint, full_width_hint
from observatory_ops.logbook.models import Reading


@pytest.mark.parametrize("field", [forms.FloatField(), forms.IntegerField(), forms.DecimalField()])
@pytest.mark.parametrize("text", ["1_0", "１０", "٣", "1 0", "0x10", "nan", "--1"])
def test_a_number_not_written_plainly_is_refused_by_every_number_field(field, text):
    with pytest.raises(forms.ValidationError) as refused:
        field.clean(text)
    assert refused.value.code == "invalid"


@pytest.mark.parametrize("text, value", [("10", 10), (" +2.5 ", 2.5), (".5", 0.5), ("1e3", 1000.0), ("-3", -3)])
def test_a_number_written_plainly_still_reads(text, value):
    assert forms.FloatField().clean(text) == value


@pytest.mark.django_db
def test_the_reading_form_stores_nothing_from_1_0(mirror, users, client):  # noqa: F811
    site = mirror.subsystem.telescope.site
    client.force_login(users["technician"])
    taken = f"{timezone.localtime(timezone.now() - dt.timedelta(hours=1), site.zone):%Y-%m-%dT%H:%M}"
    for typed, said in (("0_87", "Enter a number, with a point for decimals (0.87, not 0,87)."),
                        ("０.87", "Full-width digits: type 0.87 with the ordinary digits.")):
        response = client.post(f"/subsystems/{mirror.subsystem.pk}/readings/new/",
                               {"quantity": "reflectance", "value": typed, "taken_at": taken})
        assert response.status_code == 200
        assert response.context["form"].errors["value"] == [said]
    assert not Reading.objects.exists()


# --- full-width digits, named --------------------------------------------------------------------------------------


@pytest.mark.parametrize("field", [forms.FloatField(), forms.IntegerField(), forms.DecimalField(),
                                   forms.FloatField(error_messages={"invalid": "Hours: enter a number."})])
@pytest.mark.parametrize(("text", "ordinary"), [("１２", "12"), (" １２ ", "12"), ("1２", "12"), ("－３", "-3"),
                                                ("７．５", "7.5"), ("１ｅ３", "1e3")])
def test_full_width_digits_are_named_by_every_number_field_with_the_number_in_ordinary_digits(field, text, ordinary):
    """Each field its own or Django's message for other text, this one for full-width digits. The ordinary digits are
    Unicode's compatibility decomposition of the full-width ones (NFKC, Python's unicodedata: an independent reading
    of the Halfwidth and Fullwidth Forms block that ``plain_numbers.FULL_WIDTH`` maps by its code points)."""
    assert unicodedata.normalize("NFKC", text.strip()) == ordinary
    with pytest.raises(forms.ValidationError) as refused:
        field.clean(text)
    assert refused.value.messages == [f"Full-width digits: type {ordinary} with the ordinary digits."]
    assert refused.value.code == "invalid"


@pytest.mark.parametrize("text", ["٣", "1_0", "１_０", "１２a", "１,５", "１２-"])
def test_text_that_is_no_number_in_ordinary_digits_either_keeps_the_fields_own_message(text):
    assert full_width_hint(text) is None
    with pytest.raises(forms.ValidationError) as refused:
        forms.FloatField().clean(text)
    assert refused.value.messages == ["Enter a number."]


@pytest.mark.parametrize(("text", "hint"), [
    ("7,5", "figures take a point (7.5)"),
    ("-0,25", "figures take a point (-0.25)"),
    (",5", "figures take a point (.5)"),
    ("1,030", "figures take a point, and no separator of thousands (1.030 or 1030)"),
    ("7.5", None), ("7,", None), ("1,000,000", None), ("7,5,1", None), ("a,5", None),
])
def test_a_decimal_comma_is_named_only_where_a_point_would_make_a_plain_number(text, hint):
    assert decimal_comma_hint(text) == hint


def test_a_count_is_offered_no_point():
    assert decimal_comma_hint("1,030", count=True) == "a count takes no separator of thousands (1030)"
    assert decimal_comma_hint("7,5", count=True) == "a count is a whole number"


@pytest.mark.django_db
def test_number_fields_are_boxes_of_text_with_the_keyboard_of_digits(mirror, users, client):  # noqa: F811
    """A walk-through typed "1_0" into a finish form's count: Chromium's number box showed and sent 10, so the rule
    above never saw it ("1,5" hours became 15). Number fields are text boxes with ``inputmode`` (HTML Living
    Standard), so what is typed is what is sent and checked."""
    client.force_login(users["technician"])
    page = client.get(f"/subsystems/{mirror.subsystem.pk}/readings/new/").content.decode()
    value = re.search(r'<input[^>]*name="value"[^>]*>', page)[0]
    assert 'type="text"' in value and 'inputmode="decimal"' in value
