"""The due digest: one e-mail a day per site, listing what is overdue and due, and why, to the engineers the site
lists (``Site.digest_to``), or where it lists none to everyone in the engineer role or above; where none of those
listed can receive it any more, to the administrators, saying why (``recipients``, ``listed_gone``).

Sent by the ``planning.due_digest_send`` task (hourly, for the sites due for it, see ``CELERY_BEAT_SCHEDULE``)
through Django's mail: printed by the console backend unless ``EMAIL_BACKEND`` says otherwise.
"""
from __future__ import annotations

import datetime as dt
import logging
import smtplib

from django.conf import settings
from django.core.mail import EmailMessage, get_connection
from django.db import transaction
from django.template.loader import render_to_string
from django.urls import reverse

from observatory_ops.access.roles import ADMINISTRATOR, ENGINEER, holders_of
from observatory_ops.registry.models import Site

from . import selectors
from .models import DigestSent
from .services import site_today, sites_bring_up_to_date

log = logging.getLogger(__name__)

CONSOLE_BACKEND = "django.core.mail.backends.console.EmailBackend"


def mail_is_printed() -> bool:
    """Whether mail is printed to the process's output (its log) instead of sent: Django's console backend."""
    return settings.EMAIL_BACKEND == CONSOLE_BACKEND


def recipients(site: Site) -> list[str]:
    """E-mail addresses the site's digest goes to: the people its ``digest_to`` lists, or where it lists none, every
    active person in the engineer role or above (administrators and superusers included); either way only those who
    still hold the role and have an address. Where the site lists people and none of them can receive it any more
    (left, role taken away, no address), the administrators (``fallback_to_administrators``): an operator review
    found a site's digest stopped, its one listed engineer made inactive, said only in the worker's log."""
    if listed_gone(site):
        return fallback_to_administrators()
    engineers = holders_of(ENGINEER).exclude(email="")
    if site.digest_to.exists():
        engineers = engineers.filter(digest_sites=site)
    return sorted(set(engineers.values_list("email", flat=True)))


def listed_gone(site: Site) -> bool:
    """True when the site lists who gets its digest (``digest_to``) and none of them can receive it any more."""
    return site.digest_to.exists() and not holders_of(ENGINEER).exclude(email="").filter(digest_sites=site).exists()


def fallback_to_administrators() -> list[str]:
    """The administrators' addresses (superusers included), for a site whose listed recipients are all gone."""
    return sorted(set(holders_of(ADMINISTRATOR).exclude(email="").values_list("email", flat=True)))


def due_digest(site: Site, today: dt.date, to: list[str]) -> EmailMessage | None:
    """The digest message for ``site``, or None when nothing there is overdue or due and no work order is late (drafted
    or issued, its planned date passed: ``workorders.selectors.late_orders``, with what holds it)."""
    from observatory_ops.workorders.selectors import (  # work orders build on planning
        LATE_ORDERS_SAID,
        late_orders,
        orders_for_plans,
    )

    rows = list(selectors.due_for_site(site))
    late = late_orders(site, today)
    if not rows and not late:
        return None
    # The work orders still to do on each item, as the due list and the dashboard say them (an operator review: the
    # digest listed items already on an order without saying so).
    on_orders = orders_for_plans(r.plan_id for r in rows)
    for row in rows:
        row.on_orders = on_orders.get(row.plan_id, [])
    overdue = [r for r in rows if r.status == "overdue"]
    due = [r for r in rows if r.status == "due"]
    context = {
        "site": site,
        "today": today,
        "overdue": overdue,
        "due": due,
        "sections": [("OVERDUE", overdue), ("DUE", due)],
        "late": late[:LATE_ORDERS_SAID],
        "late_more": len(late) - LATE_ORDERS_SAID,
        "orders_url": f"{settings.SITE_URL}{reverse('workorder-list')}?site={site.pk}",
        "site_url": settings.SITE_URL,
        "dashboard_url": settings.SITE_URL + site.get_absolute_url(),
        "due_list_url": f"{settings.SITE_URL}{reverse('due-list')}?site={site.pk}",
        "listed_gone": listed_gone(site),
    }
    # One line whatever the name holds (a name stored before ``validate_one_line``): a line break in a subject makes
    # the mail library refuse the message, and the site's digest would fail every hour.
    orders = f", {len(late)} work order{'s' if len(late) != 1 else ''} late" if late else ""
    subject = f"{' '.join(site.name.split())}: {len(overdue)} overdue, {len(due)} due{orders} ({today.isoformat()})"
    return EmailMessage(subject, render_to_string("planning/due_digest.txt", context), to=to)


def due_digest_send(site: Site, today: dt.date | None = None) -> int:
    """Send today's digest for ``site`` to each engineer once; return how many addresses it went to this time.

    One message per person: a message to all of them would show every engineer's address to every other.
    At most one digest per site, local day and person, whichever process or command asks: the site's row is locked
    while the messages go out, one at a time. Each person is recorded as mailed (``DigestSent``) once their message
    was accepted, never before, and the day is recorded on the site (``Site.digest_sent_on``) once all were, in the
    same transaction. So a second process waits and then finds the day sent. A send that fails or times out
    (``EMAIL_TIMEOUT``) part-way commits the people mailed so far and then raises, leaving the day unsent: the task's
    retry, or the next hourly run, mails only the others. An address the server refuses for good
    (``refused_for_good``) is logged, counted as done for the day, and the others are mailed. A process killed
    part-way (the hard time limit) loses its transaction, so those it mailed get that day's digest twice, rather
    than anyone none.
    """
    today = today or site_today(site)
    if Site.objects.filter(pk=site.pk, digest_sent_on=today).exists():
        return 0
    sites_bring_up_to_date([site])  # states computed before the site's today would list yesterday's items
    to = recipients(site)
    if not to:
        whom = "no engineer or administrator" + (" listed for it" if site.digest_to.exists() else "")
        log.warning("due digest of %s not sent: %s has an e-mail address", site, whom)
        return 0
    message = due_digest(site, today, to)
    if message is None:
        return 0
    mail = get_connection()
    # Connected and greeted before the site's row is locked: a server that accepts but never answers fails
    # here, after EMAIL_TIMEOUT, holding up no one.
    mail.open()
    sent, failure, refused = 0, None, []
    try:
        with transaction.atomic():
            if not Site.objects.select_for_update().filter(pk=site.pk).exclude(digest_sent_on=today).exists():
                return 0  # another process sent it meanwhile
            mailed = set(DigestSent.objects.filter(site=site, day=today).values_list("address", flat=True))
            for address in (address for address in to if address not in mailed):
                try:
                    mail.send_messages([EmailMessage(message.subject, message.body, to=[address])])
                except smtplib.SMTPRecipientsRefused as exc:
                    if not refused_for_good(exc):
                        failure = exc
                        break
                    # Refused for good (5xx, "user unknown"): the others still get theirs, and this address is not
                    # tried again today (an operator review: one old address stopped the site's digest every hour).
                    log.warning("due digest of %s not delivered to %s: the mail server refused it for good (%s)",
                                site.slug, address, "; ".join(f"{code} {text!r}" for code, text in
                                                              exc.recipients.values()))
                    DigestSent.objects.create(site=site, day=today, address=address)
                    refused.append(f"{address} ({'; '.join(f'{code}' for code, _ in exc.recipients.values())})")
                    continue
                except Exception as exc:  # raised below, once the people mailed so far are committed
                    failure = exc
                    break
                DigestSent.objects.create(site=site, day=today, address=address)
                sent += 1
            if failure is None:
                # The refusals of the day stay said on the site (its admin page, the digest command), not only in
                # the worker's log (a diff review: every address refused read as sent).
                said = f"{today:%d %b %Y}: refused for good: {', '.join(refused)}"[:500] if refused else ""
                Site.objects.filter(pk=site.pk).update(digest_sent_on=today, digest_refused=said)
                DigestSent.objects.filter(site=site).delete()  # the day is sent to all: the site's day says so
    finally:
        mail.close()
    if failure is not None:
        log.warning("due digest of %s stopped after %d address(es): %r", site.slug, sent, failure)
        raise failure
    return sent


def refused_for_good(exc: smtplib.SMTPRecipientsRefused) -> bool:
    """True when the mail server refused every recipient of a message permanently (a 5xx reply, RFC 5321 section
    4.2.1: "permanent negative completion"), so sending again cannot help; a 4xx reply is worth a retry."""
    return bool(exc.recipients) and all(500 <= code < 600 for code, _ in exc.recipients.values())
