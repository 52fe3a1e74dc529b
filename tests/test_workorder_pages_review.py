"""From a tablet review of the work-order pages: field help a screen reader finds, a fraction of a part counted in
whole units refused on its own field, and a part's quantity written with its unit one way everywhere.

1. Django 5 points each input's ``aria-describedby`` at ``<auto_id>_helptext`` (``BoundField.aria_describedby``);
   a template that writes the help by hand gives it that id, or the reference leads nowhere (WAI-ARIA 1.2,
   aria-describedby: the value is a list of ids of elements in the page).
2. A part counted in whole units (``workorders.models.COUNTED_UNITS``, our own list, common practice, no published
   source) given a fraction is refused by the finish form on that field, linked from the error summary, in the words
   finishing refuses it with (``models.part_quantity_not_whole``); its input brings up the keyboard of digits alone,
   ``inputmode="numeric"`` (HTML Living Standard, the inputmode attribute), a part kept by measure
   ``inputmode="decimal"``. Text inputs, not number ones: a browser's number box filters what is typed itself
   (formats/plain_numbers.py).
3. Quantities read as ``models.amount_text`` writes them ("1 set", "2 sets", "0 cylinders", "1.5 m"): the order
   page's Planned and Used columns, the site dashboard's low stock and the parts register.

Orders are those of tests/test_workorders.py (an axis drive with one AC isolation point). Parts, counts and units are
invented.
"""
from __future__ import annotations

import html
import re

import pytest
from django.template import Context, Template
from test_finish_form_parts import pads  # noqa: F401  (a fixture: the order underway, 2 brake pad sets planned)
from test_workorder_finish import _nothing_stored, _post
from test_workorders import _all_readings, _confirmed, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.workorders import services
from observatory_ops.workorders.forms import FinishForm
from observatory_ops.workorders.models import Part, PartUse, State, WorkOrder

pytestmark = pytest.mark.django_db


@pytest.fixture
def cable(site):
    """A part kept by the metre: fractions are counts like any other."""
    return Part.objects.create(site=site, name="Drag chain cable", unit="m", quantity_on_hand=10, reorder_point=0)


@pytest.fixture
def fan(site):
    return Part.objects.create(site=site, name="Cell fan 80 mm", part_number="FAN-80", quantity_on_hand=2,
                               reorder_point=0, unit="each")


def _input(page: str, name: str) -> str:
    return re.search(rf'<input[^>]*name="{name}"[^>]*>', page).group(0)


def _summary(page: str) -> str:
    return html.unescape(re.search(r'<div class="error-summary" id="error-summary".*?</div>', page, flags=re.S)[0])


def _described_by_leads_somewhere(page: str) -> list[str]:
    """The ``*_helptext`` ids the page's fields point at; each one must be an element's id in the page."""
    pointed = [ref for refs in re.findall(r'aria-describedby="([^"]+)"', page) for ref in refs.split()
               if ref.endswith("_helptext")]
    for ref in pointed:
        assert page.count(f'id="{ref}"') == 1, f"{ref} is pointed at but not on the page (once)"
    return pointed


# --- 1. the help a screen reader reads with each field ----------------------------------------------------------


def test_every_help_text_the_finish_form_points_at_is_on_the_page(order, pads, fan, users, client):  # noqa: F811
    use = PartUse.objects.get(part=pads)
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    pointed = _described_by_leads_somewhere(page)
    assert {"id_actual_hours_helptext", "id_work_done_on_helptext", f"id_part_{use.pk}_helptext",
            "id_other_part_1_helptext"} <= set(pointed)
    assert 'aria-describedby="id_work_done_on_helptext"' in _input(page, "work_done_on")
    help_span = re.search(rf'<span class="helptext" id="id_part_{use.pk}_helptext">([^<]*)</span>', page)
    assert help_span and help_span[1] == "planned: 2 sets; enter what was used, 0 if none"


def test_the_help_of_the_night_form_and_the_reliability_page_is_found_too(site, users, client):
    client.force_login(users["technician"])
    for url in (f"/sites/{site.slug}/nights/new/", f"/sites/{site.slug}/reliability/"):
        response = client.get(url)
        assert response.status_code == 200, url
        assert _described_by_leads_somewhere(response.content.decode()), url  # its fields have help to point at


# --- 2. a fraction of a part counted in whole units -------------------------------------------------------------


def test_a_fraction_of_a_planned_part_counted_whole_is_refused_on_its_field_linked_and_stores_nothing(
    order, pads, users, client  # noqa: F811
):
    use = PartUse.objects.get(part=pads)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, **{f"part_{use.pk}": "1.5"}))
    assert response.status_code == 200
    page = response.content.decode()
    message = "Brake pad set used: 1.5 is not a whole number, and Brake pad set is counted in whole parts (set)."
    # Linked from the summary, written alone (it names its field), not as an unlinked line of the form's own.
    assert f'<li><a href="#id_part_{use.pk}">{message}</a></li>' in _summary(page)
    inline = html.unescape(re.search(rf'<ul class="errorlist" id="id_part_{use.pk}_error">.*?</ul>', page)[0])
    assert message in inline
    assert 'class="errorlist nonfield"' not in page
    assert 'aria-invalid="true"' in _input(page, f"part_{use.pk}")
    _nothing_stored(order)
    pads.refresh_from_db()
    assert pads.quantity_on_hand == 3 and PartUse.objects.get(pk=use.pk).quantity_used is None


def test_the_form_says_it_in_the_words_finishing_refuses_it_with(order, pads, users):  # noqa: F811
    use = PartUse.objects.get(part=pads)
    with pytest.raises(services.Refused) as refused:
        services.work_order_finish(order, users["technician"], 1.0, "ok", _all_readings(order, 0.6), {use.pk: 1.5},
                                   **_confirmed(order))
    form = FinishForm(_post(order, **{f"part_{use.pk}": "1.5"}), order=order, by=users["technician"])
    assert not form.is_valid()
    assert form.errors[f"part_{use.pk}"] == [f"{refused.value}."] == [
        "Brake pad set used: 1.5 is not a whole number, and Brake pad set is counted in whole parts (set)."
    ]


def test_a_fraction_of_another_part_counted_whole_is_refused_on_its_row(order, pads, fan, users, client):  # noqa: F811
    use = PartUse.objects.get(part=pads)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(
        order, **{f"part_{use.pk}": "2"}, other_part_1=str(fan.pk), other_quantity_1="0.5",
    ))
    assert response.status_code == 200
    page = response.content.decode()
    message = "How many (1): 0.5 is not a whole number, and Cell fan 80 mm is counted in whole parts (each)."
    assert f'<li><a href="#id_other_quantity_1">{message}</a></li>' in _summary(page)
    # Shown again with the fan chosen, its count offers the keyboard of whole numbers.
    assert 'inputmode="numeric"' in _input(page, "other_quantity_1")
    assert WorkOrder.objects.get(pk=order.pk).state == State.UNDERWAY
    assert not PartUse.objects.filter(part=fan).exists()


def test_a_fraction_of_a_part_kept_by_measure_is_recorded(order, pads, cable, users, client):  # noqa: F811
    use = PartUse.objects.get(part=pads)
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{order.pk}/finish/", _post(
        order, **{f"part_{use.pk}": "2"}, other_part_1=str(cable.pk), other_quantity_1="2.5",
    ))
    assert response.status_code == 302
    cable.refresh_from_db()
    assert cable.quantity_on_hand == 7.5


def test_a_count_counted_whole_offers_whole_numbers_and_one_by_measure_any(order, pads, cable, fan, users,  # noqa: F811
                                                                           client):
    services.part_add(order, cable, 1.5)
    by_set, by_metre = PartUse.objects.get(part=pads), PartUse.objects.get(part=cable)
    client.force_login(users["technician"])
    page = client.get(f"/workorders/{order.pk}/finish/").content.decode()
    assert 'inputmode="numeric"' in _input(page, f"part_{by_set.pk}")
    assert 'inputmode="decimal"' in _input(page, f"part_{by_metre.pk}")
    assert 'type="text"' in _input(page, f"part_{by_set.pk}")  # what is typed reaches the plain-number rule
    # Another part's count follows the part chosen in its row: none chosen yet, so any figure; the list says which
    # parts are counted whole, for the page's script.
    assert 'inputmode="decimal"' in _input(page, "other_quantity_1")
    chooser = re.search(r'<select[^>]*name="other_part_1"[^>]*>', page)[0]
    whole = re.search(r'data-whole-parts="([^"]*)"', chooser)[1].split()
    assert str(pads.pk) in whole and str(fan.pk) in whole and str(cable.pk) not in whole


# --- 3. a quantity with its unit, one way --------------------------------------------------------------------------


def test_the_amount_filter_writes_amount_text():
    template = Template('{% load parts %}{{ one|amount:"set" }}, {{ two|amount:"set" }}, {{ none|amount:"set"|'
                        'default:"–" }}, {{ half|amount:"m" }}, {{ zero|amount:"cylinder" }}')
    assert template.render(Context({"one": 1.0, "two": 2, "none": None, "half": 1.5, "zero": 0})) == (
        "1 set, 2 sets, –, 1.5 m, 0 cylinders"
    )


def test_the_order_page_writes_planned_and_used_with_their_unit(order, pads, users, client):  # noqa: F811
    use = PartUse.objects.get(part=pads)
    client.force_login(users["technician"])
    row = lambda page: re.search(r"<tr><td>Brake pad set</td>.*?</tr>", page)[0]  # noqa: E731
    before = row(client.get(order.get_absolute_url()).content.decode())
    assert "<td>2 sets</td><td>–</td>" in before
    response = client.post(f"/workorders/{order.pk}/finish/", _post(order, **{f"part_{use.pk}": "1"}))
    assert response.status_code == 302
    after = row(client.get(order.get_absolute_url()).content.decode())
    assert "<td>2 sets</td><td>1 set</td>" in after


def test_the_dashboard_and_the_register_write_the_stock_with_its_unit(site, users, client):
    Part.objects.create(site=site, name="Nitrogen", unit="cylinder", quantity_on_hand=0, reorder_point=2)
    client.force_login(users["viewer"])
    dashboard = html.unescape(client.get(f"/sites/{site.slug}/").content.decode())
    assert "<strong>Nitrogen</strong>: 0 cylinders left (reorder at 2 cylinders)" in dashboard
    register = html.unescape(client.get(f"/sites/{site.slug}/parts/").content.decode())
    assert "<td>0 cylinders " in register
