"""Reads for the reliability page: failures, operating hours, MTBF and Weibull fits per subsystem kind, and
what maintenance cost in hours.

A failure is a repair as its service record stands (``failures_of_site``): a record of a corrective work order that
was finished (or countersigned), one for each subsystem it names, or service logged without an order and marked as
the repair of a failure; a correction moves it to the corrected date, a withdrawal removes it. All are counted except
the replaced unit's, those after the subsystem was retired and those with no counted operating hours leading up to
them, which are left out with the reason (``left_out_reason``, the one place that rule is kept). A failure is placed
on the night before the day its repair was done. Records that go back before a subsystem's in-service date (a part
swapped by editing that date) are said beside its kind (``HistoryBefore``).
Operating hours are the open hours of the subsystem's telescope's nightly log (``planning.services.UsageLog``: the
site's rows, or the telescope's own where it sends them; a shared enclosure's, the whole site's), counted for
each subsystem over the nights it was in service (from its "in service since" date where one is given, else from
the earliest day the record shows it in service, see ``START_BASES``). Maintenance hours are those of the service
records. A fixed handful of queries for a site, whatever its size (tests/test_reliability_page.py counts them).

The figures cover a period: by default the whole record (every logged night to the site's today, every failure) and
the last 12 months' maintenance hours; or a ``Period`` chosen on the page, which every figure then covers alike.
"""
from __future__ import annotations

import datetime as dt
from collections import defaultdict
from dataclasses import dataclass, field, replace
from typing import NamedTuple

import numpy as np
from django.db.models import Exists, Min, OuterRef, Q

from observatory_ops.calc import exposure, reliability
from observatory_ops.calc.night_of import night_of
from observatory_ops.logbook.models import WITHOUT_ORDER_OR_PLAN, NightUsage, ServiceRecord, maintenance_type
from observatory_ops.planning.models import ServicePlan
from observatory_ops.planning.services import UsageLog, site_today
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.models import Site, Subsystem, Telescope, is_shared_enclosure
from observatory_ops.workorders.models import State, WorkOrder, WorkOrderItem

DONE = (State.FINISHED, State.COUNTERSIGNED)
#: The maintenance-hours window: the last 12 months, as 365 days back from the site's today.
HOURS_WINDOW_DAYS = 365
#: The maintenance-hours columns: each work-order type, then service logged with neither a work order nor a plan
#: (which column a record counts in: ``logbook.models.maintenance_type``).
HOURS_COLUMNS = (*WorkOrder.Type.values, WITHOUT_ORDER_OR_PLAN)
HOURS_COLUMN_LABELS = (*WorkOrder.Type.labels, "logged without a work order or plan")
#: Where a subsystem's operating hours start: the "in service since" date an engineer gave it; without one, the
#: earliest day the record shows it in service, which is the earlier of its earliest service record and its plans'
#: earliest "counting from" date (the last service given when it was registered, or the day it was registered);
#: without plans or service, the day it was entered in the register (the history's); failing that, the first logged
#: night. The page says which each subsystem's came from. A site taken over with its past (its last services logged
#: with their dates, the nights since imported) so counts each subsystem's hours from its last service, not from the
#: day it was entered, after those nights.
IN_SERVICE_SINCE = "the in-service date given"
FIRST_SERVICE = "its earliest service record"
PLANS_COUNTING_FROM = "the plans' earliest counting-from date"
REGISTERED = "the day registered"
FIRST_NIGHT = "the first logged night"
START_BASES = (IN_SERVICE_SINCE, FIRST_SERVICE, PLANS_COUNTING_FROM, REGISTERED, FIRST_NIGHT)


@dataclass(frozen=True)
class Period:
    """Days at the site, both included, that the figures cover when an engineer chooses them: the open hours of the
    nights dated in it, the failures whose repair was done in it, the service records done in it.

    Each subsystem counts the nights of the period it was in service (the rules of the whole record, cut to the
    period): one put in service part way counts from the day its hours count from, one retired part way to the day it
    was retired; one retired before the period or put in service after it is not in it. Its hours in the period start
    at the period's first night (or the later day it entered service), at the age the log gives it then: the hours
    since its last failure before the period, or since the day its hours count from; not known when neither lies
    within the log (``site_reliability``)."""

    first: dt.date
    last: dt.date


def first_logged_night(site: Site) -> dt.date | None:
    """The site's first logged night (any telescope's or the whole site's): a chosen period starts no earlier."""
    return NightUsage.objects.filter(site=site).aggregate(first=Min("night"))["first"]


@dataclass(frozen=True)
class Start:
    """The day a subsystem's operating hours are counted from, where that day came from, and the hours counted."""

    subsystem: str
    day: dt.date
    basis: str  # one of START_BASES
    hours: float | None = None  # its counted operating hours (within the period, when one is chosen); None: not yet
    retired_on: dt.date | None = None  # said beside it: its replacement often takes its name, and both are listed


#: Why a failure is left out of its subsystem's failures, MTBF and fit (``left_out_reason``).
REPLACED_UNIT = "on or before its in-service date: a failure of the unit it replaced"
AFTER_RETIRED = "after the day it was retired: it was no longer in service"
BEFORE_START = "before the day its hours are counted from: no counted hours lead up to it"
BEFORE_LOG = "before the first logged night: no logged hours lead up to it"


@dataclass(frozen=True)
class LeftOut:
    """A failure not counted among its subsystem's, and why (``REPLACED_UNIT``, ``AFTER_RETIRED``, ``BEFORE_START``,
    ``BEFORE_LOG``)."""

    subsystem: str
    night: dt.date
    reason: str


@dataclass(frozen=True)
class HistoryBefore:
    """A subsystem's record from before its in-service date, left out of its failures, hours, MTBF and fit (the page
    says so beside its kind): what a part swap recorded by editing the in-service date drops, where retiring the old
    unit and registering the new one would keep the old unit's record. Found where service records (as they stand) go
    back before the in-service date (``_starts``). Its failures are those left out as ``REPLACED_UNIT``; its hours,
    about, the open hours of the subsystem's log from the day the record shows it in service with the in-service date
    set aside (``START_BASES``) to the day before that date; both within the period, when one is chosen."""

    subsystem: str
    since: dt.date  # the in-service date given
    failures: int
    hours: float
    first: dt.date  # the nights whose open hours are ``hours``, both included
    last: dt.date
    basis: str  # where ``first`` came from: one of START_BASES

    @property
    def text(self) -> str:
        """E.g. "T1: Fan A: 3 failures and about 3,650 h before its in-service date 02 Jul 2026 are left out (...)"."""
        said = [f"{self.failures} failure{'s' if self.failures != 1 else ''}"] if self.failures else []
        if self.hours > 0:
            said.append(f"about {self.hours:,.0f} h")
        verb = "is" if said == ["1 failure"] else "are"
        text = (f"{self.subsystem}: {' and '.join(said)} before its in-service date {self.since:%d %b %Y} {verb} left "
                "out (a unit replaced by editing its in-service date; to keep a replaced unit's record, retire it and "
                "register the new one).")
        if self.hours > 0:
            text += (f" The hours: the open hours of its log from {self.first:%d %b %Y} ({self.basis}) to "
                     f"{self.last:%d %b %Y}.")
        if self.failures:
            text += " The failures are those left out as a failure of the unit it replaced."
        return text


def left_out_reason(
    night: dt.date, start: Start, first_night: dt.date | None, retired_on: dt.date | None = None
) -> str | None:
    """Why a failure placed on ``night`` is not one of the subsystem's own, counted against its hours; None when it is.

    A subsystem retired on ``retired_on`` (None: still in service) counts no hours after that day, and a failure
    after it is not one in service: placed at the end of its hours it would add a failure to hours it did not fall
    in and an interval of 0 h to the fit. A failure on the day it was retired counts: the unit failed and was
    retired that day. A unit swapped in on its in-service date replaced one that failed, and the corrective order for
    that failure is normally finished the day of the swap: so a failure on or before the in-service date is the old
    unit's. A failure before the day the hours are counted from, or before the first logged night, has no counted
    operating hours leading up to it: placed at 0 h it would shorten the MTBF and add a failure at no time to the
    fit, so it is left out rather than counted against hours it did not fall in.
    """
    if retired_on is not None and night > retired_on:
        return AFTER_RETIRED
    if start.basis == IN_SERVICE_SINCE and night <= start.day:
        return REPLACED_UNIT
    if first_night is None or night < first_night:
        return BEFORE_LOG
    if night < start.day:
        return BEFORE_START
    return None


def failure_left_out(subsystem: Subsystem, repaired_on: dt.date) -> str | None:
    """Why this page leaves out a failure of ``subsystem`` repaired on ``repaired_on`` (``left_out_reason``, by the
    page's own start and log), None when it counts it: said when the repair is logged. A reliability review was told
    "the reliability page counts it as a failure" of a repair the page then left out."""
    site = subsystem.telescope.site
    row = (subsystem.pk, subsystem.telescope.name, subsystem.name, subsystem.kind, subsystem.retired_on,
           subsystem.telescope_id, subsystem.in_service_since)
    logs = UsageLog.of_site(site)
    logged = np.concatenate([log.nights for log in logs.values()])
    starts, _ = _starts([row], site, logged.min().astype(dt.date) if len(logged) else None, site_today(site))
    own = logs[UsageLog.key_for(logs, subsystem.telescope_id, is_shared_enclosure(site, subsystem.kind))].nights
    return left_out_reason(failure_night(repaired_on), starts[subsystem.pk], own[0].astype(dt.date) if len(own)
                           else None, subsystem.retired_on)


class Failure(NamedTuple):
    """A failure counted: whose, on which night, the corrective order that repaired it, and the subsystem's counted
    operating hours up to it (as the MTBF and the fit take it: within the period, when one is chosen)."""

    subsystem: str
    night: dt.date
    repaired_on: dt.date  # the day the repair was done: what places the failure in a period
    order_number: str  # "" for a repair logged without an order (``ServiceRecord.repaired_failure``)
    order_id: int | None
    hours: float = 0.0
    subsystem_id: int | None = None  # where its service record is found (the subsystem's service history)
    corrected: bool = False  # its day (and subsystem) are those of a correction of the record first logged


def failure_night(repaired_on: dt.date) -> dt.date:
    """The night a failure repaired on ``repaired_on`` is placed on: the night before the day its repair was done,
    the last night the subsystem ran up to the repair: its hours count through that night, and the repaired unit's
    from the night of the repair day, as a service on day D resets a count before the night of D
    (``calc.exposure``)."""
    return repaired_on - dt.timedelta(days=1)


def failures_of_site(site: Site) -> dict[int, list[Failure]]:
    """Every failure at ``site``, by subsystem id, as its service records stand. One rule for a corrective order and
    for a repair logged without one: a failure is a service record in force (the newest of its chain of corrections,
    ``ServiceRecord.corrects``, and not a withdrawal) written by a corrective work order finished or countersigned, one
    for each subsystem it names, or logged without an order as the repair of a failure. A correction thus moves the
    failure to its date, on the subsystem it names; a record withdrawn, with no correction standing after it, removes
    it. A failure is placed on the night before the day its repair was done (``failure_night``), as the record gives
    that day: a repair entered days later counts where it happened.

    An order finished with no service record written for a subsystem it names (nothing there to correct) falls back to
    its finish time's night (``night_of``): the one place the failure night is not ``failure_night``, no repair day
    being recorded. A corrective order that also did plans' work writes a record for each plan: one failure for each
    subsystem it names all the same, on its earliest repair day. Two queries."""
    failed_at: dict[int, list[Failure]] = defaultdict(list)
    counted: set[tuple[int, int]] = set()  # (order, subsystem): one failure each, whatever plans its records name
    for subsystem_id, repaired_on, order_id, corrects_id in ServiceRecord.objects.filter(
        Q(work_order__order_type=WorkOrder.Type.CORRECTIVE, work_order__state__in=DONE)
        | Q(work_order__isnull=True, repaired_failure=True),
        subsystem__telescope__site=site, corrected_by__isnull=True, void=False,
    ).order_by("performed_on", "pk").values_list("subsystem_id", "performed_on", "work_order_id", "corrects_id"):
        if order_id is not None:
            if (order_id, subsystem_id) in counted:
                continue
            counted.add((order_id, subsystem_id))
        failed_at[subsystem_id].append(Failure(
            "", failure_night(repaired_on), repaired_on, WorkOrder(pk=order_id).number if order_id else "", order_id,
            subsystem_id=subsystem_id, corrected=corrects_id is not None,
        ))
    written = ServiceRecord.objects.filter(work_order=OuterRef("work_order_id"), subsystem=OuterRef("subsystem_id"))
    for subsystem_id, order_id, finished_at in WorkOrderItem.objects.filter(
        ~Exists(written), work_order__site=site, work_order__order_type=WorkOrder.Type.CORRECTIVE,
        work_order__state__in=DONE, work_order__finished_at__isnull=False,
    ).values_list("subsystem_id", "work_order_id", "work_order__finished_at"):
        failed_at[subsystem_id].append(Failure(
            "", night_of(finished_at, site.time_zone), finished_at.astimezone(site.zone).date(),
            WorkOrder(pk=order_id).number, order_id, subsystem_id=subsystem_id,
        ))
    return failed_at


@dataclass
class KindReliability:
    code: str
    label: str
    in_service: int = 0
    counted: int = 0  # subsystems whose hours count, retired ones included
    failures: int = 0
    operating_hours: float = 0.0
    #: The intervals whose age is known: each failure's age (hours since the subsystem was last new) and, in
    #: ``between_entry``, its age when its hours began to be counted (0 for most; more for the first interval in a
    #: period); the same for each running interval. The fit conditions each on the age at entry (delayed entry).
    between: list[float] = field(default_factory=list)
    between_entry: list[float] = field(default_factory=list)
    running: list[float] = field(default_factory=list)
    running_entry: list[float] = field(default_factory=list)
    #: The subsystems whose first interval the fit leaves out: it began before the log, so its age is not known.
    unknown_age: list[str] = field(default_factory=list)
    hours_by_type: dict[str, float] = field(default_factory=lambda: dict.fromkeys(HOURS_COLUMNS, 0.0))
    mtbf: reliability.MtbfEstimate | None = None
    fit: reliability.WeibullFit | None = None
    no_fit: str = ""
    starts: list[Start] = field(default_factory=list)  # each subsystem's, with its counted hours
    left_out: list[LeftOut] = field(default_factory=list)
    before_in_service: list[HistoryBefore] = field(default_factory=list)
    counted_failures: list[Failure] = field(default_factory=list)

    @property
    def failures_listed(self) -> list[Failure]:
        """The failures counted, by night: what the page lists under the count, each with its order."""
        return sorted(self.counted_failures, key=lambda f: (f.night, f.order_number))

    @property
    def fitted_between(self) -> list[tuple[float, float]]:
        """(age at failure, age at entry) of each failure the fit takes: those with hours counted before them."""
        return sorted((t, e) for t, e in zip(self.between, self.between_entry, strict=True) if t > e)

    @property
    def fitted_running(self) -> list[tuple[float, float]]:
        """(age now, age at entry) of each running interval the fit takes: a subsystem repaired today has run 0 h
        since, which tells the fit nothing (calc.reliability.weibull_fit)."""
        return sorted((t, e) for t, e in zip(self.running, self.running_entry, strict=True) if t > e)

    @property
    def zero_intervals(self) -> int:
        """Failures with no hours counted since the one before (or since the period began): not fitted."""
        return len(self.between) - len(self.fitted_between)

    @property
    def delayed_entries(self) -> int:
        """The intervals fitted from a known age above 0 at entry."""
        return sum(e > 0 for _, e in self.fitted_between + self.fitted_running)

    @property
    def entry_note(self) -> str:
        """What the page says beside the fit about the intervals' ages when their hours began to be counted."""
        said = []
        if self.delayed_entries == 1:
            said.append("1 interval was already under way when the count began and is fitted from the age the log "
                        "gives it then")
        elif self.delayed_entries:
            said.append(f"{self.delayed_entries} intervals were already under way when the count began and are "
                        "fitted from the ages the log gives them then")
        names = ", ".join(self.unknown_age)
        if len(self.unknown_age) == 1:
            said.append(f"1 first interval ({names}) is left out of the fit, as its subsystem's hours before the log "
                        "began are not known")
        elif self.unknown_age:
            said.append(f"{len(self.unknown_age)} first intervals ({names}) are left out of the fit, as their "
                        "subsystems' hours before the log began are not known")
        return f"{'; '.join(said)}." if said else ""

    @property
    def fit_inputs(self) -> str:
        """The hours the Weibull fit was made from, as the page lists them so that anyone can fit them again (each
        with the age it was first counted at, when above 0), and what was left out of it."""
        def listed(intervals: list[tuple[float, float]]) -> str:
            return ", ".join(f"{t:,.0f}" + (f" (counted from {e:,.0f})" if e else "") for t, e in intervals)

        text = (f"between failures: {listed(self.fitted_between) or 'none'} h; "
                f"still running (censored): {listed(self.fitted_running) or 'none'} h")
        return f"{text}; {self.left_out_text}" if self.left_out else text

    @property
    def left_out_text(self) -> str:
        """The failures left out, each subsystem's nights with the reason, e.g. "left out: T1: Fan A on the nights of
        21 Jan 2026, 20 Feb 2026 (on or before its in-service date: a failure of the unit it replaced)"."""
        nights: dict[tuple[str, str], list[dt.date]] = defaultdict(list)
        for failure in self.left_out:
            nights[failure.subsystem, failure.reason].append(failure.night)
        listed = "; ".join(
            f"{name} on the night{'s' if len(days) > 1 else ''} of {', '.join(f'{d:%d %b %Y}' for d in sorted(days))} "
            f"({reason})"
            for (name, reason), days in nights.items()
        )
        return f"left out: {listed}"

    @property
    def start_bases(self) -> str:
        """Where its subsystems' hours were counted from, e.g. "the in-service date given (2), the first logged
        night (1)"; the count is left out when all share one."""
        counts = {basis: sum(s.basis == basis for s in self.starts) for basis in START_BASES}
        used = [(basis, n) for basis, n in counts.items() if n]
        if len(used) == 1:
            return used[0][0]
        return ", ".join(f"{basis} ({n})" for basis, n in used)

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
    kinds_with_hours: list[KindReliability]  # the maintenance hours' rows
    period: Period | None  # None: the whole record, and the last 12 months' maintenance hours
    hours_since: dt.date  # the maintenance hours' first and last days
    hours_until: dt.date
    hours_by_type: dict[str, float]
    records_in_window: int
    records_without_hours: int  # of those, records whose hours are not known: they count none
    log_notes: list[str] = field(default_factory=list)  # each telescope that sends nights of its own: its log
    telescope: Telescope | None = None  # the one telescope whose subsystems count; None: the whole site's

    @property
    def hours_total(self) -> float:
        return sum(self.hours_by_type.values())

    @property
    def period_words(self) -> str:
        """The days (and the telescope, when one alone counts) the failures, operating hours and MTBF cover, as the
        chart's words say them."""
        of = f" on {self.telescope.name} alone" if self.telescope else ""
        if self.period:
            return f"from {self.period.first:%d %b %Y} to {self.period.last:%d %b %Y}{of}"
        if self.first_night:
            return f"from the first logged night, {self.first_night:%d %b %Y}, to today, {self.today:%d %b %Y}{of}"
        return f"to today, {self.today:%d %b %Y} (no night logged){of}"


def _starts(
    subsystems: list[tuple], site: Site, first_night: dt.date | None, today: dt.date
) -> tuple[dict[int, Start], dict[int, Start]]:
    """The day each subsystem's hours are counted from, and its basis (``START_BASES``); and, for each subsystem with
    an in-service date given whose service records (as they stand) go back before that date, the day the record
    shows it in service with that date set aside, by the same rule: where the hours of the unit it replaced began, for
    a unit swapped by editing the in-service date (``HistoryBefore``)."""
    names = {pk: f"{telescope}: {name}" for pk, telescope, name, *_ in subsystems}
    given = {pk: Start(names[pk], since, IN_SERVICE_SINCE) for pk, *_, since in subsystems if since}
    shown: dict[int, Start] = {}  # the earliest day the record shows each in service, an in-service date aside
    earliest_record: dict[int, dt.date] = {}

    def shown_on(pk: int, day: dt.date, basis: str) -> None:
        if pk not in shown or day < shown[pk].day:
            shown[pk] = Start(names[pk], day, basis)

    if subsystems:
        for pk, day in (
            ServicePlan.objects.filter(subsystem_id__in=list(names)).order_by().values("subsystem_id")
            .annotate(start=Min("counting_from")).values_list("subsystem_id", "start")
        ):
            shown_on(pk, day, PLANS_COUNTING_FROM)
        unplanned = [pk for pk in names if pk not in given and pk not in shown]
        if unplanned:
            for pk, when in Subsystem.history.filter(id__in=unplanned, history_type="+").values_list(
                "id", "history_date"
            ):
                shown_on(pk, when.astimezone(site.zone).date(), REGISTERED)
        # A service record as it stands (not withdrawn, not since corrected) shows the subsystem in service that day.
        for pk, day in (
            ServiceRecord.objects.filter(subsystem_id__in=list(names), corrected_by__isnull=True, void=False)
            .order_by().values("subsystem_id").annotate(first=Min("performed_on")).values_list("subsystem_id", "first")
        ):
            earliest_record[pk] = day
            shown_on(pk, day, FIRST_SERVICE)
    # Registered before the history was kept, without plans or service: nothing says when it entered service.
    starts = {pk: given.get(pk) or shown.get(pk) or Start(names[pk], first_night or today, FIRST_NIGHT)
              for pk in names}
    earlier = {pk: shown[pk] for pk, start in given.items() if earliest_record.get(pk, start.day) < start.day}
    return starts, earlier


def site_reliability(site: Site, today: dt.date | None = None, period: Period | None = None,
                     telescope: Telescope | None = None) -> SiteReliability:
    """Per subsystem kind at ``site`` (or of its ``telescope`` alone): subsystems in service, failures, operating
    hours, MTBF with its 90 % interval, the Weibull fit where there are enough failures, and maintenance hours by
    order type (an order's hours shared equally among the subsystems it names, as its service records are); over
    ``period`` (``Period``), or by default the whole record and the last 12 months' maintenance hours."""
    today = today or site_today(site)
    # The days whose nights, failures and service count: without a period, every one up to today.
    first, last = (period.first, period.last) if period else (None, today)
    of_site = Subsystem.objects.filter(telescope__site=site)
    subsystems = list(
        (of_site.filter(telescope=telescope) if telescope else of_site)
        .values_list("pk", "telescope__name", "name", "kind", "retired_on", "telescope_id", "in_service_since")
        .order_by("pk")
    )
    logs = UsageLog.of_site(site)
    logged = np.concatenate([log.nights for log in logs.values()])
    first_night = logged.min().astype(dt.date) if len(logged) else None
    last_night = logged.max().astype(dt.date) if len(logged) else None
    starts, earlier = _starts(subsystems, site, first_night, today)
    # A telescope closed alone has a log of its own, the site's use not counted on its closed nights (UsageLog).
    cumulative = {key: exposure.running_totals(log.columns["open_hours"]) for key, log in logs.items()}

    def hours_before(key: int | None, day: dt.date) -> float:
        """Open hours of the nights of log ``key`` logged before ``day`` (``calc.exposure.total_before``)."""
        return float(exposure.total_before(logs[key].nights, cumulative[key], day))

    failed_at = failures_of_site(site)

    kinds = {code: KindReliability(code, spec.label) for code, spec in KINDS.items()}
    kind_of = {}
    for pk, _, _, kind, retired_on, telescope_id, _ in subsystems:
        row = kinds.setdefault(kind, KindReliability(kind, kind))
        kind_of[pk] = row
        start = starts[pk]
        # A failure is the period's when its repair was done in it.
        repaired = [f for f in failed_at.get(pk, []) if (first is None or f.repaired_on >= first)
                    and f.repaired_on <= last]
        # A period holds the subsystems in service during it: put in service by its last day, not retired before its
        # first (or with a repair done in it: one retired the day before it began, say).
        if period and (start.day > last or (retired_on and retired_on < first)) and not repaired:
            continue
        row.counted += 1
        row.in_service += retired_on is None or retired_on > last
        # Its nights: from the day its hours count from (or the period's first) to the day before it was retired (or
        # the period's last).
        end = min(retired_on, last + dt.timedelta(days=1)) if retired_on else last + dt.timedelta(days=1)
        key = UsageLog.key_for(logs, telescope_id, is_shared_enclosure(site, kind))
        own_first = logs[key].nights[0].astype(dt.date) if len(logs[key].nights) else None
        base = hours_before(key, max(start.day, first) if first else start.day)
        counted_until = hours_before(key, end)
        total = max(counted_until - base, 0.0)
        row.starts.append(replace(start, hours=total, retired_on=retired_on))
        failed, replaced_unit = [], 0
        for failure in sorted(repaired, key=lambda f: (f.night, f.order_number)):
            reason = left_out_reason(failure.night, start, own_first, retired_on)
            if reason:
                row.left_out.append(LeftOut(start.subsystem, failure.night, reason))
                replaced_unit += reason == REPLACED_UNIT
            else:
                failed.append(failure._replace(subsystem=start.subsystem))
        if pk in earlier:
            # The unit it replaced: from the day the record shows it in service (or the period's first) to the day
            # before the in-service date (or the end of its counted nights).
            old_first = max(earlier[pk].day, first) if first else earlier[pk].day
            old_end = min(start.day, end)
            old_hours = max(hours_before(key, old_end) - hours_before(key, old_first), 0.0)
            if replaced_unit or old_hours > 0:
                row.before_in_service.append(HistoryBefore(
                    start.subsystem, start.day, replaced_unit, old_hours, old_first, old_end - dt.timedelta(days=1),
                    earlier[pk].basis,
                ))
        # A failure belongs to the nights up to and including its night; one on the night of the day the subsystem
        # was retired (a night its hours no longer count) stays at the end of its hours. One repaired on a period's
        # first day failed on the night before it: at 0 h of the period.
        at = [min(hours_before(key, f.night + dt.timedelta(days=1)) - base, total) for f in failed]
        row.counted_failures += [f._replace(hours=hours) for f, hours in zip(failed, at, strict=True)]
        # Its age when its counted hours begin (renewal: new at its last failure, or on the day its hours count
        # from): in a period, the log's hours from its last failure before the period, or from that day, to the
        # period's first night; not known when that day lies before its log (its hours before the log are not
        # logged) and no failure of its own came since.
        before = [f for f in failed_at.get(pk, []) if period and f.repaired_on < first
                  and not left_out_reason(f.night, start, own_first, retired_on)]
        if before:
            renewed = hours_before(key, max(f.night for f in before) + dt.timedelta(days=1))
        elif start.basis != FIRST_NIGHT and own_first is not None and start.day >= own_first:
            renewed = hours_before(key, start.day)
        else:
            renewed = None
        age = None if renewed is None else max(min(base, counted_until) - min(renewed, counted_until), 0.0)
        unit = reliability.times_between_failures(at, total, age or 0.0)
        between = [(float(t), unit.entry if i == 0 else 0.0) for i, t in enumerate(unit.between)]
        running = [(unit.running, 0.0 if between else unit.entry)]
        if age is None:
            # That first interval cannot be placed: observation of the unit starts at its first failure seen, and
            # a unit with none seen (and hours counted) is not in the fit.
            if between or unit.running > 0:
                row.unknown_age.append(start.subsystem)
            if between:
                between = between[1:]
            else:
                running = []
        row.operating_hours += total
        row.failures += len(at)
        row.between += [t for t, _ in between]
        row.between_entry += [e for _, e in between]
        row.running += [t for t, _ in running]
        row.running_entry += [e for _, e in running]

    # Maintenance hours: the hours of the service records of the period, by default the last 12 months (a work
    # order's shared among the subsystems it names when it was finished), by the type of the order that wrote them, or
    # logged without one. Records since corrected count as corrected; withdrawn ones not at all; those whose hours are
    # not known count none, and are counted apart so the page can say how many.
    since = first if period else today - dt.timedelta(days=HOURS_WINDOW_DAYS - 1)
    site_hours = dict.fromkeys(HOURS_COLUMNS, 0.0)
    records = without_hours = 0
    records_of = ServiceRecord.objects.filter(subsystem__telescope__site=site, performed_on__gte=since,
                                              performed_on__lte=last, corrected_by__isnull=True, void=False)
    for subsystem_id, hours, order_type, plan_id, repair in (
        records_of.filter(subsystem__telescope=telescope) if telescope else records_of
    ).values_list("subsystem_id", "hours_spent", "work_order__order_type", "plan_id", "repaired_failure"):
        column = maintenance_type(order_type, plan_id, repair)
        records += 1
        if hours is None:
            without_hours += 1
            continue
        site_hours[column] += hours
        kind_of[subsystem_id].hours_by_type[column] += hours

    shown = [row for row in kinds.values() if row.counted]
    for row in shown:
        row.mtbf = reliability.mtbf(row.operating_hours, row.failures)
        positive = row.fitted_between
        try:
            row.fit = reliability.weibull_fit(
                [t for t, _ in positive], [t for t, _ in row.fitted_running],
                failure_entry_hours=[e for _, e in positive], censored_entry_hours=[e for _, e in row.fitted_running],
            )
        except ValueError as exc:
            if not positive:
                row.no_fit = "no failure to fit"
            elif len(positive) < reliability.MIN_FAILURES_FOR_FIT:
                row.no_fit = f"too few failures for a fit: {len(positive)}"
            else:
                row.no_fit = str(exc)
    return SiteReliability(
        today=today,
        first_night=first_night,
        last_night=last_night,
        kinds=shown,
        # With a period, service on a subsystem outside it (retired before it began) still counts in its kind's hours.
        kinds_with_hours=[row for row in kinds.values() if row.hours_total],
        period=period,
        hours_since=since,
        hours_until=last,
        hours_by_type=site_hours,
        records_in_window=records,
        records_without_hours=without_hours,
        log_notes=_log_notes(logs, subsystems),
        telescope=telescope,
    )


def _log_notes(logs: dict[int | None, UsageLog], subsystems: list[tuple]) -> list[str]:
    """Where the site logs per telescope: what each telescope's log is made of (``UsageLog.note``), by name."""
    names = {telescope_id: telescope for _, telescope, _, _, _, telescope_id, _ in subsystems}
    return [f"{names[key]}: {logs[key].note}" for key in sorted((k for k in logs if k in names), key=names.get)]


@dataclass(frozen=True)
class YearCell:
    """One kind in one calendar year (``by_year``): its failures, its MTBF point estimate (None with no failure) and
    its interval (a reliability review read a year's 1 failure as an improvement on the year before's 2), its
    operating hours and its maintenance hours."""

    failures: int
    mtbf_hours: float | None
    operating_hours: float
    maintenance_hours: float
    mtbf_lower_hours: float | None = None
    mtbf_upper_hours: float | None = None


def by_year(site: Site, today: dt.date, first_night: dt.date | None, years: int = 3, telescope: Telescope | None = None
            ) -> tuple[list[str], list[tuple[str, list[YearCell | None]]]]:
    """The last ``years`` calendar years of the log, each a period of its own (``Period``: the failures repaired in
    it, the nights dated in it, the service done in it; this year to today, the first to the log's first night):
    (the years' labels, oldest first; each kind's label with a cell a year, None where it had no subsystem counted
    then). A manager's review loaded three yearly periods by hand to tell whether a kind got better or worse."""
    if first_night is None:
        return [], []
    spans = [(max(dt.date(year, 1, 1), first_night), min(dt.date(year, 12, 31), today))
             for year in range(today.year - years + 1, today.year + 1) if dt.date(year, 12, 31) >= first_night]
    labels, cells = [], {}
    for first, last in spans:
        labels.append(f"{first.year}" + (" so far" if last == today else "") + (
            f" (from {first:%d %b})" if first != dt.date(first.year, 1, 1) else ""))
        for row in site_reliability(site, today, Period(first, last), telescope).kinds:
            cells.setdefault(row.label, {})[len(labels) - 1] = YearCell(
                row.failures, row.mtbf.mtbf_hours if row.mtbf else None, row.operating_hours, row.hours_total,
                row.mtbf.lower_hours if row.mtbf else None, row.mtbf.upper_hours if row.mtbf else None)
    return labels, [(label, [per_year.get(i) for i in range(len(labels))]) for label, per_year in cells.items()]
