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
