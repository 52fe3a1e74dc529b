"""The printed work order: a ``Sheet`` laid out as a PDF with reportlab, on A4 or US Letter.

Pure layout, no Django and no database: the caller fills a :class:`~observatory_ops.workorders.sheet.Sheet`.
The order on the page follows the work: header and QR code, a framed notice when the order lacks hazards its
subsystems now carry, why the work is due, the cautions box before anything else of the work, isolation
points with a line for each person's lock (work still to do), lifting figures, steps (ticked as on the page, with
who ticked each and when, for finished work), the readings they take, parts and tools, the mirrors' cleaning and what
was confirmed at finishing (finished work), findings, and the sign-off with the actual hours, the day of the work and
the crew.
Everything prints in black, white and light grey, so a mono printer loses nothing.

Every string of a sheet is user text. reportlab's ``Paragraph`` parses markup, so each one goes through
:func:`_text` (XML escaping) before it reaches a Paragraph and prints literally; table cells that fit on
one line are drawn as plain strings, which reportlab never parses. Long text wraps, and long paragraphs and
table rows split across pages rather than failing.

Page numbers read "page i of n" within each work order, also in a batch: the canvas holds the pages back
until the end of the document to know n (:class:`_NumberedCanvas`).
"""

from __future__ import annotations

import io
from collections import Counter
from collections.abc import Sequence
from datetime import date, datetime
from itertools import groupby

# escape() only escapes our own output text; no XML is parsed (bandit B406 is accepted for this line).
from xml.sax.saxutils import escape  # nosec B406

import qrcode
from qrcode.constants import ERROR_CORRECT_M
from qrcode.exceptions import DataOverflowError
from reportlab.graphics.shapes import Drawing, Rect
from reportlab.lib.colors import Color, black
from reportlab.lib.enums import TA_CENTER
from reportlab.lib.pagesizes import A4, LETTER
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.pdfbase.pdfmetrics import stringWidth
from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import (
    BaseDocTemplate,
    Flowable,
    Frame,
    KeepTogether,
    PageBreak,
    PageTemplate,
    Paragraph,
    SetTopFlowables,
    Spacer,
    Table,
    TableStyle,
)

from observatory_ops.registry.catalogue import asks_result, is_hand_back, is_release_step
from observatory_ops.workorders.cautions import (
    NO_ISOLATION_NEEDED,
    PARTS_UNREGISTERED,
    SEVERITY_LABELS,
    is_lockout_step,
    signal_word,
)
from observatory_ops.workorders.models import amount_text
from observatory_ops.workorders.sheet import WARNING_PREFIX, WHY_AS_OF, Sheet, SheetCaution, SheetPart, SheetTick

PAPER_SIZES: dict[str, tuple[float, float]] = {"A4": A4, "letter": LETTER}

MARGIN_X = 16 * mm
MARGIN_TOP = 16 * mm
MARGIN_BOTTOM = 18 * mm
QR_SIZE = 28 * mm
FINDINGS_LINES = 7
#: Sign-off lines left blank for the people who work with the one who signs as having done the work, until the finish
#: form names them: a mirror lift takes several hands (rigger, signaller, tag lines).
CREW_LINES = 3

INK = black
GREY = Color(0.35, 0.35, 0.35)
RULE = Color(0.6, 0.6, 0.6)
SHADE = Color(0.9, 0.9, 0.9)

FONT = "Helvetica"
FONT_BOLD = "Helvetica-Bold"
BODY_SIZE = 9.5
BODY_LEADING = 12.5

_BODY = ParagraphStyle("wo-body", fontName=FONT, fontSize=BODY_SIZE, leading=BODY_LEADING)
_SMALL = ParagraphStyle("wo-small", parent=_BODY, fontSize=8, leading=10)
_LABEL = ParagraphStyle("wo-label", parent=_SMALL, fontSize=7, leading=9, textColor=GREY)
_QR_CAPTION = ParagraphStyle("wo-qr-caption", parent=_LABEL, alignment=TA_CENTER)
_NUMBER = ParagraphStyle("wo-number", parent=_BODY, fontName=FONT_BOLD, fontSize=16, leading=19)
_TITLE = ParagraphStyle("wo-title", parent=_BODY, fontName=FONT_BOLD, fontSize=12.5, leading=15.5, spaceAfter=2)
_HEADING = ParagraphStyle(
    "wo-heading", parent=_BODY, fontName=FONT_BOLD, fontSize=11, leading=14, spaceBefore=11, spaceAfter=4,
    keepWithNext=1,
)
_SUBHEADING = ParagraphStyle("wo-subheading", parent=_BODY, fontName=FONT_BOLD, spaceBefore=4, spaceAfter=2,
                             keepWithNext=1)
#: A heading repeated at the top of the page a list runs onto (``_continued``); nothing to keep it with there.
_CONTINUED = ParagraphStyle("wo-continued", parent=_HEADING, spaceBefore=0, keepWithNext=0)
_NOTE = ParagraphStyle("wo-note", parent=_SMALL, textColor=GREY, spaceAfter=4)
_BULLET = ParagraphStyle("wo-bullet", parent=_BODY, leftIndent=11, bulletIndent=1, spaceAfter=2)
_ITEM = ParagraphStyle("wo-item", parent=_BODY, spaceAfter=4)
_CAUTIONS_HEAD = ParagraphStyle("wo-cautions-head", parent=_BODY, fontName=FONT_BOLD, fontSize=12, leading=15)
_PRECEDENCE = ParagraphStyle("wo-precedence", parent=_BODY, fontName="Helvetica-Oblique")
_NOTICE_TODO = ParagraphStyle("wo-notice-todo", parent=_BODY, fontName=FONT_BOLD)

_TICK_BOX = 8.5
_TICK_INDENT = 15.0
_NUMBER_WIDTH = 17.0
#: A step or isolation point no taller than this (in points, about ten lines) moves whole to the next page rather than
#: split across two: a lockout step printed "... before" at the foot of one page and "touching anything." on the next
#: is read as two. Taller ones still split, as a paragraph does.
_KEEP_WHOLE_UP_TO = 120.0
_WRITING_GAP = 21.0
#: The blank between the sign-off's name, signature and date lines.
_SIGN_OFF_GAP = 7 * mm
_CELL_PADDING = 4
# A table row taller than a page (a cell holding a very long text) is cut inside the row, leaving at least
# this much of it at the foot of a page; shorter rows move to the next page whole.
_SPLIT_IN_ROW_PT = 30
_SMALLEST_BODY_HEIGHT = min(height for _, height in PAPER_SIZES.values()) - MARGIN_TOP - MARGIN_BOTTOM

_RULED_TABLE = (
    ("VALIGN", (0, 0), (-1, -1), "TOP"),
    ("FONT", (0, 0), (-1, 0), FONT_BOLD, 8, 10),
    ("FONT", (0, 1), (-1, -1), FONT, BODY_SIZE, BODY_LEADING),
    ("LEFTPADDING", (0, 0), (-1, -1), _CELL_PADDING),
    ("RIGHTPADDING", (0, 0), (-1, -1), _CELL_PADDING),
    ("TOPPADDING", (0, 0), (-1, -1), 3),
    ("BOTTOMPADDING", (0, 0), (-1, -1), 4),
    ("LINEBELOW", (0, 0), (-1, 0), 0.9, INK),
    ("LINEBELOW", (0, 1), (-1, -1), 0.4, RULE),
)

# C0 control characters other than tab and newline would print as black boxes; carriage returns go too,
# so that Windows line ends read as one break.
_CONTROL_CHARACTERS = dict.fromkeys(code for code in range(32) if code not in (9, 10))


class _Paragraph(Paragraph):
    """A Paragraph that keeps its line breaks when wrapped again at the same width.

    Tables wrap each cell to measure it and again to draw it, and once more for each part after a page
    break; breaking lines is most of the time a work order takes to lay out.
    """

    _wrapped_width: float | None = None

    def wrap(self, availWidth, availHeight):  # reportlab's method names
        # Paragraph.split drops the line breaks (blPara) when it refuses to split, so their absence also
        # means the paragraph must be broken again.
        if availWidth != self._wrapped_width or not hasattr(self, "blPara"):
            super().wrap(availWidth, availHeight)
            self._wrapped_width = availWidth
        return self.width, self.height


def _text(value: str) -> str:
    """User text made safe for a reportlab Paragraph: escaped so it prints literally, line breaks kept."""
    return escape(str(value).translate(_CONTROL_CHARACTERS)).replace("\n", "<br/>")


def _para(value: str, style: ParagraphStyle = _BODY) -> Paragraph:
    return _Paragraph(_text(value), style)


def _cell(value: str, width: float) -> str | Paragraph:
    """A table cell of user text: the plain string when it fits on one line, else a wrapping Paragraph.

    Plain strings are drawn as they are (reportlab parses no markup in them) and cost far less to lay out.
    """
    text = str(value).translate(_CONTROL_CHARACTERS)
    if "\n" in text or "\t" in text or stringWidth(text, FONT, BODY_SIZE) > width - 2 * _CELL_PADDING:
        return _Paragraph(_text(text), _BODY)
    return text


def _shorten(value: str, limit: int) -> str:
    """A one-line version of user text for the page furniture drawn straight on the canvas."""
    line = " ".join(str(value).translate(_CONTROL_CHARACTERS).split())
    return line if len(line) <= limit else line[: limit - 3] + "..."


#: How a date reads on the printed order, as on the pages ("23 Mar 2027").
_DAY = "%d %b %Y"


def _date_text(value: date | None) -> str:
    return value.strftime(_DAY) if value is not None else "not set"


class _Table(Table):
    """A table that splits between rows, and inside a row only when that row could not fit on any page.

    reportlab's in-row split, when left on, also cuts an ordinary row in the space left at the foot of a
    page after a split between rows, which prints the repeated header twice on one page.

    With ``keep_rows`` set, a split leaves at least that many rows under the header at the foot of the page and
    carries at least that many to the next (a table of fewer moves whole), unless the table already starts at the
    top of a page, where moving it would not help.
    """

    keep_rows = 0

    def onSplit(self, table, byRow=1):  # reportlab's method names: each part keeps the rule for its own split
        super().onSplit(table, byRow)
        table.keep_rows = self.keep_rows

    def split(self, availWidth, availHeight):  # reportlab's method names
        self.splitInRow = 0
        header = self.repeatRows if isinstance(self.repeatRows, int) else max(self.repeatRows) + 1
        at_top = getattr(getattr(self, "_frame", None), "_atTop", False)
        self._rowSplitRange = (header + self.keep_rows, -self.keep_rows) if self.keep_rows and not at_top else None
        parts = super().split(availWidth, availHeight)
        if parts or header >= len(self._rowHeights):
            return parts
        if sum(self._rowHeights[: header + 1]) > _SMALLEST_BODY_HEIGHT:
            self.splitInRow = _SPLIT_IN_ROW_PT
            parts = super().split(availWidth, availHeight)
        return parts


def _ruled_table(header: Sequence[str], rows: list[list], col_widths: list[float]) -> _Table:
    """A ruled table under a bold header row that repeats on each page the table runs onto; a page break leaves
    neither the header with one row at the foot of a page nor one row alone at the top of the next."""
    table = _Table([list(header), *rows], colWidths=col_widths, repeatRows=1, style=TableStyle(_RULED_TABLE),
                   hAlign="LEFT")
    table.keep_rows = 2
    return table


class _PagesOf(Flowable):
    """Invisible marker at the top of each work order (and of a batch's list of its orders): tells the canvas which
    of them its pages belong to, by ``index`` (the list is -1), and what their footer and running head say."""

    def __init__(self, index: int, label: str, title: str):
        super().__init__()
        self._work_order = (index, label, title)

    def wrap(self, avail_width, avail_height):
        return 0, 0

    def draw(self):
        self.canv.work_order = self._work_order


def _sheet_start(index: int, sheet: Sheet) -> _PagesOf:
    return _PagesOf(index, f"Work order {_shorten(sheet.number, 40)}", sheet.title)


class _PageCount(Flowable):
    """How many pages work order ``index`` of a batch prints on, for the batch's list of its orders: drawn as a form
    the canvas fills in once every page is laid out (:meth:`_NumberedCanvas.save`)."""

    def __init__(self, index: int):
        super().__init__()
        self._form = _page_count_form(index)

    def wrap(self, avail_width, avail_height):
        self.width, self.height = avail_width, BODY_LEADING
        return self.width, self.height

    def draw(self):
        self.canv.doForm(self._form)


def _page_count_form(index: int) -> str:
    return f"wo-pages-{index}"


class _Ticked(Flowable):
    """A paragraph with a tick box, and optionally a step number, in its left margin; the box holds a tick when
    ``ticked`` (a line ticked on the work order page, printed on the record of finished work).

    A short one (``_KEEP_WHOLE_UP_TO``) moves whole to the next page; a longer one splits across pages like the
    paragraph it holds, the box and the number printed on the first part only.
    """

    def __init__(self, paragraph: Paragraph, number: str = "", first_part: bool = True, ticked: bool = False):
        super().__init__()
        self._paragraph = paragraph
        self._number = number
        self._first_part = first_part
        self._ticked = ticked
        self._indent = _TICK_INDENT + (_NUMBER_WIDTH if number else 0)

    def wrap(self, avail_width, avail_height):
        _, height = self._paragraph.wrap(avail_width - self._indent, avail_height)
        self.width, self.height = avail_width, height
        return avail_width, height

    def split(self, avail_width, avail_height):
        _, height = self._paragraph.wrap(avail_width - self._indent, avail_height)
        if height <= _KEEP_WHOLE_UP_TO:
            return []  # reportlab then moves it to the next page
        parts = self._paragraph.split(avail_width - self._indent, avail_height)
        return [
            _Ticked(part, self._number, first_part=self._first_part and position == 0, ticked=self._ticked)
            for position, part in enumerate(parts)
        ]

    def getSpaceBefore(self):  # reportlab's method names
        return self._paragraph.getSpaceBefore()

    def getSpaceAfter(self):  # reportlab's method names
        return self._paragraph.getSpaceAfter()

    def draw(self):
        canvas = self.canv
        if self._first_part:
            font_size = self._paragraph.style.fontSize
            baseline = self.height - font_size
            canvas.saveState()
            canvas.setLineWidth(0.8)
            canvas.setStrokeColor(INK)
            canvas.rect(0, baseline - 1, _TICK_BOX, _TICK_BOX, stroke=1, fill=0)
            if self._ticked:
                canvas.setLineWidth(1.3)
                tick = canvas.beginPath()
                tick.moveTo(1.6, baseline + 3.4)
                tick.lineTo(3.6, baseline + 1.0)
                tick.lineTo(7.4, baseline + 6.6)
                canvas.drawPath(tick, stroke=1, fill=0)
            if self._number:
                canvas.setFont(FONT_BOLD, font_size)
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


class _QrCode(Flowable):
    """The work order's address as a QR code, drawn as filled rectangles, one per run of dark modules in a row.

    The module matrix comes from the ``qrcode`` package (ISO/IEC 18004) at error correction level M, with
    its four-module quiet zone and its own choice of mask. The rectangles go into the page as one literal
    path in module units: far fewer drawing calls than a graphics widget, and no raster image, so no PIL.
    """

    def __init__(self, url: str, size: float):
        super().__init__()
        code = qrcode.QRCode(error_correction=ERROR_CORRECT_M, border=4)
        code.add_data(url)
        try:
            code.make(fit=True)
        except (DataOverflowError, ValueError) as error:  # ValueError: no QR version (1 to 40) is big enough
            raise ValueError(f"the work order address is too long for a QR code ({len(url)} characters)") from error
        matrix = code.get_matrix()
        self._modules = len(matrix)
        rectangles = (
            f"{column} {self._modules - 1 - row} {length} 1 re"
            for row, line in enumerate(matrix)
            for column, length in _dark_runs(line)
        )
        self._path = " ".join(rectangles) + " f"
        self.width = self.height = size

    def wrap(self, avail_width, avail_height):
        return self.width, self.height

    def draw(self):
        module = self.width / self._modules
        self.canv.saveState()
        self.canv.setFillColor(INK)
        self.canv.scale(module, module)
        self.canv.addLiteral(self._path)
        self.canv.restoreState()


def _dark_runs(line: Sequence[bool]) -> list[tuple[int, int]]:
    """(first column, length) of each run of dark modules in one row of a QR matrix."""
    runs = []
    column = 0
    for dark, group in groupby(line):
        length = sum(1 for _ in group)
        if dark:
            runs.append((column, length))
        column += length
    return runs


def _heading(title: str) -> Paragraph:
    return _Paragraph(title, _HEADING)


def _note(text: str) -> Paragraph:
    return _Paragraph(text, _NOTE)


def _header(sheet: Sheet, width: float) -> list[Flowable]:
    left = [
        _Paragraph("WORK ORDER", _LABEL),
        _para(sheet.number, _NUMBER),
        _para(sheet.title, _TITLE),
        _para(f"{sheet.site} \N{MIDDLE DOT} {sheet.telescope}"),
        _para("Subsystems: " + (", ".join(sheet.subsystems) or "none named"), _SMALL),
    ]
    right = [_QrCode(sheet.url, QR_SIZE), _Paragraph("Scan to open online", _QR_CAPTION)]
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
    facts = (
        ("Type", sheet.order_type),
        ("Priority", sheet.priority),
        ("State", sheet.state),
        ("Estimated hours",
         f"{sheet.estimated_hours:g} h" + (f" ({sheet.estimate_basis})" if sheet.estimate_basis else "")),
        ("Planned date", _date_text(sheet.planned_date)),
        ("Issued", _date_text(sheet.issued_on)),
        ("Assignee", sheet.assignee or "not assigned"),
        ("Printed", ""),
    )
    column = width / 4
    rows = []
    for first in (0, 4):
        rows.append([label for label, _ in facts[first : first + 4]])
        rows.append([_cell(value, column) for _, value in facts[first : first + 4]])
    rows[-1][-1] = _printed_at(sheet.generated_at)
    grid = _Table(
        rows,
        colWidths=[column] * 4,
        style=TableStyle([
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ("FONT", (0, 0), (-1, -1), FONT, BODY_SIZE, BODY_LEADING),
            ("FONT", (0, 0), (-1, 0), FONT, 7, 9),
            ("FONT", (0, 2), (-1, 2), FONT, 7, 9),
            ("TEXTCOLOR", (0, 0), (-1, 0), GREY),
            ("TEXTCOLOR", (0, 2), (-1, 2), GREY),
            ("LEFTPADDING", (0, 0), (-1, -1), 0),
            ("RIGHTPADDING", (0, 0), (-1, -1), _CELL_PADDING),
            ("TOPPADDING", (0, 0), (-1, -1), 0),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 0),
            ("TOPPADDING", (0, 0), (-1, 0), 5),
            ("TOPPADDING", (0, 2), (-1, 2), 6),
            ("BOTTOMPADDING", (0, -1), (-1, -1), 4),
            ("LINEABOVE", (0, 0), (-1, 0), 1.2, INK),
            ("LINEBELOW", (0, -1), (-1, -1), 1.2, INK),
        ]),
    )
    return [top, Spacer(1, 6), grid]


def _printed_at(moment: datetime | None) -> str | Paragraph:
    """When the sheet was printed, and under it the time zone every time on the paper is in (the site's, as the
    selectors give them: the printing time, and who ticked a line when), named once here."""
    if moment is None:
        return ""
    printed, zone = _time_and_zone(moment)
    if not zone:
        return printed
    return _Paragraph(f"{_text(printed)}<br/><font size=9>All times: {_text(zone)}</font>", _BODY)


def _printed_line(moment: datetime) -> str:
    printed, zone = _time_and_zone(moment)
    return f"Printed {printed} ({zone})" if zone else f"Printed {printed}"


def _time_and_zone(moment: datetime) -> tuple[str, str]:
    """A time as the paper prints it, with its zone's abbreviation ("03 Dec 2026 05:38 MST"), and the name of its
    zone ("America/Denver"); "" for a time without a zone."""
    printed = moment.strftime(f"{_DAY} %H:%M")
    zone = getattr(moment.tzinfo, "key", None) or moment.tzname() or ""
    abbreviation = moment.tzname()
    if abbreviation and abbreviation != zone:
        printed = f"{printed} {abbreviation}"
    return printed, zone


def _why(sheet: Sheet) -> list[Flowable]:
    heading = _heading("Why this work is due")
    if not sheet.why:
        return [heading, _note("Raised by hand, not from a due item.")]
    as_of = [_note(WHY_AS_OF.format(day=f"{sheet.why_as_of:%d %b %Y}"))] if sheet.why_as_of else []
    return [heading, *as_of, *(_Paragraph(_text(line), _BULLET, bulletText="\N{BULLET}") for line in sheet.why)]


_SEVERITY_RANK = {label: severity for severity, label in SEVERITY_LABELS.items()}


def _most_severe_first(cautions: Sequence[SheetCaution]) -> list[SheetCaution]:
    """Cautions by severity label, most severe first, keeping the given order within a severity.

    A label outside the caution library's ``SEVERITY_LABELS`` ranks with the most severe: the sheet cannot
    tell how serious an unknown hazard is, so it is not pushed down the box.
    """
    most_severe = max(_SEVERITY_RANK.values())
    return sorted(cautions, key=lambda caution: -_SEVERITY_RANK.get(caution.severity_label, most_severe))


def _caution_paragraph(caution: SheetCaution) -> Paragraph:
    return _Paragraph(
        f"<b>{_text(signal_word(caution.severity_label))} \N{MIDDLE DOT} {_text(caution.title)}</b><br/>"
        f"{_text(caution.text)}<br/>"
        f"<font size=8>Standard: {_text(caution.standard)}</font>",
        _BODY,
    )


def _framed(head: Flowable, body: Sequence[Flowable], closing: Flowable, width: float) -> _Table:
    """A box not to be missed: a heavy frame, a shaded head (repeated on each page the box runs onto), the body
    ruled line by line, and a shaded closing line. Split across pages, the box leaves at least two lines at the foot
    of the page and carries at least two over, so the closing line never stands alone under the repeated head."""
    table = _Table(
        [[head], *([row] for row in body), [closing]],
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
    table.keep_rows = 2
    return table


def _notices(sheet: Sheet, width: float) -> list[Flowable]:
    """What stands in the way of the work (its start held, a telescope without its mirror, other work underway on its
    telescope, hazards the order lacks): each framed
    like the cautions, above everything of the work; title, body lines, then what to do."""
    story: list[Flowable] = []
    for notice in (sheet.start_held, *sheet.out_of_service, sheet.alongside, sheet.hand_backs_held,
                   sheet.hazards_notice):
        if not notice:
            continue
        title, *lines = notice
        *body, closing = lines or [""]
        head = _para(title, _CAUTIONS_HEAD)
        story += [Spacer(1, 12), _framed(head, [_para(line) for line in body], _para(closing, _NOTICE_TODO), width)]
    return story


def _cautions(sheet: Sheet, width: float) -> list[Flowable]:
    """The framed cautions box, most severe first, closed by the precedence statement."""
    rows = [_caution_paragraph(caution) for caution in _most_severe_first(sheet.cautions)]
    if not sheet.cautions:
        rows.append(_note("No hazard cautions were selected for this work."))
    head = _Paragraph("CAUTIONS \N{EN DASH} read before you start, apply throughout", _CAUTIONS_HEAD)
    return [Spacer(1, 12), _framed(head, rows, _para(sheet.precedence_statement, _PRECEDENCE), width)]


def _isolation(sheet: Sheet) -> list[Flowable]:
    if not sheet.isolation_needed:
        return [_heading("Energy isolation"), _note(_text(sheet.isolation_statement or NO_ISOLATION_NEEDED))]
    at = sheet.lockout_step
    # At the lockout step, after the steps under power before it, as the page says (a paper review: "before the work
    # starts" stood above a limit test and a slew to the zenith done under power first).
    heading = _heading("Energy isolation points \N{EN DASH} lock out and tag each "
                       + (f"at step {at}, the lockout" if at else "before the work starts"))
    if not sheet.isolation_points:
        return [heading, _note("None listed for this telescope. Ask the site engineer before working on powered "
                               "or pressurised equipment.")]
    first: list[Flowable] = []
    if at and at > 1:
        before = "step 1" if at == 2 else f"steps 1 to {at - 1}"
        first = [_note(f"Do {before} first, under power; once a lock is on, do no step under power that may move the "
                       "telescope.")]
    ticks = sheet.point_ticks or (None,) * len(sheet.isolation_points)
    lines = [
        _warning(point.removeprefix(WARNING_PREFIX)) if point.startswith(WARNING_PREFIX)
        else _checklist_line(point, tick)
        for point, tick in zip(sheet.isolation_points, ticks, strict=True)
    ]
    return _continued(heading, "Energy isolation points (continued)", first + lines)


#: The personal locks' table: a line for each person working under the lockout (the one signing as having done the
#: work and the crew lines of the sign-off) and one more for a visitor or a second shift.
PERSONAL_LOCK_LINES = CREW_LINES + 2
PERSONAL_LOCKS_HEADING = "Personal locks \N{EN DASH} a line for each person working under the lockout"
PERSONAL_LOCKS_NOTE = (
    "Each person puts a lock of their own on every isolation point above and writes its number here, with the day "
    "and time, and initials; each removes only their own lock, and writes when. The lockout is off only when every "
    "line has its time off. Keep this paper with the order's record: the system keeps one tick a point, not each "
    "person's lock."
)


def _personal_locks(sheet: Sheet, width: float) -> list[Flowable]:
    """For work still to do whose energy is isolated at points: a table to write who has a lock on, its number, and
    when it went on and came off. A group lockout protects each person only with a lock of their own on every point
    (OSHA 29 CFR 1910.147(f)(3)); the page records one tick per point, so the paper keeps the person-by-person
    record (a tablet review found no place for it): each lock's day and time on and off (a recoat's removal runs over
    days) and the initials of the person at each. Not printed once the work is finished: the system keeps one tick a
    point, so the site keeps the filled-in paper with the order's record (the table's note says so)."""
    if not (sheet.isolation_needed and sheet.isolation_points) or sheet.performed_by:
        return []
    columns = ("Name", "Lock or tag number", "On (date, time)", "Initials on", "Off (date, time)", "Initials off")
    share = (0.26, 0.17, 0.17, 0.11, 0.17, 0.12)
    table = Table(
        [list(columns), *([""] * len(columns) for _ in range(PERSONAL_LOCK_LINES))],
        colWidths=[width * part for part in share],
        rowHeights=[12] + [20] * PERSONAL_LOCK_LINES,
        style=TableStyle([
            ("FONT", (0, 0), (-1, 0), FONT, 7, 9),
            ("TEXTCOLOR", (0, 0), (-1, 0), GREY),
            ("VALIGN", (0, 0), (-1, -1), "BOTTOM"),
            ("LEFTPADDING", (0, 0), (-1, -1), 0),
            ("RIGHTPADDING", (0, 0), (-1, -1), 6),
            ("LINEBELOW", (0, 1), (-1, -1), 0.6, INK),
        ]),
        hAlign="LEFT",
    )
    return [KeepTogether([_Paragraph(_text(PERSONAL_LOCKS_HEADING), _SUBHEADING), _note(PERSONAL_LOCKS_NOTE),
                          table])]


def _warning(text: str) -> Paragraph:
    """A warning among checklist lines: printed bold and flagged, with no tick box (nothing to tick, as on the page)."""
    return _Paragraph(f"<b>WARNING: {_text(text)}</b>", _BULLET, bulletText="!")


def _continued(heading: Paragraph, continued: str, lines: list[Flowable]) -> list[Flowable]:
    """A heading and the lines under it; on each page the lines run onto, ``continued`` is printed at the top first.

    The heading stays with the first line (``keepWithNext``); from the second line on, reportlab prints the
    continued heading at the top of each new page (``SetTopFlowables``), until the last line is placed.
    """
    if len(lines) < 2:
        return [heading, *lines]
    return [heading, lines[0], _SetTopFlowables([_Paragraph(_text(continued), _CONTINUED)]), *lines[1:],
            _SetTopFlowables([])]


class _SetTopFlowables(SetTopFlowables):
    """reportlab's marker, taken as of no height also at the very foot of a page (reportlab 5.1 misspells the flag),
    so that it takes effect where it stands rather than after a page break."""

    _ZEROSIZE = True


def _checklist_line(text: str, tick: SheetTick | None, number: str = "", to_sign: bool = False,
                    to_write: bool = False) -> _Ticked:
    """A step or an isolation point with its tick box: ticked as on the work order page, with the page's note of
    who ticked it (or took the tick back) and when under it. The lockout step is printed in bold after "Lockout:", as
    the page marks it, so it does not read as one step among the others. ``to_sign``: a line to write who did it
    and when under it (``SIGNED_STEP_LINE``, ``HAND_BACK_LINE``), on work still to do; ``to_write``: a line for the
    result a step asks for (``RESULT_LINE``), not yet given."""
    note = f"<br/><font size=8>{_text(tick.note)}</font>" if tick is not None and tick.note else ""
    if to_write:
        note += f"<br/><font size=9>{_text(RESULT_LINE)}</font>"
    if to_sign:
        note += f"<br/><font size=9>{_text(HAND_BACK_LINE if is_hand_back(text) else SIGNED_STEP_LINE)}</font>"
    words = f"<b>Lockout: {_text(text)}</b>" if number and is_lockout_step(text) else _text(text)
    return _Ticked(_Paragraph(words + note, _ITEM), number, ticked=tick is not None and tick.ticked)


def _lifting(sheet: Sheet, width: float) -> list[Flowable]:
    lifting = sheet.lifting
    if lifting is None:
        return []
    widths = [width * 0.6, width * 0.4]
    story: list[Flowable] = [
        # The figures are read as one: each from the inputs and formulas above it, so the table never splits.
        KeepTogether([
            _heading("Lifting figures"),
            _note("Estimates from geometry and handbook densities, for planning the lift. They do not approve it: "
                  "a competent person decides whether and how it goes ahead."),
            _ruled_table(("Figure", "Value"), [[_cell(label, widths[0]), _cell(value, widths[1])]
                                               for label, value in lifting.rows], widths),
        ]),
    ]
    if lifting.warnings:
        story.append(Spacer(1, 5))
        story += [_Paragraph(f"<b>Warning:</b> {_text(line)}", _BULLET, bulletText="!") for line in lifting.warnings]
    if lifting.checks:
        story.append(_Paragraph("What a competent person must check before the lift", _SUBHEADING))
        story += [_Ticked(_para(check, _ITEM)) for check in lifting.checks]
    return story


def _steps(sheet: Sheet) -> list[Flowable]:
    story: list[Flowable] = [_heading("Steps")]
    if sheet.steps_warning:
        story.append(_Paragraph(f"<b>Warning:</b> {_text(sheet.steps_warning)}", _BULLET, bulletText="!"))
    if sheet.steps_note:
        story.append(_Paragraph(f"<b>Read first:</b> {_text(sheet.steps_note)}", _BULLET, bulletText="!"))
    story += [_Paragraph(f"<b>Throughout this work:</b> {_text(note)}", _BULLET, bulletText="!")
              for note in sheet.standing_notes]
    if not sheet.steps:
        return [*story, _note("No steps listed.")]
    ticks = sheet.step_ticks or (None,) * len(sheet.steps)
    lines = [_checklist_line(step, tick, f"{number}.", to_sign=not sheet.performed_by and _signed_step(step),
                             to_write=not sheet.performed_by and asks_result(step) and not (tick and tick.ticked))
             for number, (step, tick) in enumerate(zip(sheet.steps, ticks, strict=True), start=1)]
    return [*story[:-1], *_continued(story[-1], "Steps (continued)", lines)]


#: Written under the steps whose who and when the record must hold when the work is entered from paper: the lockout,
#: the removal of the locks and the hand-back (a paper review: the ticks entered later carry the time of entry).
SIGNED_STEP_LINE = "Initials ____________   Date ____________   Time ____________"
#: Written under a step that asks for its result (``catalogue.asks_result``), to type in with its tick later.
RESULT_LINE = "Result (value and unit, or what was seen) ________________________________________"
HAND_BACK_LINE = ("Handed back by ____________   Date ____________   Time ____________   "
                  "Remote operators told: yes / no")


def _signed_step(step: str) -> bool:
    return is_lockout_step(step) or is_release_step(step) or is_hand_back(step)


def _parts_and_tools(sheet: Sheet, width: float) -> list[Flowable]:
    story: list[Flowable] = [_heading("Parts")]
    if sheet.parts:
        widths = [width - 100 * mm, 36 * mm, 26 * mm, 38 * mm]
        rows = [[_cell(part.name, widths[0]), _cell(part.part_number, widths[1]),
                 _cell(amount_text(part.quantity, part.unit), widths[2]),
                 _written_box(widths[3]) if part.used is None else _cell(_used(part), widths[3])]
                for part in sheet.parts]
        story.append(_ruled_table(("Part", "Part no.", "Planned", "Used"), rows, widths))
        if any(part.short for part in sheet.parts):
            story.append(_Paragraph(
                "<b>Beyond the register:</b> more were used than the parts register held when the work was finished. "
                "It was brought to zero, and the shortfall marked for the site engineer to count the stock.",
                _BULLET, bulletText="!",
            ))
        if short_in_stock := [part for part in sheet.parts if part.stock_note]:
            story.append(_Paragraph(
                "<b>Short in stock when printed:</b> check these are to hand before starting, or ask the site "
                "engineer.", _BULLET, bulletText="!",
            ))
            story += [_para(f"{part.name}: {part.stock_note}", _ITEM) for part in short_in_stock]
    elif not sheet.parts_unregistered:
        story.append(_note("No parts listed."))
    if sheet.other_part_rows:
        widths = [width - 70 * mm, 36 * mm, 34 * mm]
        blank = [[_written_box(w) for w in widths] for _ in range(sheet.other_part_rows)]
        story += [_Paragraph("Other parts used (from the register, not listed above)", _SUBHEADING),
                  _ruled_table(("Part", "Part no.", "How many"), blank, widths)]
    if sheet.parts_unregistered:
        story.append(_Paragraph(f"<b>Also needed:</b> {_text(PARTS_UNREGISTERED)}", _BULLET, bulletText="!"))
        story += [_Ticked(_para(line, _ITEM)) for line in sheet.parts_unregistered]
    story.append(_heading("Tools"))
    if sheet.tools:
        story += [_Ticked(_para(tool, _ITEM)) for tool in sheet.tools]
    else:
        story.append(_note("No tools listed."))
    return story


def _used(part: SheetPart) -> str:
    used = amount_text(part.used, part.unit)
    return f"{used} ({part.short:g} beyond the register)" if part.short else used


#: Under the readings still to take (a tablet review found no room for a reading that could not be taken).
NOT_MEASURED_ON_PAPER = ("A reading that could not be taken: write why in its box instead of a value; the finish form "
                         "asks why in its place.")


def _readings(sheet: Sheet, width: float) -> list[Flowable]:
    heading = _heading("Readings to record")
    if not sheet.readings:
        return [heading, _note("No readings to record.")]
    box_width = 38 * mm
    widths = [width - 20 * mm - 42 * mm - box_width, 20 * mm, 42 * mm, box_width]
    rows = []
    for reading in sheet.readings:
        if reading.recorded:
            box = _cell(f"{reading.recorded} (BEYOND LIMIT)" if reading.beyond_limit else reading.recorded, widths[3])
        else:
            box = _written_box(box_width)
        rows.append([_cell(reading.label, widths[0]), _cell(reading.unit, widths[1]),
                     _cell(reading.limit_text, widths[2]), box])
    story: list[Flowable] = [heading, _ruled_table(("Reading", "Unit", "Limit", "Value"), rows, widths)]
    if any(not reading.recorded for reading in sheet.readings):  # the finish form asks why in place of a value
        story.append(_note(NOT_MEASURED_ON_PAPER))
    beyond = [reading for reading in sheet.readings if reading.recorded and reading.beyond_limit]
    if beyond:
        story.append(Spacer(1, 5))
        story += [
            _Paragraph(f"<b>Beyond its limit:</b> {_text(f'{r.label}: {r.recorded} {r.unit} (limit {r.limit_text})')}"
                       ", recorded as measured.", _BULLET, bulletText="!")
            for r in beyond
        ]
    return story


def _written_box(cell_width: float) -> Drawing:
    """An empty box filling a table cell of ``cell_width``, to write a value in by hand."""
    box = Drawing(cell_width - 2 * _CELL_PADDING, 20)
    box.add(Rect(0, 0, cell_width - 2 * _CELL_PADDING, 20, strokeColor=INK, strokeWidth=0.8, fillColor=None))
    return box


def _findings(sheet: Sheet) -> list[Flowable]:
    if sheet.findings.strip():
        return [_heading("Findings"), _para(sheet.findings)]
    return [_heading("Findings"), _WritingLines(FINDINGS_LINES)]


def _cleanings(sheet: Sheet) -> list[Flowable]:
    """What finishing recorded of each mirror's cleaning; before then, for each mirror the finish form asks about, its
    answers to tick one of (the form cannot be typed in from a paper that does not ask)."""
    if sheet.cleanings:
        return [
            _heading("Mirror cleaning"),
            *(_Paragraph(_text(line), _BULLET, bulletText="\N{BULLET}") for line in sheet.cleanings),
        ]
    if not sheet.cleaning_to_record:
        return []
    story: list[Flowable] = []
    heading = [_heading("Mirror cleaning \N{EN DASH} tick one for each mirror")]
    for mirror, answers in sheet.cleaning_to_record:  # a mirror's choices are one question: never split
        # The heading goes with the first mirror's choices (a reviewer found it alone at a page foot).
        story.append(KeepTogether([*heading, _Paragraph(_text(mirror), _SUBHEADING),
                                   *(_Ticked(_para(answer, _ITEM)) for answer in answers)]))
        heading = []
    return story


def _tick_trail(sheet: Sheet, width: float) -> list[Flowable]:
    """Finished work: every tick and tick taken back, in the order recorded, the record an audit of the lockout reads
    (the lines above show only each one's newest)."""
    if not sheet.tick_trail:
        return []
    widths = [28 * mm, 30 * mm, width - 88 * mm, 30 * mm]
    rows = [[_cell(cell, w) for cell, w in zip(row, widths, strict=True)] for row in sheet.tick_trail]
    return [_heading("Every tick, as recorded"),
            _note("Each tick and each tick taken back on the checklist, oldest first, with who recorded it and when "
                  "(the lines above show each one's newest)."),
            _ruled_table(("When", "Who", "Line, as it read", "Recorded"), rows, widths)]


def _confirmations(sheet: Sheet) -> list[Flowable]:
    if not sheet.confirmations:
        return []
    return [
        _heading("Confirmed when the work was finished"),
        *(_Paragraph(_text(line), _BULLET, bulletText="\N{BULLET}") for line in sheet.confirmations),
    ]


def _record_boxes(sheet: Sheet, width: float) -> Table:
    """The actual hours and the day the work was done, as the finish form asks for them: filled in for finished
    work, boxes to write in otherwise."""
    column = min(60 * mm, width / 2)
    hours = f"{sheet.actual_hours:g} h" if sheet.actual_hours is not None else _written_box(column)
    if sheet.hours_corrected is not None:
        hours = _Paragraph(_text(f"{sheet.hours_corrected:g} h as corrected in the service records "
                                 f"({sheet.actual_hours:g} h at finish)"), _BODY)
    done_on = _date_text(sheet.work_done_on) if sheet.work_done_on is not None else _written_box(column)
    return Table(
        [[f"Actual hours (estimate {sheet.estimated_hours:g} h)", "Work done on (date)"], [hours, done_on]],
        colWidths=[column, column],
        style=TableStyle([
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ("FONT", (0, 0), (-1, 0), FONT, 7, 9),
            ("TEXTCOLOR", (0, 0), (-1, 0), GREY),
            ("FONT", (0, 1), (-1, 1), FONT, BODY_SIZE, BODY_LEADING),
            ("LEFTPADDING", (0, 0), (-1, -1), 0),
            ("RIGHTPADDING", (0, 0), (-1, -1), _CELL_PADDING),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
        ]),
        hAlign="LEFT",
    )


def _sign_off(sheet: Sheet, width: float) -> list[Flowable]:
    """The actual hours and the day, and a line to sign for the one who did the work, each of the crew with them
    (named as the finish form gave them, else blank lines), the competent person who checked the rigging of a
    suspended load, and the one who checks the record. Name, signature and date each have a line of their own under
    their label, with a gap between them, so it is plain where to print the name and where to sign."""

    def day(value) -> str:
        return value.strftime(_DAY) if value else ""

    def line(role: str, name: str = "", on: str = "") -> list[str]:  # the gap columns stay empty
        return [role, name, "", "", "", on]

    if sheet.crew is None:
        crew = [line("Crew member") for _ in range(CREW_LINES)]
    else:
        crew = [line("Crew member", _shorten(name, 40), day(sheet.performed_on)) for name in sheet.crew]
        crew = crew or [line("Crew member", "none named")]
    rows = [
        ["", "Name", "", "Signature", "", "Date"],
        line("Performed by", _shorten(sheet.performed_by, 40), day(sheet.performed_on)),
        *crew,
    ]
    if sheet.rigging_check:
        rows.append(line("Rigging checked by\n(competent person)"))
    rows.append(line("Checked by", _shorten(sheet.checked_by, 40), day(sheet.checked_on)))
    gap, date_width = _SIGN_OFF_GAP, 30 * mm
    writing = (width - 36 * mm - 2 * gap - date_width) / 2
    table = Table(
        rows,
        colWidths=[36 * mm, writing, gap, writing, gap, date_width],
        rowHeights=[12] + [30] * (len(rows) - 1),
        style=TableStyle([
            ("VALIGN", (0, 0), (-1, -1), "BOTTOM"),
            ("FONT", (0, 0), (-1, 0), FONT, 7, 9),
            ("TEXTCOLOR", (0, 0), (-1, 0), GREY),
            ("FONT", (0, 1), (0, -1), FONT_BOLD, BODY_SIZE, BODY_LEADING),
            ("LEFTPADDING", (0, 0), (-1, -1), 0),
            ("RIGHTPADDING", (0, 0), (-1, -1), 4),
            *(("LINEBELOW", (column, 1), (column, -1), 0.8, INK) for column in (1, 3, 5)),
        ]),
        hAlign="LEFT",
    )
    return [_heading("Sign-off"), _record_boxes(sheet, width), Spacer(1, 4), table]


def _sheet_story(index: int, sheet: Sheet, width: float) -> list[Flowable]:
    return [
        _sheet_start(index, sheet),
        *_header(sheet, width),
        *_notices(sheet, width),
        *_why(sheet),
        *_cautions(sheet, width),
        *_isolation(sheet),
        *_personal_locks(sheet, width),
        *_lifting(sheet, width),
        *_steps(sheet),
        *_readings(sheet, width),  # right after the steps that take them (a tablet review turned pages for them)
        *_parts_and_tools(sheet, width),
        *_cleanings(sheet),
        *_confirmations(sheet),
        *_tick_trail(sheet, width),
        # The sign-off never lands alone on the last page: it goes over with the findings it signs for.
        KeepTogether([*_findings(sheet), *_sign_off(sheet, width)]),
    ]


class _NumberedCanvas(Canvas):
    """A canvas that holds every page back until ``save`` so each page can say "page i of n" of its work order.

    ``work_order`` (index, footer label, title) is set by :class:`_PagesOf` on the first page of each work order.
    """

    #: Give each work order but the last an even number of pages, the last one a blank back saying so, so that
    #: printed on both sides no work order starts on the back of another (a batch).
    pad_to_even = False

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.work_order: tuple[int, str, str] = (0, "", "")
        self._held_pages: list[dict] = []

    def showPage(self):  # reportlab's method names
        self._held_pages.append(dict(self.__dict__))
        self._startPage()

    def save(self):
        held = self._held_pages
        totals = Counter(page["work_order"][0] for page in held)
        for index, pages in totals.items():  # the batch's list of its orders shows these
            self._define_page_count(index, pages)
        seen: Counter[int] = Counter()
        for position, page in enumerate(held):
            self.__dict__.update(page)
            index = self.work_order[0]
            seen[index] += 1
            self._draw_page_furniture(seen[index], totals[index])
            super().showPage()
            last_of_its_order = position + 1 < len(held) and held[position + 1]["work_order"][0] != index
            if self.pad_to_even and last_of_its_order and totals[index] % 2:
                self._draw_blank_back()
                super().showPage()
        super().save()

    def _define_page_count(self, index: int, pages: int) -> None:
        self.beginForm(_page_count_form(index), 0, -3, 60, BODY_LEADING)
        self.setFont(FONT, BODY_SIZE)
        self.setFillColor(INK)
        self.drawString(0, BODY_LEADING - BODY_SIZE, f"{pages}")
        self.endForm()

    def _draw_blank_back(self) -> None:
        """The back of a work order's last page in a batch: says it is blank on purpose, under the order's footer."""
        width, height = self._pagesize
        self.saveState()
        self.setFillColor(GREY)
        self.setFont(FONT, 11)
        self.drawCentredString(width / 2, height / 2, "This page is left blank.")
        self.restoreState()
        self._draw_page_furniture(0, 0)

    def _draw_page_furniture(self, page: int, pages: int) -> None:
        """The footer (label, "page i of n"; "left blank" for a blank back, ``page`` 0) and, from page 2 on, the
        running head."""
        _, label, title = self.work_order
        width, height = self._pagesize
        self.saveState()
        self.setStrokeColor(INK)
        self.setFillColor(INK)
        self.setLineWidth(0.6)
        self.line(MARGIN_X, MARGIN_BOTTOM - 6, width - MARGIN_X, MARGIN_BOTTOM - 6)
        self.setFont(FONT_BOLD, 8.5)
        self.drawString(MARGIN_X, MARGIN_BOTTOM - 17, label)
        self.drawRightString(width - MARGIN_X, MARGIN_BOTTOM - 17, f"page {page} of {pages}" if page else "left blank")
        if page != 1:
            self.setFont(FONT, 8)
            self.drawString(MARGIN_X, height - MARGIN_TOP + 8, f"{label} \N{EN DASH} {_shorten(title, 80)} (continued)")
            self.setLineWidth(0.4)
            self.line(MARGIN_X, height - MARGIN_TOP + 4, width - MARGIN_X, height - MARGIN_TOP + 4)
        self.restoreState()


def render_batch(sheets: Sequence[Sheet], paper: str = "A4", period: tuple[date, date] | None = None) -> bytes:
    """One PDF holding several work orders, each starting on a new page with its own page numbers.

    Parameters
    ----------
    sheets : sequence of Sheet
        The work orders, printed in this order; at least one.
    paper : str
        ``"A4"`` (595.28 x 841.89 pt) or ``"letter"`` (US Letter, 612 x 792 pt).
    period : (date, date), optional
        The days the batch was asked for (a week), named on its first page; otherwise the orders' planned days.

    Returns
    -------
    bytes
        The PDF document. Every page's footer reads "Work order <number>" and "page i of n", counted
        within its own work order.
    """
    if paper not in PAPER_SIZES:
        raise ValueError(f"paper must be one of {', '.join(PAPER_SIZES)}, got {paper!r}")
    if not sheets:
        raise ValueError("no work orders to print")
    buffer = io.BytesIO()
    document = BaseDocTemplate(
        buffer,
        pagesize=PAPER_SIZES[paper],
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
    batch = len(sheets) > 1
    story: list[Flowable] = _batch_list(sheets, document.width, period) if batch else []
    for index, sheet in enumerate(sheets):
        if story:
            story.append(PageBreak())
        story += _sheet_story(index, sheet, document.width)
    document.build(story, canvasmaker=_BatchCanvas if batch else _NumberedCanvas)
    return buffer.getvalue()


class _BatchCanvas(_NumberedCanvas):
    pad_to_even = True


def _batch_list(sheets: Sequence[Sheet], width: float, period: tuple[date, date] | None = None) -> list[Flowable]:
    """A batch's first page: the work orders in it, in the order they follow, each with its state and its pages;
    titled by the days asked for (``period``), else by the orders' planned days."""
    planned = sorted(sheet.planned_date for sheet in sheets if sheet.planned_date is not None)
    if period is not None:
        when = f"planned {_date_text(period[0])} to {_date_text(period[1])}"
    else:
        when = f"planned {_date_text(planned[0])} to {_date_text(planned[-1])}" if planned else "no planned dates"
    sites = ", ".join(sorted({sheet.site for sheet in sheets}))
    widths = [10 * mm, 24 * mm, width - 10 * mm - 24 * mm - 26 * mm - 22 * mm - 22 * mm - 14 * mm, 26 * mm, 22 * mm,
              22 * mm, 14 * mm]
    rows = [
        [f"{index + 1}", _cell(sheet.number, widths[1]), _cell(sheet.title, widths[2]),
         _cell(sheet.telescope, widths[3]), _date_text(sheet.planned_date), _cell(sheet.state, widths[5]),
         _PageCount(index)]
        for index, sheet in enumerate(sheets)
    ]
    generated = sheets[0].generated_at
    return [
        _PagesOf(-1, "Work orders in this batch", f"{len(sheets)} work orders, {when}"),
        _Paragraph("WORK ORDERS IN THIS BATCH", _LABEL),
        _para(f"{len(sheets)} work orders, {when}", _TITLE),
        _para(sites),
        *([_para(_printed_line(generated), _SMALL)] if generated else []),
        _note("Each work order starts on a new sheet of paper: one with an odd number of pages ends with a blank "
              "back page, so the batch can be printed on both sides. Pages below count each order's own pages."),
        Spacer(1, 6),
        _ruled_table(("No.", "Work order", "Title", "Telescope", "Planned", "State", "Pages"), rows, widths),
    ]


def render_sheet(sheet: Sheet, paper: str = "A4") -> bytes:
    """One work order as a PDF; ``paper`` is ``"A4"`` or ``"letter"``, as for :func:`render_batch`."""
    return render_batch([sheet], paper)
