"""The paper work order carries what the finish form asks for, and a finished order's paper shows what the page
shows: boxes for the actual hours, the day the work was done and the parts used; sign-off lines for the crew and,
with a suspended load, for the competent person who checks the rigging; the steps ticked as on the page, with who
ticked them and when; the note on merged steps where the page shows it; and the sign-off never alone on a page.

PDFs are read back with pypdf, a reader independent of reportlab, and rasterised with poppler's pdftoppm.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import io
import subprocess

import numpy as np
import pytest
from conftest import require_tool
from django.utils import timezone
from pypdf import PdfReader
from test_workorder_pdf import STEPS, body_text, flat, make_sheet, page_texts, read_pgm
from test_workorders import _confirmed, drive, order  # noqa: F401  (fixtures, used by name)

from observatory_ops.planning.services import site_today
from observatory_ops.registry.services import subsystem_create
from observatory_ops.workorders import pdf, selectors, services
from observatory_ops.workorders.models import ChecklistTick, Part, WorkOrder
from observatory_ops.workorders.pdf import render_sheet
from observatory_ops.workorders.sheet import SheetPart, SheetTick

URL = "https://ops.example/workorders/1/"


# --- the layout, from plain values ----------------------------------------------------------------------------


def test_an_open_order_leaves_boxes_for_hours_day_and_parts_used_and_a_line_for_each_of_the_crew():
    text = body_text(render_sheet(make_sheet(parts=(SheetPart("Lens tissue", "LT-200", 2),))))
    assert "Actual hours (estimate 3.5 h)" in text and "Work done on (date)" in text
    assert "Part Part no. Planned Used" in text and "Lens tissue LT-200 2 each" in text
    assert text.count("Crew member") == pdf.CREW_LINES
    assert text.index("Performed by") < text.index("Crew member") < text.index("Checked by")
    assert "Rigging checked by" not in text


def test_a_suspended_load_adds_the_competent_persons_line_for_the_rigging():
    text = body_text(render_sheet(make_sheet(rigging_check=True)))
    assert "Rigging checked by (competent person)" in text
    assert text.rindex("Crew member") < text.index("Rigging checked by") < text.index("Checked by")


def test_a_finished_sheet_prints_the_hours_the_day_the_parts_used_and_the_ticks_with_who_and_when():
    notes = [SheetTick(True, f"ticked by Rosa Delacroix, 13 Jun 2026 1{n}:00") for n in range(len(STEPS) - 1)]
    sheet = make_sheet(
        actual_hours=2.5, work_done_on=dt.date(2026, 6, 13), parts=(SheetPart("Lens tissue", "LT-200", 2, used=1),),
        step_ticks=(*notes, SheetTick(False, "tick taken back by Rosa Delacroix, 13 Jun 2026 15:00")),
        point_ticks=(SheetTick(True, "ticked by Rosa Delacroix, 13 Jun 2026 09:00"), None),
    )
    text = body_text(render_sheet(sheet))
    assert "Actual hours (estimate 3.5 h) Work done on (date) 2.5 h 13 Jun 2026" in text
    assert "Lens tissue LT-200 2 each 1 each" in text
    for number, (step, tick) in enumerate(zip(STEPS, sheet.step_ticks, strict=True), start=1):
        assert f"{number}. {flat(step)} {tick.note}" in text
    assert "AC mains isolator Q1, mount cabinet ticked by Rosa Delacroix, 13 Jun 2026 09:00" in text


def _dark_pixels(tmp_path, document: bytes, name: str) -> np.ndarray:
    pdftoppm = require_tool("pdftoppm", "pdftoppm (poppler-utils)")
    source = tmp_path / f"{name}.pdf"
    source.write_bytes(document)
    subprocess.run([pdftoppm, "-gray", "-r", "150", "-singlefile", str(source), str(tmp_path / name)],
                   check=True, timeout=60)
    return read_pgm(tmp_path / f"{name}.pgm") < 128


def test_a_ticked_line_prints_a_tick_in_its_box_and_nothing_else_changes(tmp_path):
    one_page = {"cautions": (), "lifting": None, "why": (), "readings": (), "tools": (), "parts": ()}
    blank = make_sheet(**one_page, step_ticks=(SheetTick(False),) * len(STEPS))
    ticked = dataclasses.replace(blank, step_ticks=(SheetTick(True), *blank.step_ticks[1:]))
    before = _dark_pixels(tmp_path, render_sheet(blank), "blank")
    after = _dark_pixels(tmp_path, render_sheet(ticked), "tick")
    changed = np.argwhere(before != after)
    assert after.sum() > before.sum() and len(changed) > 0
    # Every changed pixel lies inside the first step's tick box, at the left margin of the text.
    scale = 150 / 72
    assert changed[:, 1].min() >= pdf.MARGIN_X * scale - 2
    assert changed[:, 1].max() <= (pdf.MARGIN_X + pdf._TICK_BOX) * scale + 2
    assert np.ptp(changed[:, 0]) <= pdf._TICK_BOX * scale + 2


def test_the_note_on_merged_steps_prints_above_the_steps():
    note = "The steps of 2 plans were merged into this order (steps they share written once)."
    text = body_text(render_sheet(make_sheet(steps_note=note)))
    assert text.index("Steps") < text.index(f"Read first: {note}") < text.index(flat(STEPS[0]))


@pytest.mark.parametrize("changes", [{"step_ticks": (SheetTick(True),)}, {"point_ticks": (None,) * 3}])
def test_ticks_must_match_the_lines_they_are_for(changes):
    with pytest.raises(ValueError, match="one entry for each"):
        make_sheet(**changes)


def test_a_part_used_must_be_a_number_not_below_zero():
    with pytest.raises(ValueError, match="quantity used"):
        SheetPart("Lens tissue", "LT-200", 2, used=-1)


def test_the_sign_off_never_lands_alone_on_a_page():
    """The sheet grows a step at a time, so the foot of the first page passes through the findings and the
    sign-off; on whichever page the sign-off prints, the findings it signs for print too."""
    split_before = 0
    for count in range(20, 80, 2):
        steps = tuple(f"Step text number {index} for the technician." for index in range(1, count + 1))
        pages = [flat(text) for text in page_texts(render_sheet(make_sheet(steps=steps, rigging_check=True)))]
        signing = next(text for text in pages if "Sign-off" in text)
        assert "Findings" in signing, count
        split_before += pages.index(signing) > next(i for i, text in enumerate(pages) if f"{count}. Step" in text)
    assert split_before  # some sheets did carry the findings over to a page of their own with the sign-off


# --- a work order read from the database ----------------------------------------------------------------------


def test_a_finished_orders_paper_shows_the_ticks_the_parts_used_the_hours_and_the_day(order, users, site):  # noqa: F811
    part = Part.objects.create(site=site, name="Brake pad set", part_number="BP-2", quantity_on_hand=5)
    services.part_add(order, part, 2)
    services.work_order_move(order, "issue", users["engineer"])
    services.work_order_move(order, "start", users["technician"])
    WorkOrder.objects.filter(pk=order.pk).update(issued_at=timezone.now() - dt.timedelta(days=2))  # printed then
    order.refresh_from_db()
    services.checklist_tick_set(order, "step", 0, True, users["technician"])
    # The paper of work underway prints the ticks so far, who and when; the rest are for ticking by hand.
    assert [tick.ticked for tick in selectors.sheet(order, URL).step_ticks][:2] == [True, False]
    day = site_today(site) - dt.timedelta(days=1)
    services.work_order_finish(
        order, users["technician"], 2.5, "Pads worn to 3 mm.", {r.pk: 0.6 for r in order.required_readings.all()},
        {order.part_uses.get().pk: 1}, **_confirmed(order),
        work_done_on=day,
    )
    order.refresh_from_db()
    sheet = selectors.sheet(order, URL)
    tick = ChecklistTick.objects.get(work_order=order)
    when = tick.recorded_at.astimezone(site.zone).strftime("%d %b %Y %H:%M")
    assert sheet.step_ticks[0] == SheetTick(True, f"ticked by technician, {when}")
    assert [t.ticked for t in sheet.step_ticks[1:]] == [False] * (len(order.step_list) - 1)
    assert sheet.work_done_on == day and sheet.actual_hours == 2.5
    text = body_text(render_sheet(sheet))
    assert f"1. {flat(order.step_list[0])} ticked by technician, {when}" in text
    assert "Brake pad set BP-2 2 each 1 each" in text  # planned 2, used 1
    assert f"2.5 h {day:%d %b %Y}" in text


def test_a_draft_over_two_plans_prints_the_note_on_its_merged_steps_as_its_page_does(telescope, users, client):
    mirror = subsystem_create(telescope, "primary_mirror", "Primary", counting_from=dt.date(2026, 1, 1))
    axis = subsystem_create(telescope, "axis1_drive", "Axis 1 drive", counting_from=dt.date(2026, 1, 1))
    made = services.work_order_from_due(
        [mirror.plans.get(name="Inspect and CO2-snow clean primary"), *axis.plans.all()], users["engineer"]
    )
    note = selectors.merged_steps_note(made)
    assert note.startswith("The steps of 2 plans were merged")
    client.force_login(users["viewer"])
    assert note in client.get(made.get_absolute_url()).content.decode()
    text = body_text(client.get(f"/workorders/{made.pk}/pdf/").content)
    assert text.index("Steps") < text.index(f"Read first: {flat(note)}") < text.index(flat(made.step_list[0]))


def test_an_order_with_lifting_figures_has_the_rigging_line(order, users, client):  # noqa: F811
    services.lift_set(order, {"diameter_mm": 700, "thickness_mm": 70, "material": "borosilicate", "fixture_kg": 60,
                              "legs": 2, "angle_deg": 60})
    client.force_login(users["viewer"])
    pages = PdfReader(io.BytesIO(client.get(f"/workorders/{order.pk}/pdf/").content)).pages
    assert "Rigging checked by (competent person)" in " ".join(flat(p.extract_text()) for p in pages)
