"""Writes of the logbook: nightly usage imports, readings and service records (append-only).

Each write ends by recomputing the due states of the site it touched, so pages show the new state.
"""
from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from dataclasses import dataclass, field

from django.core.exceptions import ValidationError
from django.db import transaction
from django.utils import timezone

from observatory_ops.planning.models import ServicePlan
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Site, Subsystem

from . import nights_csv
from .models import NightUsage, Reading, ServiceRecord
from .quantities import QUANTITIES

_USAGE_FIELDS = [c for c in nights_csv.COLUMNS if c != "night"]


@dataclass
class ImportReport:
    created: int = 0
    updated: int = 0
    unchanged: int = 0
    errors: list[tuple[int, str]] = field(default_factory=list)
    skipped: list[tuple[int, str]] = field(default_factory=list)
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
) -> ImportReport:
    """Import a nights CSV (``nights_csv`` format) for one site: all or nothing, and idempotent.

    Every bad row is reported with its line number. Unless ``skip_bad``, one bad row means nothing is
    stored. A night already stored with the same figures is left untouched; with other figures it is
    updated and reported. ``progress(done, total)`` is called as rows are written.
    """
    report = ImportReport()
    try:
        text = nights_csv.decode(data)
    except nights_csv.FileError as exc:
        report.errors.append((exc.line, str(exc)))
        return report
    parsed = nights_csv.parse(text, latest_night=site_today(site))
    if parsed.errors and not (skip_bad and parsed.rows):
        report.errors = parsed.errors
        return report
    report.skipped = parsed.errors
    rows = parsed.rows
    with transaction.atomic():
        nights = [values["night"] for _, values in rows]
        existing = {u.night: u for u in NightUsage.objects.select_for_update().filter(site=site, night__in=nights)}
        new, changed = [], []
        for done, (_line, values) in enumerate(rows, start=1):
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
                report.unchanged += 1
            if progress and (done % 500 == 0 or done == len(rows)):
                progress(done, len(rows))
        NightUsage.objects.bulk_create(new, batch_size=500)
        NightUsage.objects.bulk_update(changed, _USAGE_FIELDS + ["source", "recorded_at"], batch_size=500)
        report.created, report.updated = len(new), len(changed)
        report.updated_nights = sorted(u.night for u in changed)
        report.stored = True
        if new or changed:
            site_recompute(site)
    return report


def reading_log(
    subsystem: Subsystem, quantity: str, value: float, taken_at: dt.datetime, by, note: str = ""
) -> Reading:
    """Append a reading and refresh the due states it may change."""
    if quantity not in QUANTITIES:
        raise ValidationError(f"unknown quantity {quantity!r}")
    if quantity == "reflectance" and not 0 <= value <= 1:
        raise ValidationError("a reflectance is a fraction between 0 and 1")
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
