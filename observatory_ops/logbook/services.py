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

from observatory_ops.planning.models import ServicePlan
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Site, Subsystem

from . import nights_csv
from .models import NightUsage, Reading, ServiceRecord
from .quantities import QUANTITIES, value_problem

_USAGE_FIELDS = [c for c in nights_csv.COLUMNS if c != "night"]


@dataclass
class ImportReport:
    created: int = 0
    updated: int = 0
    unchanged: int = 0
    errors: list[nights_csv.Problem] = field(default_factory=list)  # (line or index, reason), with .field
    skipped: list[nights_csv.Problem] = field(default_factory=list)
    stored: bool = False
    updated_nights: list[dt.date] = field(default_factory=list)

    @property
    def summary(self) -> str:
        if self.errors:
            return f"{len(self.errors)} bad row(s); nothing was stored."
        text = f"{self.created} new, {self.updated} updated, {self.unchanged} unchanged"
        if self.skipped:
            text += f"; {len(self.skipped)} bad row(s) skipped"
        return text + "."


def nights_import(
    site: Site,
    data: bytes,
    skip_bad: bool = False,
    source: str = NightUsage.Source.IMPORT,
    progress: Callable[[int, int], None] | None = None,
    by=None,
) -> ImportReport:
    """Import a nights CSV (``nights_csv`` format) for one site: all or nothing, and idempotent.

    Every bad row is reported with its line number. Unless ``skip_bad``, one bad row means nothing is
    stored. A night already stored with the same figures is left untouched; with other figures it is
    updated and reported. ``progress(done, total)`` is called as rows are written. ``by`` is the
    person the audit trail names (None for the command line).
    """
    report = ImportReport()
    try:
        text = nights_csv.decode(data)
    except nights_csv.FileError as exc:
        report.errors.append(nights_csv.Problem(exc.line, str(exc)))
        return report
    parsed = nights_csv.parse(text, latest_night=site_today(site))
    if parsed.errors and not (skip_bad and parsed.rows):
        report.errors = parsed.errors
        return report
    report.skipped = parsed.errors
    _nights_store(site, [values for _, values in parsed.rows], source, report, progress, by)
    return report


def nights_ingest(
    site: Site, records: list[dict], source: str = NightUsage.Source.API, by=None, reason: str = ""
) -> ImportReport:
    """Store nights sent by control software as JSON objects (keys: the CSV column names) for one site.

    The same rules as the CSV import (``nights_csv.parse_row``); every bad object is reported with its
    list index and field (``Problem.field``), and one bad object means nothing is stored. Idempotent per
    site and night: a night sent again with the same figures changes nothing, with other figures it is
    updated. Raises ValueError when ``records`` is not a list.
    """
    report = ImportReport()
    parsed = nights_csv.parse_objects(records, latest_night=site_today(site))
    if parsed.errors:
        report.errors = parsed.errors
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
    new, changed, unchanged = [], [], 0
    for done, values in enumerate(rows, start=1):
        current = existing.get(values["night"])
        if current is None:
            new.append(NightUsage(site=site, source=source, **values))
        elif any(getattr(current, f) != values[f] for f in _USAGE_FIELDS):
            for f in _USAGE_FIELDS:
                setattr(current, f, values[f])
            current.source = source
            current.recorded_at = timezone.now()  # bulk_update skips auto_now
            changed.append(current)
        else:
            unchanged += 1
        if progress and (done % 500 == 0 or done == len(rows)):
            progress(done, len(rows))
    # The *_with_history forms also write the audit trail (django-simple-history skips plain bulk writes).
    bulk_create_with_history(new, NightUsage, batch_size=500, default_user=by, default_change_reason=reason)
    bulk_update_with_history(
        changed, NightUsage, _USAGE_FIELDS + ["source", "recorded_at"], batch_size=500, default_user=by,
        default_change_reason=reason,
    )
    return new, changed, unchanged


def reading_log(
    subsystem: Subsystem, quantity: str, value: float, taken_at: dt.datetime, by, note: str = ""
) -> Reading:
    """Append a reading and refresh the due states it may change."""
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
        site_recompute(subsystem.telescope.site)
    return reading


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
    if performed_on > site_today(site):
        raise ValidationError("the service date cannot be in the future")
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
    """Append a correction that replaces ``original`` (or withdraws it with ``void``); nothing is edited."""
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
