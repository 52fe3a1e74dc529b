"""A reading a work order asks for that could not be taken (no meter on site, a drive that could not be run) is said
so on the finish form, with why, never made up: the order keeps why (``RequiredReading.not_measured``), no logbook
reading is written for it, and the page and the paper show it to whoever countersigns. Each required reading has a
value or a reason, not both. Recording what was not done rather than a guessed value is common practice, no published
source."""
from __future__ import annotations

import html
import io
import re

import pytest
from pypdf import PdfReader
from test_workorders import _confirmed, _finish_post, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.logbook.models import Reading
from observatory_ops.workorders import pdf, selectors, services
from observatory_ops.workorders.models import State, WorkOrder

pytestmark = pytest.mark.django_db

WHY = "no clamp meter on site"


@pytest.fixture
def underway(order, users):  # noqa: F811
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    return WorkOrder.objects.get(pk=order.pk)


def _current(work_order):
    return work_order.required_readings.get(quantity="motor_current_a")


def _text(response) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", response.content.decode())).split())


def test_a_reading_not_taken_is_finished_with_why_and_shown_on_the_page_and_the_paper(underway, users, client):
    current = _current(underway)
    data = {**_finish_post(underway, 0.6), f"reading_{current.pk}": "", f"why_{current.pk}": WHY}
    client.force_login(users["technician"])
    response = client.post(f"/workorders/{underway.pk}/finish/", data, follow=True)
    assert WorkOrder.objects.get(pk=underway.pk).state == State.FINISHED
    current.refresh_from_db()
    assert current.not_measured == WHY and current.reading is None
    assert not Reading.objects.filter(quantity="motor_current_a").exists()  # no value made up
    assert Reading.objects.filter(quantity="settle_time_s").count() == 1  # the others as measured
    assert f"not measured: {WHY}" in _text(response)
    document = pdf.render_sheet(selectors.sheet(WorkOrder.objects.get(pk=underway.pk), "https://ops.example/wo/1/"))
    paper = " ".join(" ".join(page.extract_text().split()) for page in PdfReader(io.BytesIO(document)).pages)
    assert f"not measured: {WHY}" in paper


def test_neither_a_value_nor_why_is_refused_beside_the_reading_and_nothing_is_stored(underway, users, client):
    current = _current(underway)
    data = {**_finish_post(underway, 0.6), f"reading_{current.pk}": ""}
    client.force_login(users["technician"])
    page = _text(client.post(f"/workorders/{underway.pk}/finish/", data))
    assert "Motor current on Axis 1 drive (A): enter the reading as measured, or say below why it was not measured." \
        in page
    assert WorkOrder.objects.get(pk=underway.pk).state == State.UNDERWAY and not Reading.objects.exists()


def test_both_a_value_and_why_is_refused(underway, users, client):
    current = _current(underway)
    data = {**_finish_post(underway, 0.6), f"why_{current.pk}": WHY}
    client.force_login(users["technician"])
    page = _text(client.post(f"/workorders/{underway.pk}/finish/", data))
    assert 'a reading is entered, so leave "not measured" empty' in page
    assert WorkOrder.objects.get(pk=underway.pk).state == State.UNDERWAY
    with pytest.raises(services.Refused, match="either recorded or said not measured, not both"):
        services.work_order_finish(underway, users["technician"], 1.0, "ok",
                                   {r.pk: 0.5 for r in underway.required_readings.all()},
                                   not_measured={current.pk: WHY}, **_confirmed(underway))


def test_the_service_refuses_a_reading_with_neither(underway, users):
    current = _current(underway)
    readings = {r.pk: 0.5 for r in underway.required_readings.all() if r.pk != current.pk}
    with pytest.raises(services.Refused, match="or say why it was not measured"):
        services.work_order_finish(underway, users["technician"], 1.0, "ok", readings, **_confirmed(underway))
    assert WorkOrder.objects.get(pk=underway.pk).state == State.UNDERWAY
