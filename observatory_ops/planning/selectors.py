"""Reads of the planning app for pages, commands and the API."""
from __future__ import annotations

from django.db.models import Count, Prefetch, QuerySet

from observatory_ops.calc.triggers import STATUSES
from observatory_ops.logbook.models import ServiceRecord
from observatory_ops.registry.models import Site, Subsystem

from .models import PlanStatus, ServicePlan, Trigger


def due_rows() -> QuerySet[PlanStatus]:
    """Every computed plan state with what a due-list row shows, in one query, most urgent first."""
    return PlanStatus.objects.select_related("plan__subsystem__telescope__site").order_by(
        "forecast_date", "plan__subsystem__telescope__name"
    )


def due_for_site(site: Site) -> QuerySet[PlanStatus]:
    """Overdue and due items at a site, most urgent first."""
    return due_rows().filter(site=site).exclude(status="later")


def status_counts(site: Site) -> dict[str, int]:
    counts = dict(PlanStatus.objects.filter(site=site).values_list("status").annotate(n=Count("pk")))
    return {s: counts.get(s, 0) for s in STATUSES}


def recent_service(site: Site) -> QuerySet[ServiceRecord]:
    return ServiceRecord.objects.filter(subsystem__telescope__site=site).select_related(
        "subsystem", "plan", "performed_by"
    )


def plans_with_status(subsystem: Subsystem) -> QuerySet[ServicePlan]:
    return (
        ServicePlan.objects.filter(subsystem=subsystem)
        .select_related("status")
        .prefetch_related(Prefetch("triggers", queryset=Trigger.objects.order_by("metric")))
        .order_by("-active", "name")
    )
