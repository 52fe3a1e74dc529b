"""Background tasks of the work-order app: the weekly PDF batch per site."""
from __future__ import annotations

import datetime as dt

from celery import shared_task

from observatory_ops.celery import ServiceTask, each_site
from observatory_ops.planning.services import site_today
from observatory_ops.registry.models import Site

from . import batches


@shared_task(base=ServiceTask, name="workorders.work_order_batch_build")
def work_order_batch_build(site_id: int, week_start: str | None = None) -> dict:
    """Write the site's work-order batch for the week from ``week_start`` (ISO date of a Monday).

    Default: the week starting on the Monday on or after the site's local date.
    """
    site = Site.objects.get(pk=site_id)
    monday = dt.date.fromisoformat(week_start) if week_start else batches.coming_monday(site_today(site))
    path, count = batches.work_order_batch_write(site, monday)
    return {"path": str(path) if count else None, "work_orders": count}


@shared_task(base=ServiceTask, name="workorders.sites_work_order_batch_all")
def sites_work_order_batch_all() -> int:
    """Weekly: build every site's batch for the coming week. Returns the number of sites."""
    return each_site(work_order_batch_build.name)
