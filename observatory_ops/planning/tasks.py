"""Background tasks of the planning app: thin shells over ``services`` and ``digest``.

Arguments are plain ids so a task can wait in the broker; each task reads the current rows when it runs.
"""
from __future__ import annotations

import datetime as dt

from celery import shared_task
from django.conf import settings
from django.db import transaction
from django.utils import timezone

from observatory_ops.celery import ServiceTask, each_site
from observatory_ops.registry.models import Site

from . import digest, services


@shared_task(base=ServiceTask, name="planning.site_sky_refresh")
def site_sky_refresh(site_id: int) -> int:
    """Fill the site's nights cache for the whole forecast span from today; return the nights computed."""
    site = Site.objects.get(pk=site_id)
    today = services.site_today(site)
    with transaction.atomic():  # the whole work, or none of it
        return services.site_sky_refresh(site, today, today + dt.timedelta(days=services.HORIZON_DAYS))


@shared_task(base=ServiceTask, name="planning.site_recompute")
def site_recompute(site_id: int) -> int:
    """Recompute the due state of every plan at the site; return the number of plans."""
    site = Site.objects.get(pk=site_id)
    with transaction.atomic():  # the whole work, or none of it
        return services.site_recompute(site)


@shared_task(base=ServiceTask, name="planning.due_digest_send", autoretry_for=(*ServiceTask.autoretry_for, OSError))
def due_digest_send(site_id: int) -> int:
    """E-mail today's due digest for the site to the engineers, once a day; return the addresses mailed.

    An unreachable or refusing mail server (``OSError``, which ``smtplib.SMTPException`` is) is retried.
    """
    return digest.due_digest_send(Site.objects.get(pk=site_id))


@shared_task(base=ServiceTask, name="planning.sites_recompute_all")
def sites_recompute_all(stale_only: bool = False) -> int:
    """For every site (or, with ``stale_only``, each whose states were computed before its today: the hourly
    beat entry, which so reaches each site within the hour after its midnight, and catches up after any
    pause), extend its nights cache, then recompute it. Returns the number of sites."""
    sites = services.stale_sites() if stale_only else None
    return each_site(site_sky_refresh.name, site_recompute.name, sites=sites)


@shared_task(base=ServiceTask, name="planning.sites_due_digest_all")
def sites_due_digest_all(local_hour: int | None = None) -> int:
    """Send the due digest of each site where it is ``local_hour`` o'clock or later in its own time zone and
    whose digest of the day is not sent yet (the hourly beat entry: the engineers' morning, whenever the
    workers run). Returns the number of sites asked.

    ``local_hour`` is ``settings.SITE_DIGEST_HOUR`` unless given, so a run by hand (``celery call``) before that
    hour sends nothing yet, as beat's would not: it would otherwise send the day's digest at 03:00 and mark the day
    sent. The ``digest`` command sends it now."""
    if local_hour is None:
        local_hour = settings.SITE_DIGEST_HOUR
    now = timezone.now()
    sites = [
        site for site in Site.objects.order_by("pk")
        if now.astimezone(site.zone).hour >= local_hour and site.digest_sent_on != services.site_today(site, now)
    ]
    return each_site(due_digest_send.name, sites=sites)
