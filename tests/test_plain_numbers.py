"""Every form's number field reads a number only as the nights format writes it (formats/plain_numbers.py): Python's
float() and int(), which Django's fields call, also read "1_0" as 10 and full-width "５" as 5 (a bad-input review
stored a brake pressure of 10 bar from "1_0" and booked ten fan filters on a finish form)."""
from __future__ import annotations

import datetime as dt
import re

import pytest
from django import forms
from django.utils import timezone
from test_measurement_wavelength import mirror  # noqa: F401  (the fixture, used by name)

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
    for typed in ("0_87", "０.87"):
        response = client.post(f"/subsystems/{mirror.subsystem.pk}/readings/new/",
                               {"quantity": "reflectance", "value": typed, "taken_at": taken})
        assert response.status_code == 200
        assert response.context["form"].errors["value"] == [
            "Enter a number, with a point for decimals (0.87, not 0,87)."]
    assert not Reading.objects.exists()


@pytest.mark.django_db
def test_number_fields_are_boxes_of_text_with_the_keyboard_of_digits(mirror, users, client):  # noqa: F811
    """A walk-through typed "1_0" into a finish form's count: Chromium's number box showed and sent 10, so the rule
    above never saw it ("1,5" hours became 15). Number fields are text boxes with ``inputmode`` (HTML Living
    Standard), so what is typed is what is sent and checked."""
    client.force_login(users["technician"])
    page = client.get(f"/subsystems/{mirror.subsystem.pk}/readings/new/").content.decode()
    value = re.search(r'<input[^>]*name="value"[^>]*>', page)[0]
    assert 'type="text"' in value and 'inputmode="decimal"' in value
