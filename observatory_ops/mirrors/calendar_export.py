"""Planned work and recoat windows as an iCalendar file (RFC 5545), with the ``icalendar`` package."""
from __future__ import annotations

import datetime as dt

from django.utils import timezone
from icalendar import Calendar, Event

from observatory_ops.registry.models import Site
from observatory_ops.workorders.models import State, WorkOrder

from .models import RecoatPlan


def site_calendar(site: Site, base_url: str) -> bytes:
    """All-day events: each planned, open work order, and each recoat window of the site."""
    calendar = Calendar()
    calendar.add("prodid", "-//observatory_ops//planned work//EN")
    calendar.add("version", "2.0")
    calendar.add("x-wr-calname", f"{site.name}: planned work")
    stamp = timezone.now()
    orders = WorkOrder.objects.filter(site=site, planned_date__isnull=False).exclude(state=State.WITHDRAWN)
    for order in orders:
        event = Event()
        event.add("uid", f"workorder-{order.pk}@observatory-ops")
        event.add("dtstamp", stamp)
        event.add("dtstart", order.planned_date)
        event.add("dtend", order.planned_date + dt.timedelta(days=1))
        event.add("summary", f"{order.number} {order.title}")
        address = base_url.rstrip("/") + order.get_absolute_url()
        event.add("description", f"State: {order.get_state_display()}. {address}")
        calendar.add_component(event)
    for plan in RecoatPlan.objects.filter(mirror__subsystem__telescope__site=site).select_related("mirror__subsystem"):
        event = Event()
        event.add("uid", f"recoat-{plan.pk}@observatory-ops")
        event.add("dtstamp", stamp)
        event.add("dtstart", plan.starts_on)
        event.add("dtend", plan.ends_on + dt.timedelta(days=1))
        event.add("summary", f"Recoat window: {plan.mirror.subsystem}")
        event.add("description", ", ".join(f"{p['name']} {p['days']} d" for p in plan.phases))
        calendar.add_component(event)
    return calendar.to_ical()
