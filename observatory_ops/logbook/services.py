"""Writes of the logbook: nightly usage imports, readings and service records (append-only).

Each write ends by recomputing the due states of the site it touched, so pages show the new state.
"""
from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from dataclasses import dataclass, field

from django.core.exceptions import ValidationError
from django.db import IntegrityError, transaction
from django.utils import timezone
from simple_history.utils import bulk_create_with_history, bulk_update_with_history

from observatory_ops.calc.night_of import night_of
from observatory_ops.planning.models import ServicePlan
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Site, Subsystem

from . import nights_csv
from .models import NightUsage, Reading, ServiceRecord
from .quantities import QUANTITIES, value_problem

_USAGE_FIELDS = [c for c in nights_csv.COLUMNS if c != "night"]
#: What a new night stores for a column its record leaves out.
_BLANKS = {c.name: c.blank for c in nights_csv.COLUMN_SPECS if not c.required}


@dataclass
class ImportReport:
    created: int = 0
    updated: int = 0
    unchanged: int = 0
    errors: list[nights_csv.Problem] = field(default_factory=list)  # (line or index, reason), with .field
    skipped: list[nights_csv.Problem] = field(default_factory=list)
    stored: bool = False
    updated_nights: list[dt.date] = field(default_factory=list)
    file_problem: str = ""  # a sentence when the whole file or body is refused (then no row was read)

    @property
    def summary(self) -> str:
        if self.file_problem:
            return f"{self.file_problem}. Nothing was stored."
        if self.errors:
            return f"{len(_by_position(self.errors))} bad row(s); nothing was stored."
        text = f"{self.created} new, {self.updated} updated, {self.unchanged} unchanged"
        if self.skipped:
            text += f"; {len(_by_position(self.skipped))} bad row(s) skipped"
        return text + "."

    @property
    def refused_rows(self) -> list[tuple[int | None, str]]:
        """(line or index, every problem of that row) for each refused row, in order."""
        return [] if self.file_problem else _by_position(self.errors)

    @property
    def skipped_rows(self) -> list[tuple[int | None, str]]:
        return _by_position(self.skipped)


def _by_position(problems: list[nights_csv.Problem]) -> list[tuple[int | None, str]]:
    rows: dict[int | None, list[str]] = {}
    for position, reason in problems:
        rows.setdefault(position, []).append(reason)
    return [(position, "; ".join(reasons)) for position, reasons in rows.items()]


def nights_import(
    site: Site,
    data: bytes,
    skip_bad: bool = False,
    source: str = NightUsage.Source.IMPORT,
    progress: Callable[[int, int], None] | None = None,
    by=None,
) -> ImportReport:
    """Import a nights CSV (``nights_csv`` format) for one site: all or nothing, and idempotent.

    Every problem of every bad row is reported with its line number; a file that is not a nights CSV
    at all is refused as a whole (``ImportReport.file_problem``). Unless ``skip_bad``, one bad row means
    nothing is stored. A night already stored keeps the figures of the columns the file leaves out; if
    the file's figures for it are the stored ones it is left untouched, otherwise it is updated and
    reported. ``progress(done, total)`` is called as rows are written. ``by`` is the person the audit
    trail names (None for the command line).
    """
    report = ImportReport()
    try:
        text = nights_csv.decode(data)
    except nights_csv.FileError as exc:
        return _refused_file(report, [nights_csv.Problem(None, str(exc))])
    parsed = nights_csv.parse(text, latest_night=latest_night(site))
    if parsed.whole_problem:
        return _refused_file(report, parsed.errors)
    if parsed.errors and not (skip_bad and parsed.rows):
        report.errors = parsed.errors
        return report
    report.skipped = parsed.errors
    _nights_store(site, [values for _, values in parsed.rows], source, report, progress, by)
    return report


def _refused_file(report: ImportReport, problems: list[nights_csv.Problem]) -> ImportReport:
    report.errors = problems
    report.file_problem = f"This file is not a nights CSV: {problems[0].reason}"
    return report


def latest_night(site: Site, now: dt.datetime | None = None) -> dt.date:
    """The newest night that can be logged now: the one the present moment belongs to (``calc.night_of``:
    a night is dated by the local date of its evening and runs from local noon to noon). Before local noon
    that is last night, so a night dated today, which has not begun, is refused: a common slip of control
    software that dates a night by its morning."""
    return night_of(now or timezone.now(), site.time_zone)


def nights_ingest(
    site: Site, records: list[dict], source: str = NightUsage.Source.API, by=None, reason: str = ""
) -> ImportReport:
    """Store nights sent by control software as JSON objects (keys: the CSV column names) for one site.

    The same rules as the CSV import (``nights_csv.parse_row``); every problem of every bad object is
    reported with its list index and field (``Problem.field``), and one bad object means nothing is
    stored. Idempotent per site and night: a night sent again with the same figures changes nothing,
    with other figures it is updated; a key left out keeps the stored figure. Raises ValueError when
    ``records`` is not a list.
    """
    report = ImportReport()
    parsed = nights_csv.parse_objects(records, latest_night=latest_night(site))
    if parsed.errors:
        report.errors = parsed.errors
        whole = parsed.whole_problem or ""
        report.file_problem = whole[:1].upper() + whole[1:]
        return report
    _nights_store(site, [values for _, values in parsed.rows], source, report, by=by, reason=reason)
    return report


def _stored_nights(site: Site, nights: list[dt.date]) -> dict[dt.date, NightUsage]:
    return {u.night: u for u in NightUsage.objects.select_for_update().filter(site=site, night__in=nights)}


def _nights_store(
    site: Site,
    rows: list[dict],
    source: str,
    report: ImportReport,
    progress: Callable[[int, int], None] | None = None,
    by=None,
    reason: str = "",
) -> None:
    """Create new nights, update changed ones and count the rest, in one transaction; recompute on change.

    Two writers sending the same new night at once both find it absent and one insert fails on the
    unique (site, night) constraint; that writer starts again once, and then finds the night stored.
    """
    nights = [values["night"] for values in rows]
    for attempt in range(2):
        try:
            with transaction.atomic():
                new, changed, unchanged = _nights_write(
                    site, rows, _stored_nights(site, nights), source, progress, by, reason
                )
                if new or changed:
                    site_recompute(site)
            break
        except IntegrityError:
            if attempt:
                raise
    report.created, report.updated, report.unchanged = len(new), len(changed), unchanged
    report.updated_nights = sorted(u.night for u in changed)
    report.stored = True


def _nights_write(
    site: Site,
    rows: list[dict],
    existing: dict[dt.date, NightUsage],
    source: str,
    progress: Callable[[int, int], None] | None,
    by,
    reason: str,
) -> tuple[list[NightUsage], list[NightUsage], int]:
    """Each row holds the columns its record gave: a new night takes the blank value of every other
    column, a stored night keeps its figures for them and counts as changed only when a given one differs."""
    new, changed, unchanged, written = [], [], 0, set()
    for done, values in enumerate(rows, start=1):
        current = existing.get(values["night"])
        given = [f for f in _USAGE_FIELDS if f in values]
        if current is None:
            new.append(NightUsage(site=site, source=source, **(_BLANKS | values)))
        elif any(getattr(current, f) != values[f] for f in given):
            for f in given:
                setattr(current, f, values[f])
            current.source = source
            current.recorded_at = timezone.now()  # bulk_update skips auto_now
            changed.append(current)
            written.update(given)
        else:
            unchanged += 1
        if progress and (done % 500 == 0 or done == len(rows)):
            progress(done, len(rows))
    # The *_with_history forms also write the audit trail (django-simple-history skips plain bulk writes).
    bulk_create_with_history(new, NightUsage, batch_size=500, default_user=by, default_change_reason=reason)
    bulk_update_with_history(
        changed, NightUsage, [f for f in _USAGE_FIELDS if f in written] + ["source", "recorded_at"], batch_size=500,
        default_user=by, default_change_reason=reason,
    )
    return new, changed, unchanged


def reading_log(
    subsystem: Subsystem, quantity: str, value: float, taken_at: dt.datetime, by, note: str = ""
) -> Reading:
    """Append a reading and refresh the due states it may change.

    A reflectance reading of a mirror subsystem is also filed among the mirror's measurements, in the same
    transaction, so the mirror page's decline fit sees it (``mirrors.services.measurement_from_reading``).
    """
    from observatory_ops.mirrors.services import measurement_from_reading  # mirrors builds on the logbook

    if quantity not in QUANTITIES:
        raise ValidationError(f"unknown quantity {quantity!r}")
    problem = value_problem(quantity, value)
    if problem:
        raise ValidationError(problem)
    if taken_at > timezone.now() + dt.timedelta(minutes=5):
        raise ValidationError("a reading cannot be taken in the future")
    with transaction.atomic():
        reading = Reading.objects.create(
            subsystem=subsystem, quantity=quantity, unit=QUANTITIES[quantity][1], value=value,
            taken_at=taken_at, taken_by=by, note=note,
        )
        measurement_from_reading(reading)
        site_recompute(subsystem.telescope.site)
    return reading


def service_date_problem(site: Site, performed_on: dt.date) -> str | None:
    """Why ``performed_on`` cannot be the date of service work at ``site``; None when it can."""
    today = site_today(site)
    if performed_on > today:
        return "the service date cannot be in the future"
    earliest = nights_csv.earliest_accepted(today)
    if performed_on < earliest:
        return (
            f"service date {performed_on} is more than {nights_csv.MAX_YEARS_BACK} years ago; "
            f"the earliest accepted is {earliest}"
        )
    return None


def service_record_log(
    subsystem: Subsystem,
    plan: ServicePlan | None,
    performed_on: dt.date,
    by,
    summary: str,
    hours_spent: float = 0.0,
    findings: str = "",
    performed_by=None,
) -> ServiceRecord:
    """Append a service record; a record for a plan restarts that plan's counting from ``performed_on``."""
    site = subsystem.telescope.site
    problem = service_date_problem(site, performed_on)
    if problem:
        raise ValidationError(problem)
    record = ServiceRecord(
        subsystem=subsystem, plan=plan, performed_on=performed_on, performed_by=performed_by or by,
        hours_spent=hours_spent, summary=summary, findings=findings, created_by=by,
    )
    record.full_clean()
    with transaction.atomic():
        record.save()
        site_recompute(site)
    return record


def service_record_correct(
    original: ServiceRecord, by, summary: str, performed_on: dt.date | None = None, hours_spent: float | None = None,
    findings: str = "", void: bool = False,
) -> ServiceRecord:
    """Append a correction that replaces ``original`` (or withdraws it with ``void``); nothing is edited.

    A new date is held to the rules of a new record (``service_date_problem``)."""
    if performed_on and performed_on != original.performed_on:
        problem = service_date_problem(original.subsystem.telescope.site, performed_on)
        if problem:
            raise ValidationError(problem)
    with transaction.atomic():
        original = ServiceRecord.objects.select_for_update().get(pk=original.pk)
        if ServiceRecord.objects.filter(corrects=original).exists():
            raise ValidationError("this record has already been corrected; correct the newest record instead")
        correction = ServiceRecord(
            subsystem=original.subsystem, plan=original.plan,
            performed_on=performed_on or original.performed_on, performed_by=original.performed_by,
            hours_spent=original.hours_spent if hours_spent is None else hours_spent,
            summary=summary, findings=findings, corrects=original, void=void, created_by=by,
        )
        correction.full_clean()
        correction.save()
        site_recompute(original.subsystem.telescope.site)
    return correction
