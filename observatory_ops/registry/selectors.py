"""Reads of the register for pages."""
from __future__ import annotations

from observatory_ops.calc.lifting import tube_mass_warning

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


def tube_warning(telescope: Telescope) -> str | None:
    """A warning when the registered tube mass is far from what its aperture suggests (calc.lifting)."""
    if telescope.tube_mass_kg is None:
        return None
    return tube_mass_warning(telescope.aperture_m, telescope.tube_mass_kg)
