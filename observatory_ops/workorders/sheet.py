"""What one printed work order shows, as plain values: the input of the PDF renderer (``pdf.py``).

No Django imports: the Django layer reads a work order and its related rows and fills a ``Sheet`` with
text already worded and numbers already formatted; the renderer only lays them out. Every string here is
user text as far as the renderer is concerned and is printed literally, never read as markup.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import date, datetime

#: An ``isolation_points`` line that starts so is a warning (an isolation the order lacks), not a point to lock: it
#: prints flagged, without a tick box, as the page shows it.
WARNING_PREFIX = "WARNING: "

#: Said above the due items' figures on the page and on paper: they are kept as computed when the order was made (a
#: traceability review defended a printout eight days late, its brake cycles of the day it was made).
WHY_AS_OF = ("As computed when this order was made, {day}; not brought up to date since. Each subsystem's page has "
             "today's figures.")


@dataclass(frozen=True)
class SheetCaution:
    """One safety caution: its title, what to do, the standard it follows, and how severe the hazard is."""

    title: str
    text: str
    standard: str
    severity_label: str


@dataclass(frozen=True)
class SheetPart:
    """A spare part the work needs: the ``quantity`` planned, and the quantity ``used`` once the work is finished
    (None before: the sheet leaves a box to write it in), of which ``short`` were more than the parts register held
    (it was brought to zero; the site engineer counts the stock)."""

    name: str
    part_number: str
    quantity: float
    unit: str = "each"
    used: float | None = None
    short: float = 0
    stock_note: str = ""  # the register short of it when printed, for a line still to use (selectors.PartRow)

    def __post_init__(self) -> None:
        for what, value in (("quantity", self.quantity), ("quantity used", self.used), ("shortfall", self.short)):
            if value is not None and (not math.isfinite(value) or value < 0):
                raise ValueError(f"part {self.name!r}: {what} must be a number of 0 or more, got {value!r}")


@dataclass(frozen=True)
class SheetTick:
    """How a checklist line (a step, an isolation point) was left on the work order page: ``ticked`` or not, and
    the page's note of who ticked it or took the tick back, and when ("" when nobody did)."""

    ticked: bool
    note: str = ""


@dataclass(frozen=True)
class SheetReading:
    """A reading to take and write down: what, in which unit, and the limit it is judged against."""

    label: str
    unit: str
    limit_text: str
    recorded: str = ""  # the value recorded on completion, if any
    beyond_limit: bool = False  # the recorded value is past its limit (recorded as measured, flagged)


@dataclass(frozen=True)
class SheetLifting:
    """Lifting figures, already formatted in kg and lb, the warnings about them, and the checks to make.

    ``rows`` are (label, value) pairs, for example ("Total suspended load", "612 kg (1349 lb)").
    Nothing here says that a lift is safe; ``checks`` are what a competent person must verify.
    """

    rows: tuple[tuple[str, str], ...]
    warnings: tuple[str, ...]
    checks: tuple[str, ...]


@dataclass(frozen=True)
class Sheet:
    """Everything one printed work order shows, top to bottom.

    ``start_held`` (empty when it may start) says why the order is not to be started yet (title, the reasons, what to
    do), ``out_of_service`` holds a notice (title, what stands, what not to do) for each telescope of the order whose
    mirror a recoat has removed, ``alongside`` (empty when there is none) the other work underway on its telescopes
    when it was printed (title, the orders, what to agree), and ``hazards_notice`` (empty for an order up to date)
    what the order lacks of its subsystems' hazards (title, the hazards, what to do): each is printed in a framed box
    under the header, before anything of the work.
    ``why`` has one line per due item (trigger, value now, limit, forecast), as computed on ``why_as_of`` (the day
    the order was made: the figures are not brought up to date afterwards, and the paper says so). ``cautions`` are
    printed in
    a framed box before any step, most severe first, followed by ``precedence_statement``.
    ``steps_warning``, when set, is printed above the steps (the lockout step is missing from them).
    ``isolation_points`` are the energy isolation points of the telescope for the lockout step, after any warning
    (a line starting with ``WARNING_PREFIX``, printed without a tick box); with
    ``isolation_needed`` False the work's hazards need nothing isolated, and ``isolation_statement`` says what the
    sheet prints in their place (``cautions.isolation_statement``: that the work needs no isolation only when nothing
    is missing or unrecorded).
    ``steps_note`` (how the steps of several plans were merged, before the work starts) is printed above the steps.
    ``standing_notes`` (what to keep in mind throughout the work, not steps to tick) are printed above the steps.
    ``step_ticks`` and ``point_ticks`` (work underway: the ticks so far; finished work: the record; otherwise
    empty) give, for each of ``steps`` and of
    ``isolation_points`` in turn, how it was ticked on the work order page (None for a line that is no checklist
    line, a warning among the points): a ticked line prints with its box ticked, and each note beside its line.
    ``findings`` is printed when present; otherwise blank ruled lines are left for writing.
    ``actual_hours`` and ``work_done_on`` (finished work) fill their boxes by the sign-off; without them the boxes
    are left to write in. ``hours_corrected``, once a service record of the order was corrected, prints beside them.
    ``rigging_check`` adds a sign-off line for the competent person who checks the rigging of a suspended load.
    ``confirmations`` (finished work only) are what the person finishing confirmed beyond the notes beside the
    checklist lines (``step_ticks``, ``point_ticks``: who ticked each and when, or what was confirmed for a line
    nobody ticked): the answer for an energy isolation nobody ticked, the hazards the order lacked, and ticks on lines
    no longer on the order. ``cleanings`` (finished work on mirrors) say how each mirror was cleaned, if at all.
    ``crew`` (finished work) names who did the work with the one who finished it, one to a crew line; None leaves
    the crew lines blank to write in.
    A reading whose ``beyond_limit`` is set is flagged in the table and listed under it.
    ``url`` is the work order's address, printed as a QR code. ``generated_at`` (when it was printed) is in the site's
    time zone, as every time in the notes is: the paper names that zone once, beside it.
    """

    number: str
    title: str
    site: str
    telescope: str
    subsystems: tuple[str, ...]
    order_type: str
    priority: str
    state: str
    planned_date: date | None
    issued_on: date | None
    assignee: str
    estimated_hours: float
    why: tuple[str, ...]
    cautions: tuple[SheetCaution, ...]
    precedence_statement: str
    isolation_needed: bool
    isolation_points: tuple[str, ...]
    steps: tuple[str, ...]
    parts: tuple[SheetPart, ...]
    tools: tuple[str, ...]
    readings: tuple[SheetReading, ...]
    lifting: SheetLifting | None
    url: str
    findings: str = ""
    generated_at: datetime | None = None
    actual_hours: float | None = None
    hours_corrected: float | None = None  # the hours as the order's service records stand, when one was corrected
    estimate_basis: str = ""  # where the estimated hours came from (``WorkOrder.estimate_basis``), "" when entered
    performed_by: str = ""
    performed_on: date | None = None
    checked_by: str = ""
    checked_on: date | None = None
    confirmations: tuple[str, ...] = ()
    hazards_notice: tuple[str, ...] = ()
    isolation_statement: str = ""
    start_held: tuple[str, ...] = ()
    out_of_service: tuple[tuple[str, ...], ...] = ()
    alongside: tuple[str, ...] = ()
    steps_warning: str = ""
    steps_note: str = ""
    standing_notes: tuple[str, ...] = ()
    step_ticks: tuple[SheetTick | None, ...] = ()
    point_ticks: tuple[SheetTick | None, ...] = ()
    work_done_on: date | None = None
    rigging_check: bool = False
    parts_unregistered: tuple[str, ...] = ()  # "2 x Brake pad set": named by the plans, not in the parts register
    crew: tuple[str, ...] | None = None
    cleanings: tuple[str, ...] = ()
    cleaning_to_record: tuple[tuple[str, tuple[str, ...]], ...] = ()  # (mirror, the answers to tick) before finishing
    other_part_rows: int = 0  # blank rows for parts used that the order did not plan, before finishing
    why_as_of: date | None = None  # the day ``why`` was computed: the order was made
    hand_backs_held: tuple[str, ...] = ()  # title, one line an order whose hand-back this crew holds, what to do
    lockout_step: int | None = None  # the lockout's step number (1 = the first step), None when no step is it
    tick_trail: tuple[tuple[str, str, str, str], ...] = ()  # finished work: every tick and take-back (when, who, line,
    # what was recorded), in the order recorded (``selectors.tick_trail``)

    def __post_init__(self) -> None:
        for name in ("subsystems", "why", "isolation_points", "steps", "tools", "confirmations", "hazards_notice",
                     "alongside", "start_held", "parts_unregistered", "crew", "cleanings", "standing_notes",
                     "hand_backs_held"):
            if isinstance(getattr(self, name), str):
                raise ValueError(f"{name} must be a sequence of lines, not a single string")
        if not self.number.strip():
            raise ValueError("work order number must not be blank")
        for ticks, lines in (("step_ticks", "steps"), ("point_ticks", "isolation_points")):
            if getattr(self, ticks) and len(getattr(self, ticks)) != len(getattr(self, lines)):
                raise ValueError(f"work order {self.number}: {ticks} must give one entry for each of its {lines}")
        if not math.isfinite(self.estimated_hours) or self.estimated_hours < 0:
            raise ValueError(
                f"work order {self.number}: estimated hours must be a number of 0 or more, got {self.estimated_hours!r}"
            )
        if not self.precedence_statement.strip():
            raise ValueError(f"work order {self.number}: the precedence statement must not be blank")
        if not self.url.strip():
            raise ValueError(f"work order {self.number}: the address (url) for the QR code must not be blank")
