"""Reads of the register for pages."""
from __future__ import annotations

import datetime as dt

from observatory_ops.calc.lifting import tube_mass_warning

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
