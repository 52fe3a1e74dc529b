"""Reads of the register for pages."""
from __future__ import annotations

from .models import Subsystem, Telescope


def subsystem_tree(telescope: Telescope) -> list[tuple[Subsystem, list]]:
    """The telescope's subsystems in service as nested (subsystem, children) pairs, in one query."""
    subsystems = list(Subsystem.objects.in_service().filter(telescope=telescope).order_by("name"))
    children: dict[int | None, list[Subsystem]] = {}
    for s in subsystems:
        children.setdefault(s.parent_id, []).append(s)

    def build(parent_id):
        return [(s, build(s.pk)) for s in children.get(parent_id, [])]

    return build(None)
