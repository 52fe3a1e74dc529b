"""The printed work order's layout as a reviewer read it on paper (observatory_ops.workorders.pdf, no database except
where marked): separate sign-off lines, a batch padded for printing on both sides with a list of its orders first,
headings never left alone at a page foot, warnings without tick boxes, the time zone named, quantities that read,
and lifting figures that show their inputs and formulas.

PDFs are read back with pypdf (independent of reportlab); what is drawn where is read from the page's own drawing
operators (``re`` rectangles, ``l`` line ends).
"""

import dataclasses
import datetime as dt
import io
import re
import zoneinfo

import pytest
from pypdf import PdfReader
from test_workorder_pdf import STEPS, body_text, flat, make_sheet, page_texts

from observatory_ops.calc.lifting import DENSITY, lift_figures
from observatory_ops.workorders import pdf, selectors
from observatory_ops.workorders.models import amount_text
from observatory_ops.workorders.pdf import render_batch, render_sheet
from observatory_ops.workorders.sheet import WARNING_PREFIX, SheetLifting, SheetPart

DENVER = zoneinfo.ZoneInfo("America/Denver")


def _content(document: bytes, page: int) -> str:
    return PdfReader(io.BytesIO(document)).pages[page].get_contents().get_data().decode("latin-1")


# --- 1. sign-off -----------------------------------------------------------------------------------------------


def test_name_signature_and_date_each_have_a_line_of_their_own():
    """Each sign-off row draws three separate lines (name, signature, date) with a gap between them, not one rule."""
    document = render_sheet(make_sheet(steps=STEPS[:1]))
    content = _content(document, -1)  # the sign-off is on the last page
    # reportlab draws a table line as "x1 y1 m x2 y2 l"; the sign-off's are at 0.8 pt, in ink.
    lines = [tuple(float(v) for v in match) for match in re.findall(
        r"([\d.]+) ([\d.]+) m ([\d.]+) ([\d.]+) l", content)]
    by_height: dict[float, list[tuple[float, float]]] = {}
    for x1, y1, x2, y2 in lines:
        if y1 == y2:
            by_height.setdefault(y1, []).append((min(x1, x2), max(x1, x2)))
    rows = [sorted(spans) for spans in by_height.values() if len(spans) == 3]
    assert len(rows) >= 4, rows  # performed by, three crew lines, checked by (a row may share its height)
    for spans in rows:
        for (_, end), (start, _) in zip(spans, spans[1:], strict=False):
            assert start - end >= pdf._SIGN_OFF_GAP - 10, spans  # a visible gap (less the cell padding)
    text = body_text(document)
    assert text.index("Name") < text.index("Signature") < text.index("Date") < text.index("Performed by")


# --- 2. batch --------------------------------------------------------------------------------------------------


def test_a_batch_lists_its_orders_first_and_starts_each_on_a_front_page():
    sheets = [
        make_sheet(number="WO-0201", title="Odd one", planned_date=dt.date(2026, 7, 2)),
        make_sheet(number="WO-0202", title="Long one", steps=STEPS * 6, planned_date=dt.date(2026, 7, 1)),
        make_sheet(number="WO-0203", title="Last one"),
    ]
    alone = [len(PdfReader(io.BytesIO(render_sheet(sheet))).pages) for sheet in sheets]
    pages = [flat(text) for text in page_texts(render_batch(sheets))]
    listing = pages[0]
    assert "WORK ORDERS IN THIS BATCH" in listing and "3 work orders, planned 01 Jul 2026 to 02 Jul 2026" in listing
    for position, (sheet, count) in enumerate(zip(sheets, alone, strict=True), start=1):
        assert f"{position} {sheet.number} {sheet.title} {sheet.telescope} {pdf._date_text(sheet.planned_date)} " \
               f"{sheet.state} {count}" in listing
    assert "This page is left blank." in pages[1]  # the list's back
    starts = [index for index, text in enumerate(pages) if "WORK ORDER " in text and "WORK ORDERS" not in text]
    assert all(index % 2 == 0 for index in starts), starts  # pages 1, 3, 5 ...: each order on a front
    for start, end, count in zip(starts, [*starts[1:], len(pages)], alone, strict=True):
        own = pages[start:end]
        assert len(own) in (count, count + 1)
        if len(own) > count:
            assert "This page is left blank." in own[-1] and "left blank" in own[-1]
    assert sum(alone) + sum(count % 2 for count in alone[:-1]) + 2 == len(pages)  # the last is not padded


def test_a_single_order_has_no_list_and_no_blank_back():
    pages = page_texts(render_sheet(make_sheet()))
    assert not any("left blank" in text or "IN THIS BATCH" in text for text in pages)


# --- 3. headings kept with what they head ----------------------------------------------------------------------


@pytest.mark.parametrize("steps", range(1, 31))
def test_no_heading_is_the_last_thing_on_a_page_and_a_mirrors_choices_stay_together(steps):
    choices = {mirror: tuple(f"{mirror}: {answer}" for answer in ("not cleaned", "CO2 snow", "washed", "wiped"))
               for mirror in ("M1", "M2")}
    sheet = make_sheet(steps=STEPS[:1] * steps, other_part_rows=3,
                       cleaning_to_record=tuple((f"Mirror {mirror}", answers) for mirror, answers in choices.items()))
    pages = page_texts(render_sheet(sheet))
    headings = ("Other parts used (from the register, not listed above)", "Mirror M1", "Mirror M2", "Mirror cleaning",
                "What a competent person must check before the lift", "Energy isolation points", "Lifting figures",
                "Steps", "Parts", "Tools")
    for text in pages[:-1]:
        body = [line for line in text.splitlines()  # less the running header and the footer's page number
                if line.strip() and not line.startswith("Work order ") and not re.fullmatch(r"page \d+ of \d+",
                                                                                             line.strip())]
        assert not any(body[-1].startswith(heading) for heading in headings), (steps, body[-1])
    for mirror, answers in choices.items():
        holding = {index for index, text in enumerate(pages) for line in (f"Mirror {mirror}", *answers)
                   if line in text}
        assert len(holding) == 1, (steps, mirror, holding)


def test_isolation_points_running_onto_the_next_page_repeat_their_heading_continued():
    points = tuple(f"Isolator {n}: mount cabinet, prove dead at the drive terminals" for n in range(60))
    pages = page_texts(render_sheet(make_sheet(isolation_points=points)))
    holding = [index for index, text in enumerate(pages) if "Isolator " in text]
    assert len(holding) >= 2
    for index in holding[1:]:
        assert "Energy isolation points (continued)" in pages[index]
    after = pages[holding[-1] + 1:]
    assert not any("Energy isolation points (continued)" in text for text in after)


def test_a_table_splits_neither_after_its_first_row_nor_before_its_last():
    """The header with one row alone at a page foot, or one row alone on the next page, does not happen."""
    parts = tuple(SheetPart(f"Part {n}", f"P-{n:03d}", 1) for n in range(40))
    for steps in range(0, 40, 3):
        pages = page_texts(render_sheet(make_sheet(parts=parts, steps=STEPS[:1] * steps)))
        rows_per_page = [sum(f"P-{n:03d}" in text for n in range(40)) for text in pages]
        assert all(count == 0 or count >= 2 for count in rows_per_page), (steps, rows_per_page)


def test_the_precedence_statement_never_stands_alone_under_the_continued_cautions_head():
    """A reviewer found the closing precedence statement alone on page 2 under the repeated cautions head: it is
    carried over with the last caution at least."""
    for lines in range(0, 60, 2):
        why = tuple(f"Reason {n}: a line to move the cautions box down the page" for n in range(lines))
        pages = page_texts(render_sheet(make_sheet(why=why)))
        for text in pages:
            if "Local codes and regulations" in flat(text) and "CAUTIONS" in text:
                assert "Standard:" in text, (lines, text)


def test_the_lifting_figures_table_is_never_split():
    figures = lift_figures(700, 70, "borosilicate", hole_mm=160, fixture_kg=95)
    rows = tuple(selectors.lift_rows(figures, {"diameter_mm": 700, "thickness_mm": 70, "material": "borosilicate",
                                               "hole_mm": 160}))
    lifting = SheetLifting(rows, figures.warnings, figures.checks)
    for steps in range(0, 30, 2):
        sheet = make_sheet(lifting=lifting, isolation_points=("Isolator",) * steps)
        pages = page_texts(render_sheet(sheet))
        assert sum(("Mirror diameter D" in text) or ("Tension per bearing leg" in text) for text in pages) == 1, steps


# --- 4. warnings -----------------------------------------------------------------------------------------------


def test_a_warning_among_the_isolation_points_has_no_tick_box():
    gap = "No isolation point is registered for the dome drives, which have a supply of their own."
    with_warning = make_sheet(isolation_points=(f"{WARNING_PREFIX}{gap}", "AC mains isolator Q1"))
    without = make_sheet(isolation_points=("AC mains isolator Q1",))
    box = f"{pdf._TICK_BOX:g} {pdf._TICK_BOX:g} re"
    assert _content(render_sheet(with_warning), 1).count(box) == _content(render_sheet(without), 1).count(box)
    text = body_text(render_sheet(with_warning))
    assert f"WARNING: {gap}" in text and text.index("WARNING") < text.index("AC mains isolator Q1")


# --- 5. time zone ----------------------------------------------------------------------------------------------


def test_the_printing_time_names_the_sites_time_zone_once():
    printed = dt.datetime(2026, 12, 3, 5, 38, tzinfo=DENVER)
    text = body_text(render_sheet(make_sheet(generated_at=printed)))
    assert "03 Dec 2026 05:38 MST" in text
    assert text.count("America/Denver") == 1


# --- 6. quantities ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("quantity, unit, printed", [
    (2, "set", "2 sets"), (1, "set", "1 set"), (1, "sets", "1 set"), (3, "pack", "3 packs"),
    (2, "cylinder", "2 cylinders"), (4, "swab", "4 swabs"), (2, "each", "2 each"), (1.5, "m", "1.5 m"),
    (2, "box", "2 boxes"), (0, "pair", "0 pairs"),
])
def test_a_quantity_reads_with_its_unit(quantity, unit, printed):
    assert amount_text(quantity, unit) == printed


def test_the_parts_table_prints_plural_units():
    parts = (SheetPart("Brake pad set", "VR-BRK-07", 2, unit="set"),)
    assert "Brake pad set VR-BRK-07 2 sets" in body_text(render_sheet(make_sheet(parts=parts)))


# --- 7. lifting figures traceable --------------------------------------------------------------------------------


def test_lifting_rows_show_the_inputs_the_density_and_its_source_and_the_formulas():
    """Hand check: pi/4 x (0.70^2 - 0.16^2) m^2 x 0.070 m x 2230 kg/m^3 = 56.9 kg (CRC density of borosilicate);
    with a 95 kg cell, W = 151.9 kg; on 2 legs at 60 degrees, T = 151.9 / (2 sin 60) = 87.7 kg (ASME B30.9)."""
    inputs = {"diameter_mm": 700, "thickness_mm": 70, "hole_mm": 160, "material": "borosilicate",
              "lightweighting_fraction": 0, "fixture_kg": 95, "legs": 2, "angle_deg": 60, "wll_kg": None}
    rows = dict(selectors.lift_rows(lift_figures(**inputs), inputs))
    assert rows["Mirror diameter D"] == "700 mm" and rows["Edge thickness t"] == "70 mm"
    assert rows["Central hole H"] == "160 mm"
    assert rows["Lightweighting f, fraction of the blank removed"] == "none (f = 0)"
    assert rows["Material, density"] == f"borosilicate, 2.23 g/cm³ ({DENSITY['borosilicate'].source})"
    assert rows["Mirror mass m = pi/4 x (D² - H²) x t x (1 - f) x density"].startswith("56.9 kg")
    assert rows["Total suspended load"].startswith("151.9 kg")
    assert rows["Leg angle from horizontal a"] == "60 deg (load factor 1 / sin a = 1.155)"
    tension = next(value for label, value in rows.items() if label.startswith("Tension per bearing leg T = W / (n"))
    assert tension.startswith("87.7 kg")
    # 87.7 kg x standard gravity 9.80665 m/s² (3rd CGPM, 1901) = 860 N: the force the kilograms stand for.
    assert tension.endswith("as a force 860 N")


def test_a_density_recalled_from_memory_says_so():
    inputs = {"diameter_mm": 400, "thickness_mm": 60, "material": "plate_glass"}
    rows = dict(selectors.lift_rows(lift_figures(**inputs), inputs))
    assert "from memory" in rows["Material, density"] and rows["Central hole H"] == "none (H = 0)"


def test_without_inputs_the_rows_still_give_the_formulas():
    rows = dict(selectors.lift_rows(lift_figures(500, 50, "borosilicate", fixture_kg=0)))
    assert "Mirror diameter D" not in rows
    assert any("T = W / (n sin a)" in label for label in rows)


def test_the_printed_lifting_figures_carry_inputs_and_formulas():
    inputs = {"diameter_mm": 700, "thickness_mm": 70, "hole_mm": 160, "material": "borosilicate", "fixture_kg": 95}
    figures = lift_figures(**inputs)
    sheet = make_sheet(lifting=SheetLifting(tuple(selectors.lift_rows(figures, inputs)), figures.warnings,
                                            figures.checks))
    text = body_text(render_sheet(sheet))
    for expected in ("Mirror diameter D 700 mm", "CRC Handbook of Chemistry and Physics",
                     "pi/4 x (D² - H²) x t x (1 - f) x density", "T = W / (n sin a)"):
        assert expected in text, expected


def test_changed_sheets_still_build(tmp_path):
    """The tidy-up of the story (continued headings, kept-together groups) leaves every section printing."""
    sheet = dataclasses.replace(make_sheet(), steps=STEPS * 8, isolation_points=("Isolator",) * 30)
    text = body_text(render_sheet(sheet))
    assert "Sign-off" in text and "Steps (continued)" in " ".join(page_texts(render_sheet(sheet)))
