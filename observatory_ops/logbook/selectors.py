"""Reads of the nightly log that pages share."""
from __future__ import annotations

import datetime as dt

import numpy as np
from django.db.models import F, Max, Q
from django.utils import timezone

from observatory_ops.archive.history import person
from observatory_ops.calc import nights as sky_calc
from observatory_ops.planning.models import NightSky
from observatory_ops.registry.models import Site

from .models import NightUsage, Reading, ServiceRecord, maintenance_type

#: A service form sent twice (a second press of the button, a browser sending the page again) by the same person with
#: the same values within this time is taken as one: the second stores nothing. Our own choice: long enough for a
#: slow connection's retry, short enough that the same work logged again later is a new record.
RESENT_WITHIN = dt.timedelta(minutes=10)


def service_already_logged(subsystem, by, plan, performed_on: dt.date, summary: str, hours_spent: float | None,
                           findings: str, now: dt.datetime) -> ServiceRecord | None:
    """The record this service form, sent again, would repeat: the same person's record of the same subsystem with the
    same values, stored within ``RESENT_WITHIN`` and not corrected since; None when there is none."""
    return ServiceRecord.objects.filter(
        subsystem=subsystem, created_by=by, plan=plan, performed_on=performed_on, summary=summary,
        hours_spent=hours_spent, findings=findings, work_order__isnull=True, corrects__isnull=True,
        corrected_by__isnull=True, created_at__gte=now - RESENT_WITHIN,
    ).first()


def reading_already_logged(subsystem, by, quantity: str, value: float, taken_at: dt.datetime,
                           note: str) -> Reading | None:
    """The reading this form, sent again, would repeat: the same person's reading of the same quantity of the same
    subsystem, with the same value, time and note (one reading, whenever it was stored); None when there is none."""
    return Reading.objects.filter(
        subsystem=subsystem, taken_by=by, quantity=quantity, value=value, taken_at=taken_at, note=note,
    ).first()


def last_nights(site: Site) -> list[NightUsage]:
    """The newest logged night of each of the site's logs: the site's own rows first, then each telescope that sends
    nights of its own, by name (a telescope's log also counts the site's rows: ``planning.services.UsageLog``), each
    telescope's with ``site_counted_to``: the site's newest night when it is later, counted for the telescope too."""
    newest = NightUsage.objects.filter(site=site).order_by().values("telescope").annotate(last=Max("night"))
    which = Q(pk__in=[])
    for row in newest:
        which |= Q(telescope=row["telescope"], night=row["last"])
    rows = list(
        NightUsage.objects.filter(which, site=site).select_related("telescope")
        .order_by(F("telescope__name").asc(nulls_first=True))
    )
    # A telescope's own newest night may be older than the site's, whose later rows its log counts: said beside it
    # (a site review read "K36: Thu 03 Dec" as K36's last night counted, where the site's 04 Dec was).
    site_newest = next((row.night for row in rows if row.telescope_id is None), None)
    for row in rows:
        row.site_counted_to = site_newest if row.telescope_id and site_newest and site_newest > row.night else None
    return rows


#: How much longer than the night (sunset to sunrise) open hours may be before they are questioned: a dome is opened
#: up to about an hour before sunset to let the telescope cool, and closed after sunrise (common practice, no
#: published source); beyond that, a typing slip (20 for 2.0) is likelier.
LONGER_THAN_THE_NIGHT_H = 2.0


def nights_while_out(site: Site, nights: list[NightUsage]) -> list[str]:
    """A sentence for each of ``nights`` with hours open on a night its telescope (or the whole site, for a row of the
    site's) does not observe: a closure of it (``planning.models.Closure``), or every subsystem of the telescope
    retired before that night. Stored as sent all the same (the log is what was sent): a closure called off, or
    control software left sending for a telescope taken down, is best seen (a review of long downtime sent a retired
    telescope's night and heard nothing)."""
    from observatory_ops.planning.models import Closure
    from observatory_ops.registry.selectors import telescopes_taken_down

    used = [n for n in nights if n.open_hours and n.open_hours > 0]
    if not used:
        return []
    first, last = min(n.night for n in used), max(n.night for n in used)
    closures = list(Closure.objects.filter(site=site, first_night__lte=last, last_night__gte=first)
                    .select_related("telescope"))
    taken_down = telescopes_taken_down(site)  # telescope id -> the last retire day
    said = []
    for night in sorted(used, key=lambda n: (n.night, n.telescope_id or 0)):
        whose = night.telescope.name if night.telescope_id else "the whole site"
        head = f"{whose}, night of {night.night:%d %b %Y}: {night.open_hours:g} h open"
        closure = next((c for c in closures if c.first_night <= night.night <= c.last_night and (
            c.telescope_id is None or c.telescope_id == night.telescope_id)), None)
        if closure is not None:
            said.append(f"{head} while {closure.whose} is closed ({closure.reason}, {closure.first_night:%d %b} to "
                        f"{closure.last_night:%d %b %Y}): if it observed, change the closure")
        elif night.telescope_id in taken_down and night.night > (retired := taken_down[night.telescope_id]):
            said.append(f"{head} though every subsystem of {whose} was retired by {retired:%d %b %Y}: check what sends "
                        "its nights")
    return said


def closed_said(site: Site, nights: list[NightUsage]) -> dict[int, str]:
    """Night pk -> how the nightly log page marks a night of ``nights`` that a closure (``planning.models.Closure``)
    covers, as the forecasts take it (``planning.services.UsageLog._with_closures``): a closed night is left out of the
    history the open fractions and the spread are made from, its hours counting as sent; the whole site's row on a
    night one telescope is closed alone counts 0 for that telescope."""
    from observatory_ops.planning.models import Closure

    if not nights:
        return {}
    first, last = min(n.night for n in nights), max(n.night for n in nights)
    closures = list(Closure.objects.filter(site=site, first_night__lte=last, last_night__gte=first)
                    .select_related("telescope").order_by("telescope__name", "first_night"))
    said = {}
    for night in nights:
        on = [c for c in closures if c.first_night <= night.night <= c.last_night]
        whole = next((c for c in on if c.covers(night.telescope_id)), None)
        if whole is not None:
            said[night.pk] = f"closed: {whole.reason}"
        elif night.telescope_id is None and on:
            said[night.pk] = "; ".join(f"{c.telescope.name} closed ({c.reason}): counts 0 for it" for c in on)
    return said


#: A night's counter (slews, brake cycles, axis travel) per open hour, or its dust level (PM10), this many times its
#: log's median over the year before is named to check: a unit slip (arcminutes for degrees, mg for µg) or an extra
#: digit, not a busy night. Our own choice.
OUT_OF_LINE_FACTOR = 10
#: The fewest nights of at least an hour open in that year for a median worth comparing with.
OUT_OF_LINE_HISTORY = 30
#: Each figure compared: its field, its words, and whether it is compared per open hour (a count) or as it is (a level).
_COUNTERS = (("slews", "slews", True), ("brake_cycles", "brake cycles", True),
             ("axis1_travel_deg", "° of axis 1 travel", True), ("axis2_travel_deg", "° of axis 2 travel", True),
             ("pm10_ugm3", "µg/m³ of PM10", False))


def counters_out_of_line(site: Site, nights: list[NightUsage]) -> list[str]:
    """A sentence for each of ``nights`` with a counter per open hour, or its PM10, more than ``OUT_OF_LINE_FACTOR``
    times the median of its log (the same telescope's own nights, or the whole site's, also where a telescope has too
    few of its own) from a year before the first of them to the last, over the nights at least an hour open
    (``OUT_OF_LINE_HISTORY`` of them at least; a file of years of nights is measured against itself): stored as sent,
    and named (an API review sent 10,000 brake cycles and 1,000,000° of travel for one night, and six plans went overdue
    without a word; a forecast review typed 1,999 µg/m³ of PM10, 120 times the site's December median, and six
    dust-weighted plans went overdue the same way). A dust storm is named too: its nights weigh heavily on every
    dust-weighted plan, worth a look. One query; one median a log and figure."""
    checked = [n for n in nights if n.open_hours and n.open_hours >= 1]
    if not checked:
        return []
    first = min(n.night for n in checked) - dt.timedelta(days=365)
    last = max(n.night for n in checked)
    fields = [name for name, _, _ in _COUNTERS]
    rates: dict[int | None, list[list[float]]] = {}
    for telescope_id, hours, *counts in NightUsage.objects.filter(
            site=site, night__gte=first, night__lte=last, open_hours__gte=1).values_list(
            "telescope_id", "open_hours", *fields):
        per_log = rates.setdefault(telescope_id, [[] for _ in fields])
        for i, (count, (_, _, per_hour)) in enumerate(zip(counts, _COUNTERS, strict=True)):
            if count is not None:
                per_log[i].append(count / hours if per_hour else count)
    medians = {key: [float(np.median(r)) if len(r) >= OUT_OF_LINE_HISTORY else None for r in per_log]
               for key, per_log in rates.items()}
    names = dict(site.telescopes.values_list("pk", "name"))
    said = []
    for night in sorted(checked, key=lambda n: (n.night, names.get(n.telescope_id, ""))):
        high, dust = [], ""
        # A telescope's own nights too few to judge by (a walk typed a telescope's own night on a site logging the
        # whole site's): its log is the whole site's nights where it has none of its own, so the site's median.
        own, site_wide = medians.get(night.telescope_id, [None] * len(fields)), medians.get(None, [None] * len(fields))
        for (name, words, per_hour), median in zip(_COUNTERS, [m if m is not None else w for m, w in
                                                               zip(own, site_wide, strict=True)], strict=True):
            value = getattr(night, name)
            if value is None or not median:
                continue
            written = f"{value:,.1f}".removesuffix(".0")  # 1,000,000, not 1e+06 (a diff review)
            if per_hour and value / night.open_hours > OUT_OF_LINE_FACTOR * median:
                gap = "" if words.startswith("°") else " "
                high.append(f"{written}{gap}{words} ({value / night.open_hours:,.1f} an open hour against a median "
                            f"of {median:,.2f})")
            elif not per_hour and value > OUT_OF_LINE_FACTOR * median:
                dust = f"{written} {words} (against a median of {median:,.2f})"
        if high or dust:
            whose = names[night.telescope_id] if night.telescope_id else "the whole site"
            tail = []
            if high:
                tail.append(f"{'; '.join(high)}: more than {OUT_OF_LINE_FACTOR} times its log's usual rate (a unit or "
                            "a digit?)")
            if dust:  # a level, not a rate; and a true dust storm is kept as it is, worth a look at the filters
                tail.append(f"{dust}: more than {OUT_OF_LINE_FACTOR} times its log's usual level (a unit or a digit, "
                            "or a dust storm: if real, keep it, every dust-weighted plan counts it)")
            said.append(f"{whose}, night of {night.night:%d %b %Y}, {night.open_hours:g} h open: {'; '.join(tail)}")
    return said


def nights_longer_than_the_night(site: Site, nights: list[NightUsage], now: dt.datetime | None = None) -> list[str]:
    """A sentence for each of ``nights`` whose open hours exceed that night at the site (sunset to sunrise, from the
    sky cache, ``planning.models.NightSky``) by more than ``LONGER_THAN_THE_NIGHT_H``; nights the cache
    does not hold (the sky computed for the forecast years only) are not checked. A night still going on at ``now``
    (the present moment by default) is measured to now: one sent in the afternoon, before its sunset, with hours open
    is named as not begun yet (an onboarding review's control software sent "tonight" at 13:06, and nothing said so).

    A night with neither sunset nor sunrise is one of two: under the midnight sun (the Sun never sets, a summer night
    far from the equator) the night lasts 0 h, and open hours beyond the allowance are named, saying so; in the polar
    night (the Sun never rises) the whole day is night and nothing is questioned (``calc.nights.sun_up_at_midnight``
    tells them apart). A night whose clocks change between sunset and sunrise says so beside the clock times, which
    then do not subtract to its length (a time-and-place review read "13.9 h (sunset 17:46 to sunrise 06:42)" as
    12.9 h on the night the clocks went back in Europe/London)."""
    now = now or timezone.now()
    sky = {
        row.night: row for row in NightSky.objects.filter(site=site, night__in={n.night for n in nights}).only(
            "night", "sunset", "sunrise"
        )
    }
    long, sunless = [], []
    for night in nights:
        cached = sky.get(night.night)
        if cached is None:
            continue
        if cached.sunset is None and cached.sunrise is None:
            if night.open_hours > LONGER_THAN_THE_NIGHT_H:  # 0 h under the midnight sun: the sky decides below
                sunless.append(night)
            continue
        if cached.sunset is None or cached.sunrise is None:  # a crossing one side only: too close to call
            continue
        length_h = max((min(cached.sunrise, now) - cached.sunset) / dt.timedelta(hours=1), 0.0)
        if night.open_hours > length_h + LONGER_THAN_THE_NIGHT_H:
            long.append((night, cached, length_h))
    if sunless:
        where = sky_calc.Site(site.latitude_deg, site.longitude_deg, site.elevation_m, site.time_zone)
        sun_up = sky_calc.sun_up_at_midnight(where, [night.night for night in sunless])
        long += [(night, None, 0.0) for night, up in zip(sunless, sun_up, strict=True) if up]
    if not long:
        return []
    names = dict(site.telescopes.values_list("pk", "name"))
    found = []
    for night, cached, length_h in sorted(long, key=lambda n: (n[0].night, names.get(n[0].telescope_id, ""))):
        whose = f" ({names[night.telescope_id]})" if night.telescope_id else ""
        said = f"{night.night:%d %b %Y}{whose}: {night.open_hours:g} h open, but "
        if cached is None:
            found.append(said + "the Sun does not set that night there (midnight sun)")
            continue
        sunset, sunrise = cached.sunset.astimezone(site.zone), cached.sunrise.astimezone(site.zone)
        if now < cached.sunset:
            said += f"that night has not begun yet there (sunset {sunset:%H:%M})"
        elif now < cached.sunrise:
            local_now = now.astimezone(site.zone)
            said += (f"that night has lasted {length_h:.1f} h there so far (sunset {sunset:%H:%M}, now "
                     f"{local_now:%H:%M}){_clocks_changed(sunset, local_now)}")
        else:
            said += (f"that night lasts {length_h:.1f} h there (sunset {sunset:%H:%M} to sunrise {sunrise:%H:%M})"
                     f"{_clocks_changed(sunset, sunrise)}")
        found.append(said)
    return found


def _clocks_changed(before: dt.datetime, after: dt.datetime) -> str:
    """" (the clocks went back an hour that night)" when the site's UTC offset at ``after`` differs from that at
    ``before`` (both in the site's zone), so their clock times do not subtract to the hours between them; "" else."""
    change = after.utcoffset() - before.utcoffset()
    if not change:
        return ""
    size = abs(change)
    amount = "an hour" if size == dt.timedelta(hours=1) else f"{size / dt.timedelta(minutes=1):g} minutes"
    return f" (the clocks went {'forward' if change > dt.timedelta(0) else 'back'} {amount} that night)"


#: The service-records CSV (``service_records_csv_rows``): one row a record, withdrawn and superseded ones included and
#: marked, so the year's trail is whole; only "current" records count on the reliability page.
SERVICE_CSV_HEADER = (
    "performed_on", "telescope", "subsystem", "kind", "plan", "timeliness", "limit_passed_on", "days_after_limit",
    "due_when_logged", "work_order",
    "maintenance_type", "hours_spent", "counted_hours", "performed_by", "crew", "summary", "findings", "standing",
    "record_id", "entered_by", "entered_at", "correction_reason",
)


def service_records_csv_rows(site: Site, first: dt.date, last: dt.date, telescope=None):
    """The rows of the service-records CSV of ``site`` (or of its ``telescope`` alone) done from ``first`` to ``last``
    (local dates, both included), oldest first. ``kind`` is the subsystem's kind as the reliability page groups it (a
    manager's review had to map names to kinds by hand for hours by telescope and kind); ``maintenance_type`` is the
    column the record's hours count in on that page; ``timeliness`` and ``due_when_logged`` what the plan was due
    against when the work was logged (an export review's insurer asked)."""
    records = ServiceRecord.objects.filter(subsystem__telescope__site=site, performed_on__gte=first,
                                           performed_on__lte=last)
    records = (
        (records.filter(subsystem__telescope=telescope) if telescope else records)
        .select_related("subsystem__telescope", "plan", "work_order", "performed_by", "created_by", "corrected_by")
        .order_by("performed_on", "pk")
    )
    for r in records:
        yield (
            r.performed_on.isoformat(), r.subsystem.telescope.name, r.subsystem.name, r.subsystem.kind_label,
            r.plan.name if r.plan else "", r.timeliness_text,
            r.limit_passed_on.isoformat() if r.limit_passed_on else "", r.days_after_limit or "", r.due_when_logged,
            r.work_order.number if r.work_order else "",
            maintenance_type(r.work_order.order_type if r.work_order else None, r.plan_id, r.repaired_failure),
            "" if r.hours_spent is None else r.hours_spent,
            # What the reliability page adds up: a current record's hours; a replaced record or a withdrawal none.
            r.hours_spent if r.hours_spent is not None and _standing(r) == CURRENT else "",
            r.performed_by.get_full_name() or r.performed_by.username,
            ", ".join(r.work_order.crew or ()) if r.work_order else "", r.summary, r.findings, _standing(r), r.pk,
            # Who entered it and when (a correction's corrector), and a correction's why (an auditor's review).
            person(r.created_by), timezone.localtime(r.created_at, site.zone).isoformat(timespec="minutes"),
            r.correction_reason,
        )


READINGS_CSV_HEADER = (
    "taken_at", "telescope", "subsystem", "kind", "quantity", "value", "unit", "work_order", "taken_by", "note",
    "withdrawn_at", "withdrawn_by", "withdrawn_reason", "reading_id",
)


def readings_csv_rows(site: Site, first: dt.date, last: dt.date, telescope=None):
    """The rows of the readings CSV of ``site`` (or of its ``telescope`` alone) taken from ``first`` to ``last``
    (the site's dates, both included), oldest first, in the site's time: withdrawn ones too, with who withdrew them,
    when and why, as the subsystem page strikes them through (an auditor's review found no export of readings). The
    work order is the one whose finish recorded it, "" for one logged on the subsystem's page."""
    from observatory_ops.workorders.models import RequiredReading  # work orders build on the logbook

    zone = site.zone
    start = timezone.make_aware(dt.datetime.combine(first, dt.time()), zone)
    end = timezone.make_aware(dt.datetime.combine(last + dt.timedelta(days=1), dt.time()), zone)
    readings = Reading.objects.filter(subsystem__telescope__site=site, taken_at__gte=start, taken_at__lt=end)
    if telescope:
        readings = readings.filter(subsystem__telescope=telescope)
    readings = list(readings.select_related("subsystem__telescope", "taken_by", "withdrawn_by")
                    .order_by("taken_at", "pk"))
    orders = {required.reading_id: required.work_order.number for required in RequiredReading.objects.filter(
        reading__in=[r.pk for r in readings]).select_related("work_order")}

    def local(moment) -> str:
        return timezone.localtime(moment, zone).isoformat(timespec="minutes") if moment else ""

    for r in readings:
        yield (
            local(r.taken_at), r.subsystem.telescope.name, r.subsystem.name, r.subsystem.kind_label, r.quantity,
            r.value, r.unit, orders.get(r.pk, ""), person(r.taken_by), r.note, local(r.withdrawn_at),
            person(r.withdrawn_by) if r.withdrawn_by else "", r.withdrawn_reason, r.pk,
        )


CURRENT = "current"


def _standing(record: ServiceRecord) -> str:
    """Whether a record counts: "current", or replaced (by a correction, or withdrawn), or itself a withdrawal."""
    if record.void:
        return f"withdraws record {record.corrects_id}"
    correction = getattr(record, "corrected_by", None)  # a reverse one-to-one: absent when there is none
    if correction is None:
        return CURRENT
    return "withdrawn" if correction.void else f"superseded by record {correction.pk}"
