"""The due digest: one e-mail a day per site to its engineers, listing what is overdue and due, and why.

Sent by the ``planning.due_digest_send`` task (daily, see ``CELERY_BEAT_SCHEDULE``) through Django's mail
(the console backend unless ``EMAIL_BACKEND`` says otherwise).
"""
from __future__ import annotations

import datetime as dt
import logging

from django.conf import settings
from django.core.cache import cache
from django.core.mail import EmailMessage
from django.template.loader import render_to_string
from django.urls import reverse

from observatory_ops.access.roles import ENGINEER, holders_of
from observatory_ops.registry.models import Site

from . import selectors
from .services import site_today, sites_bring_up_to_date

log = logging.getLogger(__name__)

#: How long the "digest sent" mark is kept: longer than a day, so a second run the same day sends nothing.
SENT_MARK_SECONDS = 2 * 24 * 3600


def recipients() -> list[str]:
    """E-mail addresses of the active people in the engineer role or above, administrators and superusers
    included (sites have no per-person assignment)."""
    return sorted(set(holders_of(ENGINEER).exclude(email="").values_list("email", flat=True)))


def due_digest(site: Site, today: dt.date, to: list[str]) -> EmailMessage | None:
    """The digest message for ``site``, or None when nothing there is overdue or due."""
    rows = list(selectors.due_for_site(site))
    if not rows:
        return None
    overdue = [r for r in rows if r.status == "overdue"]
    due = [r for r in rows if r.status == "due"]
    context = {
        "site": site,
        "today": today,
        "overdue": overdue,
        "due": due,
        "sections": [("OVERDUE", overdue), ("DUE", due)],
        "site_url": settings.SITE_URL,
        "dashboard_url": settings.SITE_URL + site.get_absolute_url(),
        "due_list_url": f"{settings.SITE_URL}{reverse('due-list')}?site={site.pk}",
    }
    subject = f"{site.name}: {len(overdue)} overdue, {len(due)} due ({today.isoformat()})"
    return EmailMessage(subject, render_to_string("planning/due_digest.txt", context), to=to)


def due_digest_send(site: Site, today: dt.date | None = None) -> int:
    """Send today's digest for ``site`` to the engineers once; return how many addresses it went to.

    At most one digest per site and local day: the day is claimed in the shared cache before sending and
    released if sending fails, so a retried or repeated task sends nothing twice. A digest lost to a
    worker killed between claim and send is covered by the next day's, which lists every item again.
    """
    today = today or site_today(site)
    sites_bring_up_to_date([site])  # states computed before the site's today would list yesterday's items
    to = recipients()
    if not to:
        log.warning("due digest of %s not sent: no engineer or administrator has an e-mail address", site)
        return 0
    message = due_digest(site, today, to)
    if message is None:
        return 0
    mark = f"obsops:due-digest:{site.pk}:{today.isoformat()}"
    if not cache.add(mark, "sent", timeout=SENT_MARK_SECONDS):
        return 0
    try:
        message.send()
    except BaseException:
        cache.delete(mark)
        raise
    return len(to)
