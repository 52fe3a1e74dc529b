"""Background tasks of the logbook: a night's usage sent by a site's control software."""
from __future__ import annotations

from celery import shared_task
from django.db import transaction

from observatory_ops.celery import ServiceTask
from observatory_ops.registry.models import Site

from . import services


@shared_task(base=ServiceTask, name="logbook.nights_ingest")
def nights_ingest(site_id: int, records: list[dict], source: str = "api") -> dict:
    """Store nights of usage for a site (one record per night) and recompute it; the same nights sent again
    change nothing. Returns the import report's counts and errors."""
    site = Site.objects.get(pk=site_id)
    with transaction.atomic():  # the whole work, or none of it
        report = services.nights_ingest(site, records, source=source)
    return {
        "created": report.created,
        "updated": report.updated,
        "unchanged": report.unchanged,
        "by_telescope": report.by_telescope,
        # As the API answers them (``api.views``): index, field, message.
        "errors": [{"index": p[0], "field": getattr(p, "field", None), "message": p[1]} for p in report.errors],
        "summary": report.summary,
    }
