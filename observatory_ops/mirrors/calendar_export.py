"""Planned work and recoat windows as an iCalendar file (RFC 5545), with the ``icalendar`` package."""
from __future__ import annotations

import datetime as dt
from urllib.parse import urlsplit

from django.conf import settings
from django.utils import timezone
from icalendar import Calendar, Event

from observatory_ops.planning.models import Closure
from observatory_ops.planning.services import phase_lengths, recoat_downtime, site_today
from observatory_ops.registry.models import Site
from observatory_ops.workorders.models import State, WorkOrder
from observatory_ops.workorders.selectors import work_done_on_of

from .models import RecoatPlan

#: RFC 5545 3.8.1.11 STATUS of an event for each work order state: a draft is tentative, work issued,
#: under way or done is confirmed (done work stays as history), and withdrawn work is cancelled, so a
#: calendar that imported the event earlier marks it off instead of keeping it.
EVENT_STATUS = {
    State.DRAFT: "TENTATIVE",
    State.ISSUED: "CONFIRMED",
    State.UNDERWAY: "CONFIRMED",
    State.FINISHED: "CONFIRMED",
    State.COUNTERSIGNED: "CONFIRMED",
    State.WITHDRAWN: "CANCELLED",
}


def uid_host() -> str:
    """The right-hand side of every event's UID: the host of ``settings.SITE_URL``.

    RFC 5545 3.8.4.7 asks for a UID unique beyond this calendar and the same each time the event is sent;
    the installation's configured host gives both, whatever address the calendar was fetched through.
    """
    return (urlsplit(settings.SITE_URL).hostname or "observatory-ops").lower()


def _window_status(plan: RecoatPlan) -> str:
    """A recoat window is cancelled when all its orders are withdrawn or its mirror is retired (not recoated:
    ``planning.services.recoats_in_hand``), tentative while the orders left are drafts or it has none (entered in the
    admin, said so in its description)."""
    states = {order.state for order in plan.work_orders.all()} - {State.WITHDRAWN}
    if (not states and plan.work_orders.all()) or plan.mirror.subsystem.retired_on is not None:
        return "CANCELLED"
    return "TENTATIVE" if states <= {State.DRAFT} else "CONFIRMED"


def site_calendar(site: Site, base_url: str) -> bytes:
    """All-day events: each planned work order (withdrawn ones cancelled), each recoat window of the site, and each of
    its closures (``planning.models.Closure``).

    ``base_url`` is where the links in the descriptions point; the events' UIDs do not depend on it.
    """
    calendar = Calendar()
    calendar.add("prodid", "-//observatory_ops//planned work//EN")
    calendar.add("version", "2.0")
    calendar.add("x-wr-calname", f"{site.name}: planned work")
    stamp = timezone.now()
    host = uid_host()

    def all_day(uid: str, first: dt.date, last: dt.date, summary: str, description: str, status: str) -> None:
        # RFC 5545 3.6.1: an all-day event's DTEND is the day after its last day.
        event = Event()
        for key, value in (("uid", f"{uid}@{host}"), ("dtstamp", stamp), ("dtstart", first),
                           ("dtend", last + dt.timedelta(days=1)), ("summary", summary),
                           ("description", description), ("status", status)):
            event.add(key, value)
        calendar.add_component(event)

    plans = list(
        RecoatPlan.objects.filter(mirror__subsystem__telescope__site=site)
        .select_related("mirror__subsystem__telescope__site").prefetch_related("work_orders")
    )
    last_day = _phase_last_days(plans)
    orders = (
        WorkOrder.objects.filter(site=site, planned_date__isnull=False).select_related("telescope")
        .annotate(done_on=work_done_on_of("pk"))
    )
    done_days: dict[int, tuple[dt.date, dt.date]] = {}  # finished order -> the days its work was done
    for order in orders:
        address = base_url.rstrip("/") + order.get_absolute_url()
        where = f"{order.telescope.name}: " if order.telescope else ""
        first, last = order.planned_date, last_day.get(order.pk, order.planned_date)
        # Done work stays as history, said so in its title (an onboarding review read a finished order as work to do),
        # on the days it was done (a recoat review's orders, all done on one day, stayed on their planned days ahead).
        done = ""
        if order.state in (State.FINISHED, State.COUNTERSIGNED):
            done, (first, last) = " (done)", done_days.setdefault(order.pk, _done_span(order, site.zone))
        all_day(f"workorder-{order.pk}", first, last,
                f"{order.number}{done} {where}{order.title}", f"State: {order.get_state_display()}. {address}",
                EVENT_STATUS[order.state])
    today = site_today(site)
    for plan in plans:
        subsystem = plan.mirror.subsystem
        # The window as its work orders now stand, as the dashboard and the forecasts take it (a walk-through re-dated
        # a recoat's orders to January and the calendar kept it in December); once all are done, the days they took.
        out = recoat_downtime(plan, today)
        phases = ", ".join(f"{p.get('name', '?')} {p.get('days', '?')} d ({_span(p)})" for p in plan.phases
                           if isinstance(p, dict))
        described = f"{out.changed}. The phases as planned: {phases}" if out.changed else phases
        orders_of = list(plan.work_orders.all())
        if orders_of and all(o.pk in done_days for o in orders_of):  # all done, none withdrawn (a stopped recoat)
            first, last = min(done_days[o.pk][0] for o in orders_of), max(done_days[o.pk][1] for o in orders_of)
            all_day(f"recoat-{plan.pk}", first, last, f"Recoat done: {subsystem.telescope.name} {subsystem.name}",
                    f"Done {_days_text(first, last)}. The phases as planned: {phases}", "CONFIRMED")
            continue
        if subsystem.retired_on is not None:
            described = f"Not done: {subsystem.name} was retired on {subsystem.retired_on:%d %b %Y}. {described}"
        elif not orders_of and out.last < today:  # past: no longer in hand (planning.services.recoats_in_hand)
            described = ("Entered in the admin without work orders, its days past: the forecasts no longer count "
                         f"them. If it was done, log its new coating on the mirror's page. {described}")
        elif not orders_of:  # tentative, as a draft's days are, yet the forecasts take the telescope out on them
            described = ("Entered in the admin without work orders: the forecasts count the telescope out on these "
                         "days. For work orders, delete it there (Recoat plans) and plan the recoat on the mirror's "
                         f"page. {described}")
        all_day(f"recoat-{plan.pk}", out.first, out.last,
                f"Recoat window: {subsystem.telescope.name} {subsystem.name}", described, _window_status(plan))
    # Closures: nights not observed (a season shut, an overhaul), whose days are free for work that takes a telescope
    # out. A closure deleted leaves the calendar at the next refresh.
    for closure in Closure.objects.filter(site=site).select_related("telescope"):
        all_day(f"closure-{closure.pk}", closure.first_night, closure.last_night,
                f"Closed: {closure.whose}: {closure.reason}",
                f"No observing on the nights of {closure.first_night:%d %b %Y} to {closure.last_night:%d %b %Y}: the "
                "forecasts count no use on them.", "CONFIRMED")
    return calendar.to_ical()


def _done_span(order: WorkOrder, zone) -> tuple[dt.date, dt.date]:
    """The days a finished order's work took: from the day it was started (the day its work was done, if that came
    first: work entered later from paper) to the day its work was done (``workorders.selectors.work_done_on``, read
    as ``done_on``; the day it was finished when its records say none)."""
    done = order.done_on or timezone.localtime(order.finished_at, zone).date()
    started = timezone.localtime(order.started_at, zone).date() if order.started_at else done
    return min(started, done), done


def _span(phase: dict) -> str:
    try:
        first, last = dt.date.fromisoformat(phase["first"]), dt.date.fromisoformat(phase["last"])
    except (KeyError, TypeError, ValueError):  # the admin edits the phases as JSON
        return "dates not readable"
    return _days_text(first, last)


def _days_text(first: dt.date, last: dt.date) -> str:
    if first == last:
        return f"{first:%a %d %b %Y}"
    return f"{first:%a %d %b}{'' if first.year == last.year else f' {first:%Y}'} to {last:%a %d %b %Y}"


def _phase_last_days(plans: list[RecoatPlan]) -> dict[int, dt.date]:
    """The last day of each recoat work order with a planned date: that date and its phase's planned length
    (``planning.services.phase_lengths``), so an order re-dated keeps its phase's days."""
    last = {}
    for plan in plans:
        length = phase_lengths(plan)
        for order in plan.work_orders.all():
            if order.planned_date and order.recoat_phase in length:
                last[order.pk] = order.planned_date + length[order.recoat_phase]
    return last
