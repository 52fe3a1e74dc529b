"""The finish form's parts used, typed and never prefilled with the plan, and the error summary that names each
field once.

A. Each planned part's "used" field starts empty and is required, its help text giving the planned quantity: a
technician who used none or fewer must not book the plan as used with one tap (the register and the parts-used
record would go wrong). 0 is a count like any other.
B. The error summary writes "label: message" only when the message does not already name its field; our messages
mostly do ("Actual hours: ...", "Brake pad set used (set): ..."), and the label was then said twice.

Orders are those of tests/test_workorders.py (an axis drive with one AC isolation point). The part and its
quantities are invented.
"""
from __future__ import annotations

import html
import re

import pytest
from django import forms
from django.template.loader import render_to_string
from test_workorder_finish import _nothing_stored, _post, _started, _text
from test_workorders import drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.access.templatetags.form_errors import names_field
from observatory_ops.workorders import services
from observatory_ops.workorders.forms import FinishForm
from observatory_ops.workorders.models import Part, PartUse, State, WorkOrder

pytestmark = pytest.mark.django_db

LABEL = "Brake pad set used (set)"
REQUIRED = f"{LABEL}: enter how many were used (0 if none)."


@pytest.fixture
def pads(order, site, users):  # noqa: F811
    """The order, underway, with 2 brake pad sets planned; the register holds 3."""
    part = Part.objects.create(site=site, name="Brake pad set", part_number="BP-2", quantity_on_hand=3,
                               reorder_point=0, unit="set")
    services.part_add(order, part, 2)
    _started(order, users)
    return part


def _field(page: str, use: PartUse) -> str:
    return re.search(rf'<input[^>]*name="part_{use.pk}"[^>]*>', page).group(0)


def _summary(page: str) -> str:
    return re.search(r'<div class="error-summary" id="error-summary".*?</div>', page, flags=re.S).group(0)


# --- A. the parts used: typed, not prefilled -----------------------------------------------------------------------


def test_the_part_used_starts_empty_and_required_with_the_planned_quantity_beside_it(order, pads, users, client):  # noqa: F811
    use = PartUse.objects.get(part=pads)
    form = FinishForm(order=order, by=users["technician"])
    field = form.fields[f"part_{use.pk}"]
    assert field.initial is None and field.required
    assert field.help_text == "planned: 2 sets; enter what was used, 0 if none"
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    field = _field(page, use)
    assert "value=" not in field and " required" in field  # the browser asks for it too
    assert "planned: 2 sets; enter what was used, 0 if none" in html.unescape(page)


def test_a_finish_without_the_parts_used_is_refused_naming_the_part_and_stores_nothing(order, pads, users, client):  # noqa: F811
    use = PartUse.objects.get(part=pads)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order))  # the plan is not taken as used
    assert response.status_code == 200 and REQUIRED in _text(response)
    _nothing_stored(order)
    pads.refresh_from_db()
    assert pads.quantity_on_hand == 3 and PartUse.objects.get(pk=use.pk).quantity_used is None


@pytest.mark.parametrize("typed, used, left", [("0", 0, 3), ("1", 1, 2), ("2", 2, 1)])
def test_what_is_typed_is_what_is_recorded_and_taken_from_the_register(order, pads, users, client, typed, used, left):  # noqa: F811
    use = PartUse.objects.get(part=pads)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, **{f"part_{use.pk}": typed}))
    assert response.status_code == 302, _text(response)[-1500:]
    assert WorkOrder.objects.get(pk=order.pk).state == State.FINISHED
    pads.refresh_from_db()
    use.refresh_from_db()
    assert (use.quantity_used, use.quantity_short, pads.quantity_on_hand) == (used, 0, left)


# --- B. the error summary names each field once --------------------------------------------------------------------


def test_the_summary_writes_a_message_that_names_its_field_alone(order, pads, users, client):  # noqa: F811
    use = PartUse.objects.get(part=pads)
    client.force_login(users["technician"])
    page = client.post(f"/workorders/{order.pk}/finish/", _post(order, actual_hours="")).content.decode()
    summary = html.unescape(_summary(page))
    assert f'<li><a href="#id_part_{use.pk}">{REQUIRED}</a></li>' in summary
    # The label "Actual hours (person-hours)" is named by the message's "Actual hours:".
    assert '<li><a href="#id_actual_hours">Actual hours: enter the hours the work took.</a></li>' in summary
    assert f"{LABEL}</a>: " not in summary and "(person-hours)" not in summary
    # Beside its field, the message is written once, after the field's own label.
    inline = html.unescape(re.search(rf'<ul class="errorlist" id="id_part_{use.pk}_error">.*?</ul>', page).group(0))
    assert inline.count(LABEL) == 1 and f"<li>{REQUIRED}</li>" in inline


class _Service(forms.Form):
    performed_on = forms.DateField(label="Performed on")
    hours = forms.FloatField(label="Hours", error_messages={"required": "Hours: enter the hours."})


def test_the_summary_keeps_the_label_before_a_message_that_does_not_name_its_field():
    form = _Service({"performed_on": "someday"})
    summary = render_to_string("_error_summary.html", {"form": form})
    assert ('<a href="#id_performed_on">Performed on</a>: Enter the date as YYYY-MM-DD (2027-03-23) or as 23 Mar 2027.'
            in summary)  # formats/en/formats.py DATE_INVALID
    assert '<a href="#id_hours">Hours: enter the hours.</a>' in summary


@pytest.mark.parametrize("message, label, named", [
    ("Fan used (pcs): enter how many were used", "Fan used (pcs)", True),  # begins with the label
    ("Actual hours: enter a number of hours, such as 2.5.", "Actual hours (person-hours)", True),  # begins it
    ("Others on the crew: at most 1000 characters", "Others on the crew, without an account", True),
    ("findings: say why", "Findings", True),  # any case
    ("Find: a word that only begins the label's first word", "Findings", False),
    ("The service date cannot be in the future.", "Performed on", False),
    ("Enter the date as YYYY-MM-DD (2027-03-23) or as 23 Mar 2027.", "Work done on", False),
    ("Fan current cannot be above 50 A (got 500)", "Value", False),
    ("How many (2): enter a number.", "How many (1)", False),  # another row's field
    ("", "Findings", False),
    ("Part: not at this site.", "Part number", False),  # a first word only is not the label
    ("Brake pad set used: 1.5 is not a whole number", "Brake pad set used (set)", True),
])
def test_names_field_knows_a_message_that_opens_with_its_field(message, label, named):
    assert names_field(message, label) is named


def test_the_service_takes_no_count_as_planned_either(pads, order, users):  # noqa: F811
    """Any caller, not the form only: a planned part whose count is not given is refused, changing nothing."""
    from test_workorders import _all_readings, _confirmed

    with pytest.raises(services.Refused, match=re.escape("Brake pad set used: say how many were used (0 if none)")):
        services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6),
                                   **_confirmed(order))
    _nothing_stored(order)
    pads.refresh_from_db()
    assert pads.quantity_on_hand == 3


def test_a_choice_fields_summary_link_reaches_its_fieldset(order, users, client):  # noqa: F811
    """A field of tick boxes has no single input to label (Django gives it no ``id_for_label``): its summary link went
    to "#". It goes to the fieldset, whose id is the field's own."""
    _started(order, users)
    client.force_login(users["technician"])
    page = client.post(f"/workorders/{order.pk}/finish/", _post(order, crew_members=["999999"])).content.decode()
    assert 'href="#"' not in _summary(page)
    assert 'href="#id_crew_members"' in _summary(page)
    assert '<fieldset class="confirm" id="id_crew_members"' in page
