"""Reads of the nightly log that pages share."""
from __future__ import annotations

from django.db.models import F, Max, Q

from observatory_ops.registry.models import Site

from .models import NightUsage


def last_nights(site: Site) -> list[NightUsage]:
    """The newest logged night of each of the site's logs: the site's own rows first, then each telescope that sends
    nights of its own, by name (a telescope's log also counts the site's rows: ``planning.services.UsageLog``)."""
    newest = NightUsage.objects.filter(site=site).order_by().values("telescope").annotate(last=Max("night"))
    which = Q(pk__in=[])
    for row in newest:
        which |= Q(telescope=row["telescope"], night=row["last"])
    return list(
        NightUsage.objects.filter(which, site=site).select_related("telescope")
        .order_by(F("telescope__name").asc(nulls_first=True))
    )
