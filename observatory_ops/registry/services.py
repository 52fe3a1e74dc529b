"""Writes of the register."""
from __future__ import annotations

import datetime as dt

from django.db import transaction

from observatory_ops.planning.services import plans_from_catalogue, site_recompute, site_sky_forget
from observatory_ops.workorders.cautions import HAZARDS
from observatory_ops.workorders.models import IsolationPoint

from .catalogue import kind as catalogue_kind
from .models import EARLIEST_IN_SERVICE, Site, Subsystem, Telescope, name_key
from .selectors import parts_of

#: The kind whose subsystems have nothing in common but the name "Other": none of them is another's successor.
_NO_SUCCESSOR_KIND = "other"

#: The site's settings its sky is computed from: each night's sunset, dark hours and Moon (``calc.nights``), and which
#: local date a night is.
SKY_SETTINGS = frozenset({"latitude_deg", "longitude_deg", "elevation_m", "time_zone"})
#: The site's settings its due states are computed from: its sky (the forecasts), its today (the time zone), what
#: counts as due, and which nights a shared enclosure's plans count.
DUE_SETTINGS = SKY_SETTINGS | {"look_ahead_days", "shared_enclosure"}


def subsystem_create(
    telescope: Telescope, kind: str, name: str, counting_from: dt.date, parent: Subsystem | None = None, **fields
) -> Subsystem:
    """Register a subsystem with its kind's hazards, and any ``hazards`` given among ``fields`` (codes), and its
    kind's default service plans (editable afterwards). One of a kind that brings no hazards ("Other") is refused
    without hazards given or ``no_hazards_found`` (``Subsystem.clean``)."""
    spec = catalogue_kind(kind)
    given = set(fields.pop("hazards", ()))
    with transaction.atomic():
        subsystem = Subsystem(
            telescope=telescope, kind=kind, name=name, parent=parent,
            hazards=[*spec.hazards, *(code for code in HAZARDS if code in given - set(spec.hazards)),
                     *sorted(given - set(HAZARDS))],  # an unknown code is left for the validation to name
            **fields,
        )
        subsystem.full_clean()
        subsystem.save()
        plans_from_catalogue(subsystem, counting_from)
    return subsystem


def subsystem_retire(subsystem: Subsystem, on: dt.date, reason: str, by) -> Subsystem:
    """Take a subsystem (and its parts) out of service on ``on``, the day it came out (the swap day, which may be some
    days past: a review could retire only today, and moved the date in the admin, which dropped a failure logged
    since). Nothing is deleted: its plans stop counting and its records and history stay. The reason is kept in the
    change history. Refused for a day after the site's today, before the subsystem entered service, or before work
    already logged on it or its parts (``retire_day_problem``)."""
    if subsystem.retired_on:
        raise ValueError(f"{subsystem} was already retired on {subsystem.retired_on}")
    if not reason.strip():
        raise ValueError("say why the subsystem is retired")
    if problem := retire_day_problem(subsystem, on):
        raise ValueError(problem)
    with transaction.atomic():
        subsystem.retired_on = on
        subsystem._history_user = by
        subsystem._change_reason = f"retired: {reason.strip()[:90]}"
        subsystem.save(update_fields=["retired_on"])
        parts_retire_with(subsystem, by, f"retired: {reason.strip()[:90]}")
    return subsystem


def parts_retire_with(subsystem: Subsystem, by, reason: str) -> list[Subsystem]:
    """Retire, on ``subsystem``'s retire day, those of its parts still in service, each with ``reason`` in its change
    history; return them. The subsystem page's retire and the admin's (a diff review: a tube retired in the admin left
    its parts in service) both take the parts out with it."""
    retired = []
    for part in parts_of(subsystem):
        if part.retired_on is None:
            part.retired_on = subsystem.retired_on
            part._history_user = by
            part._change_reason = reason
            part.save(update_fields=["retired_on"])
            retired.append(part)
    return retired


def retire_day_problem(subsystem: Subsystem, on: dt.date) -> str | None:
    """Why ``subsystem`` (and its parts) cannot be retired on ``on``, or None: a day before ``EARLIEST_IN_SERVICE`` (a
    typing slip) or after the site's today, before it or one of its parts entered service (their in-service dates: the
    part would be retired before it came), or before work already logged on it or its parts (service work, a reading,
    a mirror's measurement or cleaning), which retiring would leave dated after its retire day (``retired_work_problem``
    refuses such work). The subsystem page's retire and the admin's check it alike."""
    from observatory_ops.logbook.models import Reading, ServiceRecord  # the logbook builds on the register
    from observatory_ops.planning.services import site_today

    site = subsystem.telescope.site
    if on < EARLIEST_IN_SERVICE:
        return f"the retire date {on.isoformat()} looks mistyped: give a date from {EARLIEST_IN_SERVICE:%Y} on"
    if on > (today := site_today(site)):
        return f"the retire date {on:%d %b %Y} is after today at the site ({today:%d %b %Y})"
    units = [subsystem, *parts_of(subsystem)]
    if entered := [(u.in_service_since, u) for u in units if u.in_service_since and on < u.in_service_since]:
        since, unit = max(entered, key=lambda pair: pair[0])
        return f"the retire date {on:%d %b %Y} is before {unit} entered service ({since:%d %b %Y})"
    after = dt.datetime.combine(on + dt.timedelta(days=1), dt.time(), tzinfo=site.zone)  # the next local day
    worked = [(r.performed_on, f"service work on {r.subsystem.name}") for r in ServiceRecord.objects.filter(
        subsystem__in=units, performed_on__gt=on, corrected_by__isnull=True, void=False).select_related("subsystem")]
    worked += [(r.taken_at.astimezone(site.zone).date(), f"a reading of {r.subsystem.name}")
               for r in Reading.objects.filter(subsystem__in=units, taken_at__gte=after).select_related("subsystem")]
    worked += _mirror_events_after(units, on)
    if worked:
        day, what = max(worked)
        return (f"{what} is logged on {day:%d %b %Y}, after {on:%d %b %Y}: retire it on {day:%d %b %Y} or later, or "
                "correct that record first")
    return None


def _mirror_events_after(units: list[Subsystem], on: dt.date) -> list[tuple[dt.date, str]]:
    """The measurements and cleanings of the mirrors among ``units`` dated after ``on``, as (date, what)."""
    from observatory_ops.mirrors.models import CleaningEvent, ReflectanceMeasurement  # mirrors build on the register

    found = [(m.measured_on, f"a reflectance measurement of {m.mirror.subsystem.name}")
             for m in ReflectanceMeasurement.objects.filter(mirror__subsystem__in=units, measured_on__gt=on,
                                                            withdrawn_at__isnull=True).select_related("mirror__subsystem")]
    found += [(c.cleaned_on, f"a cleaning of {c.mirror.subsystem.name}") for c in CleaningEvent.objects.filter(
        mirror__subsystem__in=units, cleaned_on__gt=on).select_related("mirror__subsystem")]
    return found


def successors_of(subsystem: Subsystem) -> list[Subsystem]:
    """The subsystems in service of ``subsystem``'s kind on its telescope, by name: where the work of a retired one goes
    now (its replacement is registered beside it, and may take its name). Those of the same name come alone when there
    are any (one fan of three replaced); none for the kind "Other", which says nothing of what a subsystem is."""
    if subsystem.kind == _NO_SUCCESSOR_KIND:
        return []
    found = list(Subsystem.objects.in_service().filter(telescope=subsystem.telescope_id, kind=subsystem.kind)
                 .exclude(pk=subsystem.pk).select_related("telescope").order_by("name"))
    same_name = [other for other in found if name_key(other.name) == name_key(subsystem.name)]
    return same_name or found


def predecessors_of(subsystem: Subsystem) -> list[Subsystem]:
    """The retired subsystems of ``subsystem``'s kind on its telescope, the last retired first: the units it may have
    replaced, whose records and failures stay with them (the reliability page counts them beside it). Those of the
    same name come alone when there are any, as in ``successors_of``; none for the kind "Other", nor for a retired
    subsystem (its page names its successors)."""
    if subsystem.kind == _NO_SUCCESSOR_KIND or subsystem.retired_on is not None:
        return []
    found = list(Subsystem.objects.filter(telescope=subsystem.telescope_id, kind=subsystem.kind,
                                          retired_on__isnull=False)
                 .exclude(pk=subsystem.pk).select_related("telescope").order_by("-retired_on", "name"))
    same_name = [other for other in found if name_key(other.name) == name_key(subsystem.name)]
    return same_name or found


def retired_work_problem(subsystem: Subsystem, day: dt.date, what: str) -> str | None:
    """Why ``what`` ("Service work", "A reading") dated ``day`` is refused on ``subsystem``: it was retired before that
    day, so no longer in service, its plans no longer counted and the reliability page leaving out its failures after
    it. The refusal names the retire day and where the work goes now (``successors_of``). None when it is in service,
    or ``day`` is on or before its retire day: its history entered late is kept."""
    if subsystem.retired_on is None or day <= subsystem.retired_on:
        return None
    successors = successors_of(subsystem)
    kind, telescope = subsystem.kind_label.lower(), subsystem.telescope.name
    if successors:
        where = (f"Log it on the subsystem of its kind ({kind}) in service on {telescope}: "
                 + ", ".join(f"{other.name} ({other.get_absolute_url()})" for other in successors) + ".")
    else:
        where = (f"No other subsystem of its kind ({kind}) is in service on {telescope}: register its replacement, "
                 "and log the work there.")
    return (f"{subsystem} was retired on {subsystem.retired_on:%d %b %Y}, so it was no longer in service on "
            f"{day:%d %b %Y}: {what.lower()} dated after its retire day is refused, and nothing was stored. {where}")


def site_settings_apply(site: Site, changed: set[str]) -> bool:
    """After the site's ``changed`` settings were saved: forget its nights cache when its position or time zone
    changed (the sky was computed for the old ones), and recompute its due states when any setting they are computed
    from changed. Returns whether it recomputed."""
    if changed & SKY_SETTINGS:
        site_sky_forget(site)
    if not changed & DUE_SETTINGS:
        return False
    site_recompute(site)
    return True


def subsystem_parts_follow(subsystem: Subsystem) -> list[Subsystem]:
    """After ``subsystem`` was moved to another telescope: its parts (every subsystem under it) and its isolation
    points, and theirs, move with it, so a part stays on its parent's telescope and a point on its subsystem's.
    Returns the parts moved. Each is saved, so the change history shows the move."""
    with transaction.atomic():
        moved = [part for part in parts_of(subsystem) if part.telescope_id != subsystem.telescope_id]
        for part in moved:
            part.telescope_id = subsystem.telescope_id
            part._change_reason = f"moved with {subsystem.name}"
            part.save(update_fields=["telescope"])
        for point in IsolationPoint.objects.filter(subsystem__in=[subsystem, *moved]).exclude(
            telescope=subsystem.telescope_id
        ):
            point.telescope_id = subsystem.telescope_id
            point._change_reason = f"moved with {subsystem.name}"
            point.save(update_fields=["telescope"])
    return moved
