"""Reads of the register for pages."""
from __future__ import annotations

import datetime as dt

from django.db.models import Count, Max, Q

from observatory_ops.calc.lifting import tube_mass_warning
from observatory_ops.logbook.models import NightUsage, Reading, ServiceRecord
from observatory_ops.mirrors.models import CleaningEvent, CoatingEvent, RecoatPlan, ReflectanceMeasurement
from observatory_ops.workorders.models import State, WorkOrder, listed

from .models import Site, Subsystem, Telescope


def subsystem_tree(telescope: Telescope) -> list[tuple[Subsystem, list]]:
    """The telescope's subsystems in service as nested (subsystem, children) pairs, in one query."""
    subsystems = list(Subsystem.objects.in_service().filter(telescope=telescope).order_by("name"))
    children: dict[int | None, list[Subsystem]] = {}
    for s in subsystems:
        children.setdefault(s.parent_id, []).append(s)

    def build(parent_id):
        return [(s, build(s.pk)) for s in children.get(parent_id, [])]

    return build(None)


def telescopes_taken_down(site: Site) -> dict[int, dt.date]:
    """The telescopes of ``site`` with every subsystem retired (and at least one registered), each with the last retire
    day: taken out of service as a whole. The dashboard says so in place of asking for their subsystems, and a night
    sent for one after that day is named (``logbook.selectors.nights_while_out``)."""
    return dict(Telescope.objects.filter(site=site).annotate(
        units=Count("subsystems"), in_service=Count("subsystems", filter=Q(subsystems__retired_on__isnull=True)),
        last_retired=Max("subsystems__retired_on")).filter(units__gt=0, in_service=0)
        .values_list("pk", "last_retired"))


def tube_warning(telescope: Telescope) -> str | None:
    """A warning when the registered tube mass is far from what its aperture suggests (calc.lifting)."""
    if telescope.tube_mass_kg is None:
        return None
    return tube_mass_warning(telescope.aperture_m, telescope.tube_mass_kg)


def crew_days_off(site: Site, first: dt.date, last: dt.date | None = None) -> dict[dt.date, str]:
    """The site's listed crew days off from ``first`` on (to ``last``, inclusive, if given), date -> note, in date
    order."""
    days = site.crew_days_off.filter(date__gte=first)
    if last is not None:
        days = days.filter(date__lte=last)
    return dict(days.order_by("date").values_list("date", "note"))


def _counted(n: int, one: str, many: str) -> str:
    return f"{n:,} {one if n == 1 else many}"


def records_of(subsystems: list[int], telescope: Telescope | None = None) -> str:
    """What is recorded of the subsystems ``subsystems`` (ids), and of ``telescope`` when given (its own nights, its
    work orders), in words: "12 service records and 1 work order"; "" when nothing is.

    Such records belong to the site where they were made: its log, its totals, its history. A telescope or subsystem
    with any of them moved to another site would take them along and rewrite the past (a service at the old site
    counted against the new site's nights, its hours moved to the other site's totals), so it stays where it is.
    """
    orders = Q(items__subsystem__in=subsystems) | Q(required_readings__subsystem__in=subsystems)
    if telescope is not None:
        orders |= Q(telescope=telescope)
    on_mirrors = Q(mirror__subsystem__in=subsystems)
    counts = (
        (NightUsage.objects.filter(telescope=telescope).count() if telescope else 0,
         "night logged of its own", "nights logged of its own"),
        (ServiceRecord.objects.filter(subsystem__in=subsystems).count(), "service record", "service records"),
        (Reading.objects.filter(subsystem__in=subsystems).count(), "reading", "readings"),
        (WorkOrder.objects.filter(orders).distinct().count(), "work order", "work orders"),
        (CoatingEvent.objects.filter(on_mirrors).count(), "mirror coating", "mirror coatings"),
        (CleaningEvent.objects.filter(on_mirrors).count(), "mirror cleaning", "mirror cleanings"),
        (ReflectanceMeasurement.objects.filter(on_mirrors).count(), "reflectance measurement",
         "reflectance measurements"),
        (RecoatPlan.objects.filter(on_mirrors).count(), "recoat plan", "recoat plans"),
    )
    return listed([_counted(n, one, many) for n, one, many in counts if n])


def open_orders_of(subsystems: list[int]) -> list[WorkOrder]:
    """The work orders not yet done that name any of the subsystems ``subsystems`` (ids): drafted, issued or under way.
    Each locks out its own telescope's isolation points, fixed when it was made (``WorkOrder.telescope``)."""
    return list(WorkOrder.objects.filter(
        Q(items__subsystem__in=subsystems) | Q(required_readings__subsystem__in=subsystems),
        state__in=[State.DRAFT, State.ISSUED, State.UNDERWAY],
    ).distinct().order_by("pk"))


def parts_of(subsystem: Subsystem) -> list[Subsystem]:
    """Every subsystem under ``subsystem`` (its parts, their parts...), retired ones included."""
    found, frontier = [], [subsystem]
    while frontier:
        frontier = list(Subsystem.objects.filter(parent__in=frontier))
        found += frontier
    return found


#: Why a slug in use is kept (``slug_uses``), as the admin's page and the refusal of a new one say it.
SLUG_KEPT = "Changed, those addresses, links and commands would find no site"


def slug_uses(site: Site) -> str:
    """What already reaches ``site`` by its slug, in words; "" for a site still being set up (no API token, logged
    night or telescope yet), whose slug may still be corrected."""
    tokens = site.api_tokens.filter(revoked_at__isnull=True).count()
    nights = site.nights.count()
    telescopes = site.telescopes.count()
    return listed([phrase for n, phrase in (
        (tokens, f"{_counted(tokens, 'API token', 'API tokens')} (for the addresses control software and calendar "
                 f"subscriptions use, /api/v1/sites/{site.slug}/...)"),
        (nights, f"{_counted(nights, 'logged night', 'logged nights')} (control software sends them to "
                 f"/api/v1/sites/{site.slug}/nights; imports name the site with --site {site.slug}, in commands and "
                 "cron lines)"),
        (telescopes, f"{_counted(telescopes, 'telescope', 'telescopes')} (the site's pages, /sites/{site.slug}/..., "
                     "are linked and bookmarked)"),
    ) if n])
