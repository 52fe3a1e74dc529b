"""Specifications for the night form's word on a figure typed with a slip: a decimal comma ("7,5" open hours) and
full-width digits ("１２"), in the words the CSV import and every form's number field use (formats/plain_numbers.py).

A bad-input review typed 7,5 into the night form: the CSV import and the reading form hint at the decimal point, the
night form said only "must be a number".
"""
from __future__ import annotations

import datetime as dt

import pytest

from observatory_ops.formats.plain_numbers import decimal_comma_hint
from observatory_ops.logbook import services
from observatory_ops.logbook.models import NightUsage
from observatory_ops.planning.services import site_today

pytestmark = pytest.mark.django_db


@pytest.fixture(autouse=True)
def recomputes(recomputes_recorded):
    return recomputes_recorded


@pytest.fixture
def technician(client, users):
    client.force_login(users["technician"])
    return users["technician"]


def typed(client, site, **figures):
    night = (site_today(site) - dt.timedelta(days=1)).isoformat()
    response = client.post(f"/sites/{site.slug}/nights/new/", {"night": night, "open_hours": "5", **figures})
    assert response.status_code == 200  # the form again, with its problems: nothing stored
    return response.context["form"].errors


@pytest.mark.parametrize(("field", "written", "said"), [
    ("open_hours", "7,5", 'Hours the dome was open (on a telescope\'s row: the hours that telescope was open and in '
                          'use) (h): must be a number, not "7,5"; figures take a point (7.5)'),
    ("pm10_ugm3", " 38,2 ", 'Mean PM10 dust while open (µg/m³): must be a number, not "38,2"; figures take a point '
                            "(38.2)"),  # the form trims what is typed
    # Three digits after the comma may be a separator of thousands: both ways are said.
    ("axis1_travel_deg", "1,030", 'Travel of the right ascension / azimuth axis (degrees): must be a number, not '
                                  '"1,030"; figures take a point, and no separator of thousands (1.030 or 1030)'),
    ("slews", "１２", 'Number of slews: must be a whole number, not "１２"; full-width digits: type 12 with the '
                     "ordinary digits"),
    # A count is a whole number: no point offered (a diff review: "1.030" would be refused in its turn).
    ("slews", "1,030", 'Number of slews: must be a whole number, not "1,030"; a count takes no separator of thousands '
                       "(1030)"),
    ("open_hours", "７．５", 'Hours the dome was open (on a telescope\'s row: the hours that telescope was open and in '
                           'use) (h): must be a number, not "７．５"; full-width digits: type 7.5 with the ordinary '
                           "digits"),
])
def test_a_figure_typed_with_a_slip_has_the_slip_named_beside_its_field(client, site, technician, field, written,
                                                                         said):
    assert typed(client, site, **{field: written})[field] == [said]
    assert not NightUsage.objects.exists()


@pytest.mark.parametrize(("field", "written"), [("open_hours", "five"), ("slews", "1_000"), ("open_hours", "٣"),
                                                ("humidity_pct", "7,5,1")])
def test_a_figure_with_no_slip_to_name_keeps_the_formats_message_alone(client, site, technician, field, written):
    [said] = typed(client, site, **{field: written})[field]
    assert said.endswith(f'not "{written}"')


def test_the_night_form_and_the_csv_import_give_the_same_words_for_a_decimal_comma(client, site, technician):
    """One wording (formats.plain_numbers.decimal_comma_hint): the CSV import's, for a comma that split a figure in
    two, is the night form's."""
    words = decimal_comma_hint("7,5")
    assert words == "figures take a point (7.5)"
    [said] = typed(client, site, open_hours="7,5")["open_hours"]
    report = services.nights_import(site, b"night,open_hours\n2019-01-01,7,5\n")
    assert said.endswith(f"; {words}") and report.errors[0].reason.endswith(f": {words}")
