"""Specifications for the printed work order, observatory_ops.workorders.pdf (no database).

Every PDF is read back with pypdf, a PDF reader independent of reportlab, or rasterised with poppler's
pdftoppm. Extracted text is compared with whitespace collapsed, because reportlab wraps long lines.
"""

import dataclasses
import datetime as dt
import io
import subprocess

import numpy as np
import pytest
import qrcode
from conftest import require_tool
from pypdf import PdfReader
from qrcode.constants import ERROR_CORRECT_M

from observatory_ops.calc.lifting import lift_figures
from observatory_ops.workorders import pdf
from observatory_ops.workorders.cautions import PRECEDENCE_STATEMENT, SEVERITY_LABELS, cautions_for
from observatory_ops.workorders.pdf import render_batch, render_sheet
from observatory_ops.workorders.sheet import WHY_AS_OF, Sheet, SheetCaution, SheetLifting, SheetPart, SheetReading

POINTS_PER_INCH = 72
MM_PER_INCH = 25.4
# ISO 216: A4 is 210 mm x 297 mm; ANSI/ASME Y14.1: US Letter is 8.5 in x 11 in. In PDF points (1/72 in):
A4_POINTS = (210 / MM_PER_INCH * POINTS_PER_INCH, 297 / MM_PER_INCH * POINTS_PER_INCH)  # 595.28 x 841.89
LETTER_POINTS = (8.5 * POINTS_PER_INCH, 11 * POINTS_PER_INCH)  # 612 x 792

HOSTILE = ("<b>not bold</b>", "pads & clips", "<i unclosed italic", "&amp; stays five characters")

STEPS = (
    "Park the tube horizon-pointing and take the site out of robotic control.",
    "Lock out and tag every isolation point; test for absence of voltage at the drive terminals.",
    "Open the mirror cover by hand and inspect the primary at grazing angle with a torch.",
    "Measure the reflectance at five points with the portable reflectometer.",
    "Remove locks and tags, restore power and air, and home both axes.",
)


def make_sheet(**changes) -> Sheet:
    """A work order of the invented Mesa Pinta station, changed where a test needs it."""
    figures = lift_figures(diameter_mm=500, thickness_mm=80, material="borosilicate", fixture_kg=25, legs=2,
                           angle_deg=60, wll_kg=250)
    sheet = Sheet(
        number="WO-0007",
        title="Primary mirror inspection",
        site="Mesa Pinta Station",
        telescope="Scope B (0.5 m)",
        subsystems=("Primary mirror", "Mirror cover"),
        order_type="Preventive",
        priority="Normal",
        state="Issued",
        planned_date=dt.date(2026, 7, 1),
        issued_on=dt.date(2026, 6, 15),
        assignee="Rosa Delacroix",
        estimated_hours=3.5,
        why=("Mirror inspection: 91 of 90 calendar days since the last service, due 2026-06-30",),
        cautions=tuple(
            SheetCaution(caution.title, caution.text, caution.standard, SEVERITY_LABELS[caution.severity])
            for caution in cautions_for(["electrical", "optical_surface", "moving_machinery"])
        ),
        precedence_statement=PRECEDENCE_STATEMENT,
        isolation_needed=True,
        isolation_points=("AC mains isolator Q1, mount cabinet", "Compressed air valve V1 at the receiver"),
        steps=STEPS,
        parts=(SheetPart("Lens tissue", "LT-200", 2),),
        tools=("Torch", "Portable reflectometer"),
        readings=(SheetReading("Reflectance at 550 nm", "%", ">= 83 %"),),
        lifting=SheetLifting(
            rows=(("Total suspended load", f"{figures.total_kg:.1f} kg ({figures.total_lb:.1f} lb)"),),
            warnings=figures.warnings,
            checks=figures.checks,
        ),
        url="https://ops.mesa-pinta.example/workorders/7/",
        generated_at=dt.datetime(2026, 6, 15, 8, 30),
    )
    return dataclasses.replace(sheet, **changes)


def flat(text: str) -> str:
    return " ".join(text.split())


def page_texts(document: bytes) -> list[str]:
    return [page.extract_text() for page in PdfReader(io.BytesIO(document)).pages]


def body_text(document: bytes) -> str:
    """All pages' text without the page furniture (footer, running header), whitespace collapsed."""
    lines = (line for text in page_texts(document) for line in text.splitlines())
    return flat(" ".join(line for line in lines if not line.startswith("Work order ")))


def test_cautions_box_prints_before_the_first_step():
    text = body_text(render_sheet(make_sheet()))
    first_step = text.index(flat(STEPS[0]))
    assert text.index("CAUTIONS") < first_step
    for caution in cautions_for(["electrical", "optical_surface", "moving_machinery"]):
        assert text.index(flat(caution.text)) < first_step
        assert text.index(flat(caution.standard)) < first_step
    assert text.index(flat(PRECEDENCE_STATEMENT)) < first_step


NOTICE = (
    "Not up to date: this work order lacks hazards its subsystems now carry",
    "Its subsystems or their service plans now carry hazards it was made without: Work at height.",
    "Do not start or carry on the work from this sheet: ask the site engineer for one brought up to date.",
)


def test_a_notice_of_missing_hazards_prints_whole_under_the_header_before_the_work():
    text = body_text(render_sheet(make_sheet(hazards_notice=NOTICE)))
    positions = [text.index(line) for line in NOTICE]
    assert positions == sorted(positions)
    assert text.index(NOTICE[0]) > text.index("Primary mirror inspection")  # the title, in the header
    assert positions[-1] < text.index("Why this work is due") < text.index("CAUTIONS")


def test_no_notice_of_missing_hazards_for_an_order_up_to_date():
    assert "Not up to date" not in body_text(render_sheet(make_sheet()))


def test_a_steps_warning_prints_above_the_first_step():
    warning = "None of its steps is the lockout step."
    text = body_text(render_sheet(make_sheet(steps_warning=warning)))
    assert text.index("Steps") < text.index(f"Warning: {warning}") < text.index(flat(STEPS[0]))


def test_cautions_print_most_severe_first_whatever_order_they_come_in():
    cautions = (
        SheetCaution("Delicate optical surfaces", "Cover the mirror.", "Maker's notes", "Risk of damage to equipment"),
        SheetCaution("Stored pneumatic energy", "Vent the circuit.", "ISO 4414", "Risk of serious injury"),
        SheetCaution("Hazardous electrical energy", "Lock out the supply.", "NFPA 70E", "Danger to life"),
    )
    text = body_text(render_sheet(make_sheet(cautions=cautions)))
    positions = [text.index(caution) for caution in ("Lock out the supply.", "Vent the circuit.", "Cover the mirror.")]
    assert positions == sorted(positions)


def test_every_step_prints_numbered_and_in_order():
    steps = tuple(f"Step text number {index} for the technician." for index in range(1, 31))
    text = body_text(render_sheet(make_sheet(steps=steps)))
    positions = [text.index(f"{index}. {step}") for index, step in enumerate(steps, start=1)]
    assert positions == sorted(positions)


def test_header_sections_and_sign_off_all_print():
    text = body_text(render_sheet(make_sheet()))
    for expected in (
        "WO-0007", "Primary mirror inspection", "Mesa Pinta Station", "Scope B (0.5 m)", "Primary mirror, Mirror cover",
        "Preventive", "Normal", "Issued", "01 Jul 2026", "15 Jun 2026", "Rosa Delacroix", "3.5 h",
        "Why this work is due", "91 of 90 calendar days", "AC mains isolator Q1, mount cabinet", "Lens tissue",
        "LT-200", "Portable reflectometer", "Reflectance at 550 nm", ">= 83 %", "Findings", "Performed by",
        "Checked by", "Signature",
    ):
        assert expected in text, expected


def test_lifting_figures_list_the_checks_and_never_call_the_lift_safe():
    figures = lift_figures(diameter_mm=500, thickness_mm=80, material="borosilicate", fixture_kg=25, legs=2,
                           angle_deg=60, wll_kg=250)
    text = body_text(render_sheet(make_sheet()))
    lifting = text[text.index("Lifting figures") : text.index(flat(STEPS[0]))]
    assert f"{figures.total_kg:.1f} kg ({figures.total_lb:.1f} lb)" in lifting
    assert "What a competent person must check" in lifting
    for check in figures.checks:
        assert flat(check) in lifting
    assert "safe" not in lifting.lower()


def test_no_lifting_section_without_lifting_figures():
    assert "Lifting figures" not in body_text(render_sheet(make_sheet(lifting=None)))


@pytest.mark.parametrize("hostile", HOSTILE)
def test_markup_in_any_user_text_prints_literally(hostile):
    sheet = make_sheet(
        title=f"Title {hostile}",
        site=f"Site {hostile}",
        why=(f"Why {hostile}",),
        cautions=(SheetCaution(f"Caution {hostile}", f"Do {hostile}", f"Standard {hostile}", "Danger to life"),),
        isolation_needed=True,
        isolation_points=(f"Isolator {hostile}",),
        steps=(f"Step {hostile}",),
        parts=(SheetPart(f"Part {hostile}", f"No {hostile}", 1),),
        tools=(f"Tool {hostile}",),
        readings=(SheetReading(f"Reading {hostile}", f"unit {hostile}", f"limit {hostile}"),),
        lifting=SheetLifting(((f"Figure {hostile}", f"value {hostile}"),), (f"Warn {hostile}",), (f"Check {hostile}",)),
        findings=f"Found {hostile}",
    )
    text = body_text(render_sheet(sheet))
    for prefix in ("Title", "Site", "Why", "Caution", "Do", "Standard", "Isolator", "Step", "Part", "No", "Tool",
                   "Reading", "unit", "limit", "Figure", "value", "Warn", "Check", "Found"):
        assert f"{prefix} {hostile}" in text, prefix


def test_a_5000_character_finding_prints_whole_across_pages():
    sentence = "Clip 3 <b>loose</b> & pad worn <i unclosed; "
    finding = (sentence * (5000 // len(sentence) + 1))[:5000]
    document = render_sheet(make_sheet(findings=finding))
    assert len(PdfReader(io.BytesIO(document)).pages) >= 2
    assert flat(finding) in body_text(document)


def test_a_5000_character_word_wraps_without_failing():
    word = "x" * 5000
    document = render_sheet(make_sheet(findings=word, steps=(word,), title=word,
                                       readings=(SheetReading(word, "%", word),)))
    squeezed = "".join(body_text(document).split())
    assert squeezed.count(word) >= 2  # the finding and the step, each in one piece
    # The title and the reading's label and limit sit in table cells that split across pages, so the other
    # cells of their rows print in between; every character still prints.
    assert squeezed.count("x") >= 5 * len(word)


def test_control_characters_are_dropped_not_fatal():
    text = body_text(render_sheet(make_sheet(steps=("Bell\x07 and\x00 nul\r\nnext line",))))
    assert "Bell and nul next line" in text


@pytest.mark.parametrize(("paper", "size"), [("A4", A4_POINTS), ("letter", LETTER_POINTS)])
def test_every_page_has_the_paper_size_asked_for(paper, size):
    reader = PdfReader(io.BytesIO(render_sheet(make_sheet(findings="Worn pad. " * 600), paper=paper)))
    assert len(reader.pages) >= 2
    for page in reader.pages:
        assert float(page.mediabox.width) == pytest.approx(size[0], abs=0.01)
        assert float(page.mediabox.height) == pytest.approx(size[1], abs=0.01)


@pytest.mark.parametrize("paper", ["a5", "A3", "Letter ", ""])
def test_unknown_paper_is_refused(paper):
    with pytest.raises(ValueError, match="paper must be one of A4, letter"):
        render_sheet(make_sheet(), paper=paper)


def test_every_page_reads_page_i_of_n_and_the_work_order_number():
    pages = page_texts(render_sheet(make_sheet(findings="Worn pad. " * 800)))
    total = len(pages)
    assert total >= 3
    for number, text in enumerate(pages, start=1):
        assert f"page {number} of {total}" in text
        assert "Work order WO-0007" in text


def test_batch_starts_each_work_order_on_a_new_page_and_numbers_its_own_pages():
    sheets = [
        make_sheet(number="WO-0101"),
        make_sheet(number="WO-0102", findings="Worn pad. " * 800),
        make_sheet(number="WO-0103", steps=STEPS * 6),
    ]
    alone = [len(PdfReader(io.BytesIO(render_sheet(sheet))).pages) for sheet in sheets]
    pages = page_texts(render_batch(sheets))[2:]  # after the list of the batch's orders and its blank back
    # Each order but the last ends with a blank back page when its count is odd (tests/test_paper_layout.py).
    padded = [count + count % 2 for count in alone[:-1]] + alone[-1:]
    assert len(pages) == sum(padded)
    expected = [
        (sheet.number, page, count) for sheet, count, sides in zip(sheets, alone, padded, strict=True)
        for page in range(1, sides + 1)
    ]
    for text, (number, page, count) in zip(pages, expected, strict=True):
        assert f"Work order {number}" in text
        assert (f"page {page} of {count}" if page <= count else "This page is left blank.") in text
        assert ("WORK ORDER" in text) == (page == 1)


def test_empty_batch_is_refused():
    with pytest.raises(ValueError, match="no work orders"):
        render_batch([])


def test_address_too_long_for_a_qr_code_is_refused():
    with pytest.raises(ValueError, match="too long for a QR code"):
        render_sheet(make_sheet(url="https://ops.example/" + "a" * 5000))


@pytest.mark.parametrize(
    "changes",
    [{"number": "  "}, {"estimated_hours": -1.0}, {"estimated_hours": float("nan")}, {"precedence_statement": ""},
     {"url": ""}, {"steps": "Open the cover and inspect the mirror."}, {"hazards_notice": "Not up to date"}],
)
def test_sheet_refuses_values_it_cannot_print(changes):
    with pytest.raises(ValueError):
        make_sheet(**changes)


@pytest.mark.parametrize("quantity", [-2, float("inf"), float("nan")])
def test_part_quantity_must_be_a_number_not_below_zero(quantity):
    with pytest.raises(ValueError, match="quantity"):
        SheetPart("Lens tissue", "LT-200", quantity)


def test_first_page_renders_to_a_png_with_pdftoppm(tmp_path):
    pdftoppm = require_tool("pdftoppm", "pdftoppm (poppler-utils)")
    source = tmp_path / "work_order.pdf"
    source.write_bytes(render_sheet(make_sheet()))
    subprocess.run([pdftoppm, "-png", "-r", "60", "-f", "1", "-l", "1", "-singlefile", str(source),
                    str(tmp_path / "page")], check=True, timeout=60)
    image = tmp_path / "page.png"
    assert image.exists()
    assert image.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert image.stat().st_size > 10_000


def read_pgm(path) -> np.ndarray:
    """A binary greyscale PGM (P5, 8 bit, as pdftoppm -gray writes it) as a rows x columns array."""
    data = path.read_bytes()
    magic, width, height, maximum, pixels = data.split(maxsplit=4)
    assert magic == b"P5" and maximum == b"255"
    return np.frombuffer(pixels[: int(width) * int(height)], dtype=np.uint8).reshape(int(height), int(width))


def test_qr_code_at_the_top_right_draws_the_address_module_for_module(tmp_path):
    # Reference: the module matrix of the qrcode package (ISO/IEC 18004) for the same address and settings,
    # read back from poppler's rendering of the page, one sample at the centre of each module.
    pdftoppm = require_tool("pdftoppm", "pdftoppm (poppler-utils)")
    sheet = make_sheet()
    source = tmp_path / "work_order.pdf"
    source.write_bytes(render_sheet(sheet))
    dpi = 300
    subprocess.run([pdftoppm, "-gray", "-r", str(dpi), "-f", "1", "-l", "1", "-singlefile", str(source),
                    str(tmp_path / "page")], check=True, timeout=60)
    pixels = read_pgm(tmp_path / "page.pgm")

    code = qrcode.QRCode(error_correction=ERROR_CORRECT_M, border=4)
    code.add_data(sheet.url)
    code.make(fit=True)
    expected = np.array(code.get_matrix())

    scale = dpi / POINTS_PER_INCH
    left = (A4_POINTS[0] - pdf.MARGIN_X - pdf.QR_SIZE) * scale
    top = pdf.MARGIN_TOP * scale
    module = pdf.QR_SIZE * scale / len(expected)
    centres = (np.arange(len(expected)) + 0.5) * module
    rows = np.rint(top + centres).astype(int)
    columns = np.rint(left + centres).astype(int)
    drawn = pixels[np.ix_(rows, columns)] < 128
    assert np.array_equal(drawn, expected)


def test_a_reading_beyond_its_limit_is_flagged_in_the_table_and_listed_under_it():
    readings = (
        SheetReading("Settle time after a slew (Axis 1 drive)", "s", "at most 1", recorded="5", beyond_limit=True),
        SheetReading("Motor current (Axis 1 drive)", "A", "", recorded="0"),
    )
    text = body_text(render_sheet(make_sheet(readings=readings)))
    assert "5 (BEYOND LIMIT)" in text
    assert ("Beyond its limit: Settle time after a slew (Axis 1 drive): 5 s (limit at most 1), recorded as "
            "measured.") in text
    assert text.count("BEYOND LIMIT") == 1 and text.count("Beyond its limit") == 1  # the current of 0 is not flagged


def test_no_beyond_limit_note_when_every_reading_is_within_its_limit():
    readings = (SheetReading("Settle time after a slew (Axis 1 drive)", "s", "at most 1", recorded="0.4"),)
    text = body_text(render_sheet(make_sheet(readings=readings)))
    assert "0.4" in text and "beyond" not in text.lower()


def test_the_due_figures_say_the_day_they_were_computed():
    """A traceability review defended a printout eight days late: its brake cycles were those of the day the order was
    made, with nothing saying so. The page and the paper say the day, above the figures."""
    text = flat(body_text(render_sheet(make_sheet(why_as_of=dt.date(2026, 6, 12)))))
    said = WHY_AS_OF.format(day="12 Jun 2026")
    assert said in text and text.index("Why this work is due") < text.index(said) < text.index("91 of 90 calendar")
    assert "As computed when this order was made" not in flat(body_text(render_sheet(make_sheet(why=()))))


def test_readings_still_to_take_say_where_to_write_why_one_was_not_taken():
    assert pdf.NOT_MEASURED_ON_PAPER in flat(body_text(render_sheet(make_sheet())))


def test_work_still_to_do_under_a_lockout_prints_a_line_for_each_persons_lock():
    """A group lockout protects each person only with a lock of their own on every point (OSHA 29 CFR
    1910.147(f)(3)); the page records one tick per point, so the paper has a table for who put a lock on, its number
    and when it came off (a tablet review found no place to write it). Under the isolation points, before the steps;
    not on finished work, nor on work with no isolation points."""
    from observatory_ops.workorders.pdf import PERSONAL_LOCKS_HEADING, PERSONAL_LOCKS_NOTE

    text = body_text(render_sheet(make_sheet()))
    heading = text.index(flat(PERSONAL_LOCKS_HEADING))
    assert text.index("Compressed air valve V1 at the receiver") < heading < text.index(flat(STEPS[0]))
    assert flat(PERSONAL_LOCKS_NOTE) in text
    assert "Name Lock or tag number On (date, time) Initials on Off (date, time) Initials off" in text
    for finished_or_free in (make_sheet(performed_by="Rosa Delacroix", performed_on=dt.date(2026, 7, 1)),
                             make_sheet(isolation_needed=False, isolation_points=())):
        assert flat(PERSONAL_LOCKS_HEADING) not in body_text(render_sheet(finished_or_free))


def test_the_readings_follow_the_steps_that_take_them():
    """A tablet review turned pages from the steps to the readings, printed after the parts and tools."""
    text = body_text(render_sheet(make_sheet()))
    assert text.index(flat(STEPS[-1])) < text.index("Reflectance at 550 nm") < text.index("Lens tissue")
