"""Writes of the register."""
from __future__ import annotations

import datetime as dt

from django.db import transaction

from observatory_ops.planning.services import plans_from_catalogue

from .catalogue import kind as catalogue_kind
from .models import Subsystem, Telescope


def subsystem_create(
    telescope: Telescope, kind: str, name: str, counting_from: dt.date, parent: Subsystem | None = None, **fields
) -> Subsystem:
    """Register a subsystem with its kind's hazards and default service plans (editable afterwards)."""
    spec = catalogue_kind(kind)
    with transaction.atomic():
        subsystem = Subsystem(
            telescope=telescope, kind=kind, name=name, parent=parent, hazards=list(spec.hazards), **fields
        )
        subsystem.full_clean()
        subsystem.save()
        plans_from_catalogue(subsystem, counting_from)
    return subsystem


def subsystem_retire(subsystem: Subsystem, on: dt.date, reason: str, by) -> Subsystem:
    """Take a subsystem (and its parts) out of service. Nothing is deleted: its plans stop counting and
    its records and history stay. The reason is kept in the change history."""
    if subsystem.retired_on:
        raise ValueError(f"{subsystem} was already retired on {subsystem.retired_on}")
    if not reason.strip():
        raise ValueError("say why the subsystem is retired")
    with transaction.atomic():
        for part in [subsystem, *_descendants(subsystem)]:
            if part.retired_on is None:
                part.retired_on = on
                part._history_user = by
                part._change_reason = f"retired: {reason.strip()[:90]}"
                part.save(update_fields=["retired_on"])
    return subsystem


def _descendants(subsystem: Subsystem) -> list[Subsystem]:
    found, frontier = [], [subsystem]
    while frontier:
        children = list(Subsystem.objects.filter(parent__in=frontier))
        found += children
        frontier = children
    return found
