"""Reads for the reliability page: failures, operating hours, MTBF and Weibull fits per subsystem kind, and
what maintenance cost in hours.

A failure is a corrective work order that was finished (or countersigned): one failure for each subsystem it
names. Operating hours are the site's dome-open hours from the nightly log, counted for each subsystem over
the nights it was in service. Maintenance hours are those of the service records. A fixed handful of queries
for a site, whatever its size (tests/test_reliability_page.py counts them).
"""
from __future__ import annotations

import datetime as dt
from collections import defaultdict
from dataclasses import dataclass, field

import numpy as np
from django.db.models import Min

from observatory_ops.calc import reliability
from observatory_ops.calc.night_of import night_of
from observatory_ops.logbook.models import NightUsage, ServiceRecord
from observatory_ops.planning.models import ServicePlan
from observatory_ops.planning.services import site_today
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.models import Site, Subsystem
from observatory_ops.workorders.models import State, WorkOrder, WorkOrderItem

DONE = (State.FINISHED, State.COUNTERSIGNED)
#: The maintenance-hours window: the last 12 months, as 365 days back from the site's today.
HOURS_WINDOW_DAYS = 365
#: The maintenance-hours columns: each work-order type, then service logged without a work order.
WITHOUT_ORDER = "without_order"
HOURS_COLUMNS = (*WorkOrder.Type.values, WITHOUT_ORDER)
HOURS_COLUMN_LABELS = (*WorkOrder.Type.labels, "logged without a work order")


@dataclass
class KindReliability:
    code: str
    label: str
    in_service: int = 0
    counted: int = 0  # subsystems whose hours count, retired ones included
    failures: int = 0
    operating_hours: float = 0.0
    between: list[float] = field(default_factory=list)
    running: list[float] = field(default_factory=list)
    hours_by_type: dict[str, float] = field(default_factory=lambda: dict.fromkeys(HOURS_COLUMNS, 0.0))
    mtbf: reliability.MtbfEstimate | None = None
    fit: reliability.WeibullFit | None = None
    no_fit: str = ""
    zero_intervals: int = 0

    @property
    def fit_inputs(self) -> str:
        """The hours the Weibull fit was made from, as the page lists them so that anyone can fit them again."""
        between = ", ".join(f"{t:,.0f}" for t in sorted(t for t in self.between if t > 0))
        running = ", ".join(f"{t:,.0f}" for t in sorted(self.running))
        return f"between failures: {between or 'none'} h; still running (censored): {running or 'none'} h"

    @property
    def retired(self) -> int:
        return self.counted - self.in_service

    @property
    def hours_total(self) -> float:
        return sum(self.hours_by_type.values())


@dataclass
class SiteReliability:
    today: dt.date
    first_night: dt.date | None
    last_night: dt.date | None
    kinds: list[KindReliability]
    hours_since: dt.date
    hours_by_type: dict[str, float]
    records_in_window: int

    @property
    def hours_total(self) -> float:
        return sum(self.hours_by_type.values())


def _in_service_from(subsystems: list[tuple], site: Site) -> dict[int, dt.date]:
    """The date each subsystem entered service: the 'counting from' date given when it was registered (its
    plans' earliest), or for a subsystem without plans the local date it was entered in the register."""
    starts = dict(
        ServicePlan.objects.filter(subsystem__telescope__site=site)
        .order_by()
        .values("subsystem_id")
        .annotate(start=Min("counting_from"))
        .values_list("subsystem_id", "start")
    )
    missing = [pk for pk, *_ in subsystems if pk not in starts]
    if missing:
        for pk, when in Subsystem.history.filter(id__in=missing, history_type="+").values_list("id", "history_date"):
            starts[pk] = when.astimezone(site.zone).date()
    return starts


def site_reliability(site: Site, today: dt.date | None = None) -> SiteReliability:
    """Per subsystem kind at ``site``: subsystems in service, failures, operating hours, MTBF with its 90 %
    interval, the Weibull fit where there are enough failures, and the last 12 months' maintenance hours by
    order type (an order's hours shared equally among the subsystems it names, as its service records are)."""
    today = today or site_today(site)
    subsystems = list(
        Subsystem.objects.filter(telescope__site=site).values_list("pk", "kind", "retired_on").order_by("pk")
    )
    starts = _in_service_from(subsystems, site)
    nights = list(NightUsage.objects.filter(site=site).order_by("night").values_list("night", "open_hours"))
    days = np.array([n for n, _ in nights], dtype="datetime64[D]")
    cumulative = np.concatenate([[0.0], np.cumsum([h for _, h in nights])])

    def hours_before(day: dt.date) -> float:
        """Dome-open hours of the logged nights before ``day``."""
        return float(cumulative[np.searchsorted(days, np.datetime64(day))])

    failed_at: dict[int, list[dt.date]] = defaultdict(list)
    for subsystem_id, finished_at in WorkOrderItem.objects.filter(
        work_order__site=site, work_order__order_type=WorkOrder.Type.CORRECTIVE, work_order__state__in=DONE,
        work_order__finished_at__isnull=False,
    ).values_list("subsystem_id", "work_order__finished_at"):
        failed_at[subsystem_id].append(night_of(finished_at, site.time_zone))

    kinds = {code: KindReliability(code, spec.label) for code, spec in KINDS.items()}
    kind_of = {}
    for pk, kind, retired_on in subsystems:
        row = kinds.setdefault(kind, KindReliability(kind, kind))
        kind_of[pk] = row
        row.counted += 1
        row.in_service += retired_on is None
        # A subsystem with neither plans nor a register entry in the history (registered before the history was
        # kept) is counted from the first logged night.
        start = starts.get(pk) or (nights[0][0] if nights else today)
        end = min(retired_on, today + dt.timedelta(days=1)) if retired_on else today + dt.timedelta(days=1)
        base = hours_before(start)
        total = max(hours_before(end) - base, 0.0)
        # A failure belongs to the nights up to and including the night its repair finished in.
        at = [min(max(hours_before(n + dt.timedelta(days=1)) - base, 0.0), total) for n in failed_at.get(pk, [])]
        between, running = reliability.times_between_failures(at, total)
        row.operating_hours += total
        row.failures += len(at)
        row.between += [float(t) for t in between]
        row.running.append(running)

    # Maintenance hours: the hours of the service records of the last 12 months (a work order's shared among the
    # subsystems it names when it was finished), by the type of the order that wrote them, or logged without one.
    # Records since corrected count as corrected; withdrawn ones not at all.
    since = today - dt.timedelta(days=HOURS_WINDOW_DAYS)
    site_hours = dict.fromkeys(HOURS_COLUMNS, 0.0)
    records = 0
    for subsystem_id, hours, order_type in ServiceRecord.objects.filter(
        subsystem__telescope__site=site, performed_on__gt=since, performed_on__lte=today,
        corrected_by__isnull=True, void=False,
    ).values_list("subsystem_id", "hours_spent", "work_order__order_type"):
        column = order_type or WITHOUT_ORDER
        records += 1
        site_hours[column] += hours
        kind_of[subsystem_id].hours_by_type[column] += hours

    shown = [row for row in kinds.values() if row.counted]
    for row in shown:
        row.mtbf = reliability.mtbf(row.operating_hours, row.failures)
        positive = [t for t in row.between if t > 0]
        row.zero_intervals = len(row.between) - len(positive)
        try:
            row.fit = reliability.weibull_fit(positive, row.running)
        except ValueError as exc:
            if not positive:
                row.no_fit = "no failure to fit"
            elif len(positive) < reliability.MIN_FAILURES_FOR_FIT:
                row.no_fit = f"too few failures for a fit: {len(positive)}"
            else:
                row.no_fit = str(exc)
    return SiteReliability(
        today=today,
        first_night=nights[0][0] if nights else None,
        last_night=nights[-1][0] if nights else None,
        kinds=shown,
        hours_since=since + dt.timedelta(days=1),
        hours_by_type=site_hours,
        records_in_window=records,
    )
