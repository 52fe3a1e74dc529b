"""The printed work order: a ``Sheet`` laid out as a PDF with reportlab, A4 or US Letter.

Pure layout, no Django and no database: the caller fills a :class:`~observatory_ops.workorders.sheet.Sheet`.
Order on the page follows the work: header and QR code, why the work is due, the cautions box before
anything else of the work, isolation points, lifting figures, steps, parts and tools, readings, findings,
sign-off. Everything prints in black, white and grey, so a mono printer loses nothing.

Every string of the sheet is user text. reportlab's ``Paragraph`` parses markup, so each one passes through
:func:`_text` (XML escaping) before it reaches a Paragraph, and prints literally. Long text wraps, and long
paragraphs and table rows split across pages rather than failing.

Page numbers read "page i of n" within each work order, also in a batch; the canvas holds pages back until
the end of the document to know n (:class:`_NumberedCanvas`).
"""

from __future__ import annotations

import io
from collections import Counter
from collections.abc import Sequence
from xml.sax.saxutils import escape

import qrcode
from qrcode.constants import ERROR_CORRECT_M
from qrcode.exceptions import DataOverflowError
from reportlab.graphics.shapes import Drawing, Path, Rect
from reportlab.lib.colors import Color, black
from reportlab.lib.enums import TA_CENTER
from reportlab.lib.pagesizes import A4, LETTER
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import (
    BaseDocTemplate,
    Flowable,
    Frame,
    KeepTogether,
    PageBreak,
    PageTemplate,
    Paragraph,
    Spacer,
    Table,
    TableStyle,
)

from observatory_ops.workorders.cautions import SEVERITY_LABELS
from observatory_ops.workorders.sheet import Sheet, SheetCaution

PAPER_SIZES: dict[str, tuple[float, float]] = {"A4": A4, "letter": LETTER}

MARGIN_X = 16 * mm
MARGIN_TOP = 16 * mm
MARGIN_BOTTOM = 18 * mm
QR_SIZE = 28 * mm
FINDINGS_LINES = 7

INK = black
GREY = Color(0.35, 0.35, 0.35)
RULE = Color(0.6, 0.6, 0.6)
SHADE = Color(0.9, 0.9, 0.9)

_BODY = ParagraphStyle("wo-body", fontName="Helvetica", fontSize=9.5, leading=12.5)
_SMALL = ParagraphStyle("wo-small", parent=_BODY, fontSize=8, leading=10)
_LABEL = ParagraphStyle("wo-label", parent=_SMALL, fontSize=7, leading=9, textColor=GREY)
_QR_CAPTION = ParagraphStyle("wo-qr-caption", parent=_LABEL, alignment=TA_CENTER)
_CELL_HEAD = ParagraphStyle("wo-cell-head", parent=_SMALL, fontName="Helvetica-Bold")
_NUMBER = ParagraphStyle("wo-number", parent=_BODY, fontName="Helvetica-Bold", fontSize=16, leading=19)
_TITLE = ParagraphStyle("wo-title", parent=_BODY, fontName="Helvetica-Bold", fontSize=12.5, leading=15.5, spaceAfter=2)
_HEADING = ParagraphStyle(
    "wo-heading", parent=_BODY, fontName="Helvetica-Bold", fontSize=11, leading=14, spaceBefore=11, spaceAfter=4,
    keepWithNext=1,
)
_NOTE = ParagraphStyle("wo-note", parent=_SMALL, textColor=GREY, spaceAfter=4)
_BULLET = ParagraphStyle("wo-bullet", parent=_BODY, leftIndent=11, bulletIndent=1, spaceAfter=2)
_ITEM = ParagraphStyle("wo-item", parent=_BODY, spaceAfter=4)
_CAUTIONS_HEAD = ParagraphStyle("wo-cautions-head", parent=_BODY, fontName="Helvetica-Bold", fontSize=12, leading=15)
_CAUTION_TITLE = ParagraphStyle("wo-caution-title", parent=_BODY, fontName="Helvetica-Bold", spaceAfter=2)
_STANDARD = ParagraphStyle("wo-standard", parent=_SMALL, spaceBefore=3)
_PRECEDENCE = ParagraphStyle("wo-precedence", parent=_BODY, fontName="Helvetica-Oblique")

_TICK_BOX = 8.5
_TICK_INDENT = 15.0
_NUMBER_WIDTH = 17.0
_WRITING_GAP = 21.0
# A table row taller than a page (one cell holding a very long text) is cut inside the row, leaving at
# least this much of it at the foot of a page; shorter rows move to the next page whole.
_SPLIT_IN_ROW_PT = 30
_SMALLEST_BODY_HEIGHT = min(height for _, height in PAPER_SIZES.values()) - MARGIN_TOP - MARGIN_BOTTOM

_TABLE_GRID = [
    ("VALIGN", (0, 0), (-1, -1), "TOP"),
    ("LEFTPADDING", (0, 0), (-1, -1), 4),
    ("RIGHTPADDING", (0, 0), (-1, -1), 4),
    ("TOPPADDING", (0, 0), (-1, -1), 3),
    ("BOTTOMPADDING", (0, 0), (-1, -1), 4),
    ("LINEBELOW", (0, 0), (-1, 0), 0.9, INK),
    ("LINEBELOW", (0, 1), (-1, -1), 0.4, RULE),
]

# C0 control characters other than tab and newline print as black boxes; carriage returns are dropped so
# Windows line ends read as one break.
_CONTROL_CHARACTERS = dict.fromkeys(code for code in range(32) if code not in (9, 10))


def _text(value: str) -> str:
    """User text made safe for a reportlab Paragraph: escaped, printed literally, line breaks kept."""
    return escape(str(value).translate(_CONTROL_CHARACTERS)).replace("\n", "<br/>")


def _para(value: str, style: ParagraphStyle = _BODY) -> Paragraph:
    return Paragraph(_text(value), style)


def _shorten(value: str, limit: int) -> str:
    """A one-line version of user text for the page furniture drawn straight on the canvas."""
    line = " ".join(str(value).translate(_CONTROL_CHARACTERS).split())
    return line if len(line) <= limit else line[: limit - 3] + "..."


class _Table(Table):
    """A table that splits between rows, and inside a row only when that row could not fit on any page.

    reportlab's in-row split, left on, also cuts an ordinary row in the space left at the foot of a page
    after a split between rows, which prints the repeated header twice on one page.
    """

    def split(self, availWidth, availHeight):  # noqa: N803 - reportlab's names
        self.splitInRow = 0
        parts = super().split(availWidth, availHeight)
        if parts:
            return parts
        header = self.repeatRows if isinstance(self.repeatRows, int) else max(self.repeatRows) + 1
        if header >= len(self._rowHeights):
            return parts
        if sum(self._rowHeights[: header + 1]) > _SMALLEST_BODY_HEIGHT:
            self.splitInRow = _SPLIT_IN_ROW_PT
            parts = super().split(availWidth, availHeight)
        return parts


def _table(rows: list[list], col_widths: list[float]) -> _Table:
    """A ruled table with a bold header row, repeated on each page it runs onto."""
    return _Table(rows, colWidths=col_widths, repeatRows=1, style=TableStyle(_TABLE_GRID), hAlign="LEFT")


class _SheetStart(Flowable):
    """Invisible marker at the top of each work order: tells the canvas which work order the page belongs to."""

    def __init__(self, index: int, sheet: Sheet):
        super().__init__()
        self._index = index
        self._sheet = sheet

    def wrap(self, avail_width, avail_height):
        return 0, 0

    def draw(self):
        self.canv.work_order = (self._index, self._sheet.number, self._sheet.title)


class _Ticked(Flowable):
    """A paragraph with a tick box, and optionally a step number, in its left margin.

    Splits across pages like the paragraph it holds; the box and the number print on the first part only.
    """

    def __init__(self, paragraph: Paragraph, number: str = "", first_part: bool = True):
        super().__init__()
        self._paragraph = paragraph
        self._number = number
        self._first_part = first_part
        self._indent = _TICK_INDENT + (_NUMBER_WIDTH if number else 0)

    def wrap(self, avail_width, avail_height):
        _, height = self._paragraph.wrap(avail_width - self._indent, avail_height)
        self.width, self.height = avail_width, height
        return avail_width, height

    def split(self, avail_width, avail_height):
        parts = self._paragraph.split(avail_width - self._indent, avail_height)
        return [
            _Ticked(part, self._number, first_part=self._first_part and position == 0)
            for position, part in enumerate(parts)
        ]

    def getSpaceBefore(self):  # noqa: N802 - reportlab's name
        return self._paragraph.getSpaceBefore()

    def getSpaceAfter(self):  # noqa: N802 - reportlab's name
        return self._paragraph.getSpaceAfter()

    def draw(self):
        canvas = self.canv
        if self._first_part:
            style = self._paragraph.style
            baseline = self.height - style.fontSize
            canvas.saveState()
            canvas.setLineWidth(0.8)
            canvas.setStrokeColor(INK)
            canvas.rect(0, baseline - 1, _TICK_BOX, _TICK_BOX, stroke=1, fill=0)
            if self._number:
                canvas.setFont("Helvetica-Bold", style.fontSize)
                canvas.drawRightString(_TICK_INDENT + _NUMBER_WIDTH - 5, baseline, self._number)
            canvas.restoreState()
        self._paragraph.drawOn(canvas, self._indent, 0)


class _WritingLines(Flowable):
    """Blank ruled lines to write on by hand; splits between lines at a page break."""

    def __init__(self, count: int):
        super().__init__()
        self._count = count

    def wrap(self, avail_width, avail_height):
        self.width, self.height = avail_width, self._count * _WRITING_GAP
        return self.width, self.height

    def split(self, avail_width, avail_height):
        fitting = int(avail_height // _WRITING_GAP)
        if fitting < 1:
            return []
        return [_WritingLines(fitting), _WritingLines(self._count - fitting)]

    def draw(self):
        self.canv.saveState()
        self.canv.setStrokeColor(RULE)
        self.canv.setLineWidth(0.5)
        for line in range(self._count):
            self.canv.line(0, line * _WRITING_GAP, self.width, line * _WRITING_GAP)
        self.canv.restoreState()


def _qr_drawing(url: str, size: float = QR_SIZE) -> Drawing:
    """The work order's address as a QR code, drawn as vector rectangles (one path, one per run of dark modules).

    The matrix comes from the ``qrcode`` package (ISO/IEC 18004), with its four-module quiet zone, at error
    correction level M; drawing it as vectors avoids raster images and PIL.
    """
    code = qrcode.QRCode(error_correction=ERROR_CORRECT_M, border=4)
    code.add_data(url)
    try:
        code.make(fit=True)
    except DataOverflowError as error:
        raise ValueError(f"the work order address is too long for a QR code ({len(url)} characters)") from error
    matrix = code.get_matrix()
    module = size / len(matrix)
    path = Path(fillColor=INK, strokeColor=None, strokeWidth=0)
    for row_index, row in enumerate(matrix):
        top = size - row_index * module
        bottom = top - module
        column = 0
        while column < len(row):
            if not row[column]:
                column += 1
                continue
            end = column
            while end < len(row) and row[end]:
                end += 1
            path.moveTo(column * module, bottom)
            path.lineTo(end * module, bottom)
            path.lineTo(end * module, top)
            path.lineTo(column * module, top)
            path.closePath()
            column = end
    drawing = Drawing(size, size)
    drawing.add(path)
    return drawing


def _date_text(value) -> str:
    return value.isoformat() if value is not None else "not set"


def _heading(title: str) -> Paragraph:
    return Paragraph(title, _HEADING)


def _none_listed(text: str) -> Paragraph:
    return Paragraph(text, _NOTE)


def _header(sheet: Sheet, width: float) -> list[Flowable]:
    left = [
        Paragraph("WORK ORDER", _LABEL),
        _para(sheet.number, _NUMBER),
        _para(sheet.title, _TITLE),
        _para(f"{sheet.site} \N{MIDDLE DOT} {sheet.telescope}"),
        _para("Subsystems: " + (", ".join(sheet.subsystems) or "none named"), _SMALL),
    ]
    right = [_qr_drawing(sheet.url), Paragraph("Scan to open online", _QR_CAPTION)]
    top = _Table(
        [[left, right]],
        colWidths=[width - QR_SIZE - 6, QR_SIZE + 6],
        style=TableStyle([
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ("LEFTPADDING", (0, 0), (-1, -1), 0),
            ("RIGHTPADDING", (0, 0), (-1, -1), 0),
            ("TOPPADDING", (0, 0), (-1, -1), 0),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 0),
            ("LEFTPADDING", (1, 0), (1, 0), 6),
        ]),
    )
    facts = [
        ("Type", sheet.order_type),
        ("Priority", sheet.priority),
        ("State", sheet.state),
        ("Estimated hours", f"{sheet.estimated_hours:g} h"),
        ("Planned date", _date_text(sheet.planned_date)),
        ("Issued", _date_text(sheet.issued_on)),
        ("Assignee", sheet.assignee or "not assigned"),
        ("Printed", sheet.generated_at.strftime("%Y-%m-%d %H:%M") if sheet.generated_at else ""),
    ]
    cells = [[Paragraph(label, _LABEL), _para(value)] for label, value in facts]
    grid = _Table(
        [cells[:4], cells[4:]],
        colWidths=[width / 4] * 4,
        style=TableStyle([
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ("LEFTPADDING", (0, 0), (-1, -1), 0),
            ("RIGHTPADDING", (0, 0), (-1, -1), 6),
            ("TOPPADDING", (0, 0), (-1, -1), 4),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 3),
            ("LINEABOVE", (0, 0), (-1, 0), 1.2, INK),
            ("LINEBELOW", (0, -1), (-1, -1), 1.2, INK),
        ]),
    )
    return [top, Spacer(1, 6), grid]


def _why(sheet: Sheet) -> list[Flowable]:
    if not sheet.why:
        return [_heading("Why this work is due"), _none_listed("Raised by hand, not from a due item.")]
    return [
        _heading("Why this work is due"),
        *(Paragraph(_text(line), _BULLET, bulletText="\N{BULLET}") for line in sheet.why),
    ]


_SEVERITY_RANK = {label: severity for severity, label in SEVERITY_LABELS.items()}


def _most_severe_first(cautions: Sequence[SheetCaution]) -> list[SheetCaution]:
    """Cautions by severity label, most severe first, keeping the given order within a severity.

    A label outside the caution library's ``SEVERITY_LABELS`` ranks with the most severe: the sheet cannot
    tell how serious an unknown hazard is, so it is not pushed down the box.
    """
    most_severe = max(_SEVERITY_RANK.values())
    return sorted(cautions, key=lambda caution: -_SEVERITY_RANK.get(caution.severity_label, most_severe))


def _cautions(sheet: Sheet, width: float) -> list[Flowable]:
    """The framed cautions box, most severe first, closed by the precedence statement."""
    rows: list[list] = [[Paragraph("CAUTIONS \N{EN DASH} read before you start, apply throughout", _CAUTIONS_HEAD)]]
    for caution in _most_severe_first(sheet.cautions):
        rows.append([[
            Paragraph(f"{_text(caution.severity_label.upper())} \N{MIDDLE DOT} {_text(caution.title)}", _CAUTION_TITLE),
            _para(caution.text),
            Paragraph(f"Standard: {_text(caution.standard)}", _STANDARD),
        ]])
    if not sheet.cautions:
        rows.append([_para("No hazard cautions were selected for this work.")])
    rows.append([_para(sheet.precedence_statement, _PRECEDENCE)])
    box = _Table(
        rows,
        colWidths=[width],
        repeatRows=1,
        style=TableStyle([
            ("BOX", (0, 0), (-1, -1), 1.8, INK),
            ("LINEBELOW", (0, 0), (-1, 0), 1.2, INK),
            ("LINEBELOW", (0, 1), (-1, -3), 0.5, RULE),
            ("LINEABOVE", (0, -1), (-1, -1), 1.2, INK),
            ("BACKGROUND", (0, 0), (-1, 0), SHADE),
            ("BACKGROUND", (0, -1), (-1, -1), SHADE),
            ("LEFTPADDING", (0, 0), (-1, -1), 8),
            ("RIGHTPADDING", (0, 0), (-1, -1), 8),
            ("TOPPADDING", (0, 0), (-1, -1), 5),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 6),
        ]),
    )
    return [Spacer(1, 12), box]


def _isolation(sheet: Sheet) -> list[Flowable]:
    heading = _heading("Energy isolation points \N{EN DASH} lock out and tag each before the work starts")
    if not sheet.isolation_points:
        return [heading, _none_listed("None listed for this telescope; ask the site engineer before working on "
                                      "powered or pressurised equipment.")]
    return [heading, *(_Ticked(_para(point, _ITEM)) for point in sheet.isolation_points)]


def _lifting(sheet: Sheet, width: float) -> list[Flowable]:
    lifting = sheet.lifting
    if lifting is None:
        return []
    rows = [[Paragraph("Figure", _CELL_HEAD), Paragraph("Value", _CELL_HEAD)]]
    rows += [[_para(label), _para(value)] for label, value in lifting.rows]
    story: list[Flowable] = [
        _heading("Lifting figures"),
        Paragraph("Estimates from geometry and handbook densities, for planning the lift. They do not approve "
                  "it: a competent person decides whether and how it goes ahead.", _NOTE),
        _table(rows, [width * 0.6, width * 0.4]),
    ]
    if lifting.warnings:
        story.append(Spacer(1, 5))
        story += [Paragraph(f"<b>Warning:</b> {_text(line)}", _BULLET, bulletText="!") for line in lifting.warnings]
    if lifting.checks:
        story.append(Paragraph("What a competent person must check before the lift", _CAUTION_TITLE))
        story += [_Ticked(_para(check, _ITEM)) for check in lifting.checks]
    return story


def _steps(sheet: Sheet) -> list[Flowable]:
    if not sheet.steps:
        return [_heading("Steps"), _none_listed("No steps listed.")]
    return [
        _heading("Steps"),
        *(_Ticked(_para(step, _ITEM), f"{number}.") for number, step in enumerate(sheet.steps, start=1)),
    ]


def _parts_and_tools(sheet: Sheet, width: float) -> list[Flowable]:
    story: list[Flowable] = [_heading("Parts")]
    if sheet.parts:
        rows = [[Paragraph(title, _CELL_HEAD) for title in ("Part", "Part no.", "Qty")]]
        rows += [
            [_para(part.name), _para(part.part_number), Paragraph(f"{part.quantity:g}", _BODY)] for part in sheet.parts
        ]
        story.append(_table(rows, [width - 55 * mm, 40 * mm, 15 * mm]))
    else:
        story.append(_none_listed("No parts listed."))
    story.append(_heading("Tools"))
    if sheet.tools:
        story += [_Ticked(_para(tool, _ITEM)) for tool in sheet.tools]
    else:
        story.append(_none_listed("No tools listed."))
    return story


def _readings(sheet: Sheet, width: float) -> list[Flowable]:
    if not sheet.readings:
        return [_heading("Readings to record"), _none_listed("No readings to record.")]
    value_width = 38 * mm
    rows = [[Paragraph(title, _CELL_HEAD) for title in ("Reading", "Unit", "Limit", "Value")]]
    for reading in sheet.readings:
        box = Drawing(value_width - 8, 20)
        box.add(Rect(0, 0, value_width - 8, 20, strokeColor=INK, strokeWidth=0.8, fillColor=None))
        rows.append([_para(reading.label), _para(reading.unit), _para(reading.limit_text), box])
    fixed = 20 * mm + 42 * mm + value_width
    return [_heading("Readings to record"), _table(rows, [width - fixed, 20 * mm, 42 * mm, value_width])]


def _findings(sheet: Sheet) -> list[Flowable]:
    if sheet.findings.strip():
        return [_heading("Findings"), _para(sheet.findings)]
    return [_heading("Findings"), _WritingLines(FINDINGS_LINES)]


def _sign_off(width: float) -> list[Flowable]:
    rows = [
        ["", *(Paragraph(title, _LABEL) for title in ("Name", "Signature", "Date"))],
        [Paragraph("Performed by", _CAUTION_TITLE), "", "", ""],
        [Paragraph("Checked by", _CAUTION_TITLE), "", "", ""],
    ]
    table = Table(
        rows,
        colWidths=[32 * mm, (width - 62 * mm) / 2, (width - 62 * mm) / 2, 30 * mm],
        rowHeights=[12, 30, 30],
        style=TableStyle([
            ("VALIGN", (0, 0), (-1, -1), "BOTTOM"),
            ("LEFTPADDING", (0, 0), (-1, -1), 0),
            ("RIGHTPADDING", (0, 0), (-1, -1), 10),
            ("LINEBELOW", (1, 1), (-2, -1), 0.8, INK),
            ("LINEBELOW", (-1, 1), (-1, -1), 0.8, INK),
        ]),
        hAlign="LEFT",
    )
    return [KeepTogether([_heading("Sign-off"), table])]


def _sheet_story(index: int, sheet: Sheet, width: float) -> list[Flowable]:
    return [
        _SheetStart(index, sheet),
        *_header(sheet, width),
        *_why(sheet),
        *_cautions(sheet, width),
        *_isolation(sheet),
        *_lifting(sheet, width),
        *_steps(sheet),
        *_parts_and_tools(sheet, width),
        *_readings(sheet, width),
        *_findings(sheet),
        *_sign_off(width),
    ]


class _NumberedCanvas(Canvas):
    """A canvas that holds every page back until ``save`` so each page can say "page i of n" of its work order.

    ``work_order`` is set by :class:`_SheetStart` on the first page of each work order.
    """

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.work_order: tuple[int, str, str] = (0, "", "")
        self._held_pages: list[dict] = []

    def showPage(self):  # noqa: N802 - reportlab's name
        self._held_pages.append(dict(self.__dict__))
        self._startPage()

    def save(self):
        totals = Counter(page["work_order"][0] for page in self._held_pages)
        seen: Counter[int] = Counter()
        for page in self._held_pages:
            self.__dict__.update(page)
            index = self.work_order[0]
            seen[index] += 1
            self._draw_page_furniture(seen[index], totals[index])
            super().showPage()
        super().save()

    def _draw_page_furniture(self, page: int, pages: int) -> None:
        _, number, title = self.work_order
        width, height = self._pagesize
        self.saveState()
        self.setStrokeColor(INK)
        self.setFillColor(INK)
        self.setLineWidth(0.6)
        self.line(MARGIN_X, MARGIN_BOTTOM - 6, width - MARGIN_X, MARGIN_BOTTOM - 6)
        self.setFont("Helvetica-Bold", 8.5)
        self.drawString(MARGIN_X, MARGIN_BOTTOM - 17, f"Work order {_shorten(number, 40)}")
        self.drawRightString(width - MARGIN_X, MARGIN_BOTTOM - 17, f"page {page} of {pages}")
        if page > 1:
            self.setFont("Helvetica", 8)
            self.drawString(MARGIN_X, height - MARGIN_TOP + 8,
                            f"Work order {_shorten(number, 40)} \N{EN DASH} {_shorten(title, 80)} (continued)")
            self.setLineWidth(0.4)
            self.line(MARGIN_X, height - MARGIN_TOP + 4, width - MARGIN_X, height - MARGIN_TOP + 4)
        self.restoreState()


def render_batch(sheets: Sequence[Sheet], paper: str = "A4") -> bytes:
    """One PDF holding several work orders, each starting on a new page with its own page numbers.

    Parameters
    ----------
    sheets : sequence of Sheet
        The work orders, printed in this order.
    paper : str
        ``"A4"`` (595.28 x 841.89 pt) or ``"letter"`` (US Letter, 612 x 792 pt).

    Returns
    -------
    bytes
        The PDF document.
    """
    if paper not in PAPER_SIZES:
        raise ValueError(f"paper must be one of {', '.join(PAPER_SIZES)}, got {paper!r}")
    if not sheets:
        raise ValueError("no work orders to print")
    page_width, page_height = PAPER_SIZES[paper]
    buffer = io.BytesIO()
    document = BaseDocTemplate(
        buffer,
        pagesize=(page_width, page_height),
        leftMargin=MARGIN_X,
        rightMargin=MARGIN_X,
        topMargin=MARGIN_TOP,
        bottomMargin=MARGIN_BOTTOM,
        title=f"Work order {sheets[0].number}" if len(sheets) == 1 else f"{len(sheets)} work orders",
        creator="observatory_ops",
    )
    frame = Frame(MARGIN_X, MARGIN_BOTTOM, document.width, document.height,
                  leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0, id="body")
    document.addPageTemplates([PageTemplate(id="work-order", frames=[frame])])
    story: list[Flowable] = []
    for index, sheet in enumerate(sheets):
        if index:
            story.append(PageBreak())
        story += _sheet_story(index, sheet, document.width)
    document.build(story, canvasmaker=_NumberedCanvas)
    return buffer.getvalue()


def render_sheet(sheet: Sheet, paper: str = "A4") -> bytes:
    """One work order as a PDF: see :func:`render_batch` for the paper sizes."""
    return render_batch([sheet], paper)
