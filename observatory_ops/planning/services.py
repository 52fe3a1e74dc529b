"""Writes of the planning app: plans from the catalogue, the nights cache, and the due-state recompute.

``site_recompute`` is the one place that turns the logbook into due states. It reads a site's log,
plans, last services, readings and sky in a fixed number of queries (however many plans there are),
hands arrays to the pure functions of ``observatory_ops.calc`` and stores one ``PlanStatus`` per plan.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import functools
import json
import math
from dataclasses import dataclass, replace
from typing import NamedTuple

import numpy as np
from django.db import transaction
from django.db.models import Max, OuterRef, Q, Subquery
from django.utils import timezone
from simple_history.utils import bulk_create_with_history

from observatory_ops.calc import exposure, forecast, nights, trend
from observatory_ops.calc.triggers import STATUSES, TriggerState, due_status, governing
from observatory_ops.logbook.models import NightUsage, Reading, ServiceRecord
from observatory_ops.logbook.quantities import QUANTITIES, reflectance_text, significant
from observatory_ops.registry.catalogue import kind as catalogue_kind
from observatory_ops.registry.models import Site, Subsystem, is_shared_enclosure

from . import metrics
from .models import NightSky, PlanStatus, ServicePlan, Trigger, figure_text, trigger_figures
from .selectors import rate_text

#: How far ahead forecasts look. A trigger not reached by then has no forecast date.
HORIZON_DAYS = 3 * 366
#: Readings used for a condition trend: those since the last service, at most this many of the newest.
TREND_READINGS = 12
#: Unlogged past nights beyond this many are named in a usage forecast's basis: they are counted as used at the
#: expected rate (``forecast_model``), and a month of them is more than the lag of a log sent in now and then, so
#: the reader should know (a choice of our own).
UNLOGGED_NIGHTS_SAID = 30
#: What a plan whose last service is unknown (no service record, and its counting date not given) needs: it is due
#: now. Equipment of unknown maintenance history gets a baseline service before its intervals mean anything
#: (common practice, no published source).
UNKNOWN_LAST_SERVICE = "no service record: enter the last service if it is known, or do a baseline service"


def site_today(site: Site, now: dt.datetime | None = None) -> dt.date:
    """The site's local calendar date now."""
    return (now or timezone.now()).astimezone(site.zone).date()


def plans_from_catalogue(subsystem: Subsystem, counting_from: dt.date | None) -> list[ServicePlan]:
    """Create the default service plans of the subsystem's kind, with their triggers, counting from
    ``counting_from``. None: nobody said when the equipment was last serviced (a subsystem added in the admin), so
    the plans count from the site's today with their last service unknown (``ServicePlan.counting_from_given``
    False): due now for a baseline service until a service is logged or a counting date is given."""
    given = counting_from is not None
    counting_from = counting_from or site_today(subsystem.telescope.site)
    created = []
    for template in catalogue_kind(subsystem.kind).plans:
        plan = ServicePlan.objects.create(
            subsystem=subsystem,
            name=template.name,
            task=template.task,
            **template.stored_steps,
            parts="\n".join(template.parts),
            readings=[{"quantity": q, "limit": limit} for q, limit in template.readings],
            hazards=list(template.hazards),
            estimated_hours=template.estimated_hours,
            dust_sensitivity=template.dust_sensitivity,
            counting_from=counting_from,
            counting_from_given=given,
            basis=template.basis,
        )
        triggers = [
            Trigger(plan=plan, metric=t[0], limit=t[1], quantity=t[2] if len(t) > 2 else "") for t in template.triggers
        ]
        bulk_create_with_history(triggers, Trigger)
        created.append(plan)
    return created


def plan_steps_from_catalogue(plan: ServicePlan, by) -> ServicePlan:
    """Give a plan its catalogue plan's present steps and tools (``selectors.catalogue_revision``), and any hazard of
    that plan it lacks (never removing one); the plan's history keeps what it had and who changed it. Orders already
    made keep theirs."""
    from .selectors import catalogue_revision

    template = catalogue_revision(plan)
    if template is None:
        raise ValueError(f"{plan.name} already has its catalogue plan's present steps")
    for field, value in template.stored_steps.items():
        setattr(plan, field, value)
    plan.hazards = [*plan.hazards, *(h for h in template.hazards if h not in plan.hazards)]
    plan._change_reason = "steps taken from the catalogue's present wording"
    plan._history_user = by
    plan.save()
    return plan


# --- the nights cache -------------------------------------------------------------------------------


def _calc_site(site: Site) -> nights.Site:
    return nights.Site(site.latitude_deg, site.longitude_deg, site.elevation_m, site.time_zone)


def site_sky_refresh(site: Site, start: dt.date, end: dt.date) -> int:
    """Make sure the nights cache holds every night from ``start`` to ``end``; compute what is missing.

    Returns the number of nights computed. Missing nights are filled as one contiguous span so astropy
    is called once.
    """
    have = set(NightSky.objects.filter(site=site, night__gte=start, night__lte=end).values_list("night", flat=True))
    wanted = (end - start).days + 1
    if len(have) == wanted:
        return 0
    missing = [start + dt.timedelta(days=i) for i in range(wanted) if start + dt.timedelta(days=i) not in have]
    first, last = missing[0], missing[-1]
    table = nights.nights_for_range(_calc_site(site), first, (last - first).days + 1)
    rows = []
    for i, night in enumerate(table.dates):
        night = _as_date(night)
        if night in have:
            continue
        rows.append(
            NightSky(
                site=site,
                night=night,
                sunset=_as_datetime(table.sunset_utc[i]),
                sunrise=_as_datetime(table.sunrise_utc[i]),
                dusk=_as_datetime(table.dusk_utc[i]),
                dawn=_as_datetime(table.dawn_utc[i]),
                dark_hours=float(table.dark_hours[i]),
                moon_illumination=float(table.moon_illumination[i]),
                moonless_dark_hours=float(table.moonless_dark_hours[i]),
            )
        )
    NightSky.objects.bulk_create(rows, batch_size=1000, ignore_conflicts=True)
    return len(rows)


def site_sky_forget(site: Site) -> int:
    """Empty the site's nights cache, computed for a position or time zone it no longer has (a corrected latitude,
    longitude, elevation or zone): the next recompute fills it again for the site as it is now. Returns the number
    of nights forgotten."""
    return NightSky.objects.filter(site=site).delete()[0]


_EPOCH_ORDINAL = dt.date(1970, 1, 1).toordinal()


def _day_array(dates) -> np.ndarray:
    """Dates as numpy days (``datetime64[D]``), through their ordinals: some twenty times faster than
    numpy's own conversion of date objects, which took a tenth of a recompute's reading of the log."""
    return (np.fromiter((d.toordinal() for d in dates), np.int64) - _EPOCH_ORDINAL).astype("datetime64[D]")


def _as_date(value) -> dt.date:
    if isinstance(value, dt.date):
        return value
    return dt.date.fromisoformat(str(np.datetime64(value, "D")))


def _as_datetime(value) -> dt.datetime | None:
    if value is None or np.isnat(np.datetime64(value)):
        return None
    seconds = np.datetime64(value, "s").astype("int64")
    return dt.datetime.fromtimestamp(int(seconds), tz=dt.UTC)


# --- the usage model --------------------------------------------------------------------------------


def _within(nights: np.ndarray, spans: list[tuple[dt.date, dt.date]]) -> np.ndarray:
    """True on each of ``nights`` (datetime64[D]) within one of ``spans`` ((first, last), both counted)."""
    inside = np.zeros(len(nights), dtype=bool)
    for first, last in spans:
        inside |= (nights >= np.datetime64(first, "D")) & (nights <= np.datetime64(last, "D"))
    return inside


@dataclass(frozen=True)
class UsageLog:
    """One telescope's nightly log as arrays, oldest first: its own rows, and the site's rows (telescope empty)
    on the nights it has none of its own (``NightUsage``)."""

    nights: np.ndarray  # datetime64[D]
    columns: dict[str, np.ndarray]  # NightUsage field -> values
    pm10: np.ndarray  # NaN where not measured
    telescope_id: int | None = None  # the telescope whose own rows are in it; None: the site's rows alone
    own_nights: int = 0  # of ``nights``, those of the telescope's own rows
    own: np.ndarray | None = None  # True on the telescope's own rows; None: the site's rows alone
    others_send_own: bool = False  # the site's rows alone, at a site where some telescope sends nights of its own
    # True on the nights of a closure of the whole site, or of the log's telescope (``planning.models.Closure``): left
    # out of the history the open fractions and the spread are made from. None: no closure on any logged night.
    closed: np.ndarray | None = None
    closed_alone: int = 0  # nights of the whole site's rows counted 0 for the telescope, closed alone then

    @property
    def weather(self) -> np.ndarray:
        """True on the nights the history is made of (the open fractions, the spread, the dust by month, the nights
        counted per month): those of no closure (``closed``)."""
        return ~self.closed if self.closed is not None else np.ones(len(self.nights), dtype=bool)

    @property
    def whose(self) -> str:
        """How the pages name the log's owner."""
        return "this site's" if self.telescope_id is None else "this telescope's"

    @property
    def note(self) -> str:
        """What the log is made of, where a site logs per telescope: said with every forecast made from it."""
        if self.telescope_id is not None:
            made = (f"its own nights on {self.own_nights:,} of {len(self.nights):,} logged nights, the whole site's "
                    "on the rest" if self.own_nights else "the whole site's nights")
            if self.closed_alone:
                made += (f", none of their use counted on the {self.closed_alone:,} night"
                         f"{'s' if self.closed_alone != 1 else ''} it was closed alone (a closure of its own)")
            return f"this telescope's log: {made}"
        if not self.others_send_own:
            return ""
        if not len(self.nights):
            return ("no night logged for this telescope nor for the whole site: nothing is counted for it until its "
                    "own nights or the whole site's are sent")
        return "the whole site's nights (those sent for the site, not for one telescope)"

    @classmethod
    def of_site(cls, site: Site, closures: list | None = None) -> dict[int | None, UsageLog]:
        """Every log of ``site`` in one query: telescope id -> the log of a telescope with rows of its own, and
        None -> the site's rows alone, the log of every other telescope. ``closures``: the site's
        (``closures_of``), where the caller has read them already."""
        return cls._with_closures(cls._split(NightUsage.objects.filter(site=site)),
                                  closures_of(site) if closures is None else closures)

    @classmethod
    def for_telescope(cls, telescope) -> UsageLog:
        logs = cls._with_closures(cls._split(NightUsage.objects.filter(site=telescope.site_id).filter(
            Q(telescope=telescope) | Q(telescope__isnull=True)
        )), closures_of(telescope.site_id))
        return logs.get(telescope.pk, logs[None])

    @staticmethod
    def _with_closures(logs: dict[int | None, UsageLog], closures: list) -> dict[int | None, UsageLog]:
        """The logs as the site's closures (``planning.models.Closure``) leave them, one rule for every figure made
        from them (the forecasts, the subsystem page's charts, the mirror's exposure, the reliability page's hours):

        - each log's ``closed`` nights, those of a closure of the whole site or of its telescope (the site's own log:
          the whole site's alone), left out of the history the open fractions and the spread are made from;
        - a telescope closed alone counts none of the whole site's rows on its closed nights (the dome open for the
          others): the site's rows stand in for it with their counters at 0 there (``closed_alone``), in a log of
          its own when it sends no rows of its own. Its own rows are kept, as sent."""
        if not closures:
            return logs
        spans: dict[int | None, list[tuple[dt.date, dt.date]]] = {}
        for closure in closures:
            spans.setdefault(closure.telescope_id, []).append((closure.first_night, closure.last_night))
        out = dict(logs)
        for telescope_id in spans:
            if telescope_id is not None and telescope_id not in out:  # it counts the site's rows: a log of its own
                base = logs[None]
                out[telescope_id] = replace(base, telescope_id=telescope_id, own=np.zeros(len(base.nights), bool),
                                            own_nights=0, others_send_own=False)
        for key, log in out.items():
            closed = _within(log.nights, spans.get(None, []))
            if key is not None and key in spans:
                alone = _within(log.nights, spans[key])
                closed |= alone
                stand_in = alone & ~log.own if log.own is not None else alone
                if stand_in.any():
                    log = replace(log, columns={f: np.where(stand_in, 0.0, v) for f, v in log.columns.items()},
                                  closed_alone=int(stand_in.sum()))
            out[key] = replace(log, closed=closed) if closed.any() else log
        return out

    @classmethod
    def site_wide(cls, site: Site) -> UsageLog:
        """The log for a figure of the whole site (the cost of losing a night, an enclosure all its telescopes
        share): the site's rows, or where it sends none of its own, the log of its busiest telescope (the most open
        hours)."""
        logs = cls.of_site(site)
        return logs[cls.site_wide_key(logs)]

    @staticmethod
    def site_wide_key(logs: dict[int | None, UsageLog]) -> int | None:
        """Which of a site's logs (``of_site``) is the whole site's (``site_wide``)."""
        if len(logs[None].nights) or len(logs) == 1:
            return None
        telescopes = [key for key in logs if key is not None]
        return max(telescopes, key=lambda key: float(logs[key].columns["open_hours"].sum()))

    @classmethod
    def key_for(cls, logs: dict[int | None, UsageLog], telescope_id: int, whole_site: bool) -> int | None:
        """Which of a site's logs (``of_site``) a subsystem counts: its telescope's, or with ``whole_site`` (an
        enclosure all the site's telescopes share: ``registry.models.is_shared_enclosure``) the whole site's."""
        if whole_site:
            return cls.site_wide_key(logs)
        return telescope_id if telescope_id in logs else None

    @classmethod
    def for_subsystem(cls, subsystem) -> UsageLog:
        """The log a subsystem's plans count: its telescope's, or the whole site's for a shared enclosure."""
        if subsystem.serves_the_whole_site:
            return cls.site_wide(subsystem.telescope.site)
        return cls.for_telescope(subsystem.telescope)

    @classmethod
    def _split(cls, rows_query) -> dict[int | None, UsageLog]:
        fields = list(metrics.USAGE_FIELDS.values())
        rows = _fetched(rows_query.order_by("night").values_list("telescope_id", "night", *fields, "pm10_ugm3"))
        owners = {row[0] for row in rows} - {None}
        if not owners:  # one log for the site (the usual case, read as it comes)
            return {None: cls._of(rows, fields)}
        site_rows = [row for row in rows if row[0] is None]
        site_by_night = {row[1]: row for row in site_rows}
        logs = {None: replace(cls._of(site_rows, fields), others_send_own=True)}
        hours_at = 2 + fields.index("open_hours")
        for owner in owners:
            own = [cls._filled(row, site_by_night.get(row[1]) if row[hours_at] else None)
                   for row in rows if row[0] == owner]
            own_nights = {row[1] for row in own}
            merged = sorted(own + [row for row in site_rows if row[1] not in own_nights], key=lambda row: row[1])
            logs[owner] = replace(cls._of(merged, fields), telescope_id=owner, own_nights=len(own),
                                  own=np.array([row[0] == owner for row in merged], dtype=bool))
        return logs

    @staticmethod
    def _filled(own: tuple, site: tuple | None) -> tuple:
        """A telescope's row with each figure it leaves out (None: a counter or PM10 its control software does not
        know) taken from the site's row of the same night; with no site row that night, left out (``_of``). A row of
        0 open hours (the telescope idle while the site was open) is given no site row: what it leaves out counts 0."""
        if site is None or None not in own:
            return own
        return tuple(theirs if mine is None else mine for mine, theirs in zip(own, site, strict=True))

    @classmethod
    def _of(cls, rows: list[tuple], fields: list[str]) -> UsageLog:
        nights_ = _day_array(r[1] for r in rows)
        # One conversion for every figure column; numpy turns a missing figure (None) into NaN. A counter left out
        # (a telescope's row with no site row that night to fill it) counts 0; PM10 stays NaN, clean air.
        figures = np.array([r[2:] for r in rows], dtype=float).reshape(len(rows), len(fields) + 1)
        counters = figures[:, :-1]
        counters[np.isnan(counters)] = 0.0
        return cls(nights_, {f: figures[:, i] for i, f in enumerate(fields)}, figures[:, -1])

    def per_night(self, metric: str, dust_sensitivity: float) -> np.ndarray:
        """The quantity a usage metric counts, for each logged night."""
        if metric == metrics.DUST_HOURS:
            return exposure.dust_weighted_hours(self.columns["open_hours"], self.pm10, dust_sensitivity)
        return self.columns[metrics.USAGE_FIELDS[metric]]


@dataclass(frozen=True)
class UsageModel:
    """Expected usage for each coming night, and how it was derived (shown on pages)."""

    first_day: dt.date
    open_hours: np.ndarray
    month_pm10: np.ndarray  # 12 values, NaN where never measured: shown
    month_excess: np.ndarray  # 12 values, the mean dust excess of an open hour (calc.exposure.dust_excess), 0: clean
    per_open_hour: dict[str, float]  # usage field -> rate per open hour
    open_fraction: np.ndarray  # 12 values
    from_history: np.ndarray  # 12 booleans: False where the month took the prior (calc.forecast)
    months_from_history: int  # months from the history, by their open fraction or by the night
    spread: float
    months: np.ndarray  # calendar month (1..12) of each coming night
    dark_hours: np.ndarray  # dark hours of each coming night (the sky cache)
    pm10_months: int = 0  # calendar months with their own mean PM10
    pm10_nights: int = 0  # open nights with PM10 measured
    spread_months: int = 0  # complete months the spread was measured from; 0: the prior spread
    unlogged_nights: int = 0  # past nights from ``first_day`` to yesterday, none logged: counted as expected
    closed_nights: int = 0  # logged nights of closures, left out of the history (``UsageLog.closed``)
    whose: str = "this site's"  # the log's owner (``UsageLog.whose``)
    log_note: str = ""  # what the log is made of (``UsageLog.note``)
    rates_from: str = "this site's log"  # the nights ``per_open_hour`` is taken over, as the basis says them
    #: 12 booleans: the months taken by the night (``calc.forecast.monthly_use_by_night``), and their mean open hours a
    #: logged night (NaN for the others)
    by_night: np.ndarray = dataclasses.field(default_factory=lambda: np.zeros(12, dtype=bool))
    per_night: np.ndarray = dataclasses.field(default_factory=lambda: np.full(12, np.nan))

    def expected(self, metric: str, dust_sensitivity: float) -> np.ndarray:
        if metric == metrics.OPEN_HOURS:
            return self.open_hours
        if metric == metrics.DUST_HOURS:
            return self.open_hours * (1.0 + dust_sensitivity * self.month_excess[self.months - 1])
        return self.open_hours * self.per_open_hour[metrics.USAGE_FIELDS[metric]]

    @property
    def basis(self) -> str:
        if self.months_from_history == 12:
            source = f"{self.whose} own open fraction for every month"
        elif self.months_from_history == 0:
            source = f"a prior open fraction of {forecast.PRIOR_OPEN_FRACTION:.0%} (no usable history yet)"
        else:
            source = (
                f"{self.whose} open fraction for {self.months_from_history} of 12 months and a prior of "
                f"{forecast.PRIOR_OPEN_FRACTION:.0%} for the rest"
            )
        if self.spread_months:
            spread = (f"{self.whose} month-to-month spread {self.spread:.0%} ({self.spread_months} complete months, "
                      "each against the same month of its other years)")
        else:
            spread = (f"a prior month-to-month spread of {self.spread:.0%} (too few complete months logged in more "
                      "than one year to measure the site's own)")
        band = (f"one-sigma band (about 68 %) from {spread}, divided by the square root of the months to the limit "
                "(months above and below the expected use partly cancel)")
        basis = f"dark hours of each coming night x {source}"
        if self.by_night.any():
            named = ", ".join(f"{dt.date(2000, m + 1, 1):%b}" for m in np.flatnonzero(self.by_night))
            basis += (f"; by the night in {named} (open more than {forecast.DARKNESS_LEADS_UP_TO:g} x their dark "
                      "hours, or with none: twilight, a sky never fully dark): each coming night of such a month at "
                      "its mean open hours a logged night")
        basis += f"; {band}"
        if self.closed_nights:
            basis += (f"; the {self.closed_nights:,} logged night{'s' if self.closed_nights != 1 else ''} of closures "
                      "left out of the open fractions and the spread (a closure is not the weather)")
        if self.unlogged_nights > UNLOGGED_NIGHTS_SAID:
            last = self.first_day - dt.timedelta(days=1)
            basis += (f"; no night logged since {last:%d %b %Y}: the {self.unlogged_nights} nights since are counted "
                      "as used at the expected rate (from the last service, if later), except any nights of a "
                      "closure or a recoat named in this basis")
        if self.log_note:
            basis += f"; {self.log_note}"
        return basis

    def usage_basis(self, metric: str, dust_sensitivity: float) -> str:
        """How the expected usage of a counter's metric is made (``expected``): the basis of its forecast."""
        if metric == metrics.DUST_HOURS:
            return f"{self.basis}; {self.dust_basis}; {exposure.dust_weight_formula(dust_sensitivity)}"
        if metric == metrics.OPEN_HOURS:
            return self.basis
        unit = metrics.METRICS[metric][1]
        rate = self.per_open_hour[metrics.USAGE_FIELDS[metric]]
        return f"{self.basis}; times {rate:.3g} {unit} per open hour ({self.rates_from})"

    @property
    def dust_basis(self) -> str:
        """Where the expected dust of dust-weighted hours comes from."""
        least = forecast.MIN_NIGHTS_FOR_HISTORY
        if self.pm10_nights < least:
            return (f"dust: PM10 measured on {self.pm10_nights} open nights, under {least}, so counted as clean "
                    "air")
        weighs = "dust: each coming open hour weighs what this site's past open hours"
        if self.pm10_months == 12:
            return (f"{weighs} of its month weighed on average (every month measured on at least {least} open "
                    "nights)")
        if self.pm10_months == 0:
            return f"{weighs} weighed on average (no month measured on {least} open nights yet)"
        return (f"{weighs} of its month weighed on average for {self.pm10_months} of 12 months (each measured on "
                f"at least {least} open nights), and what all of them weighed for the rest")


def _dark_hours(site: Site, start: dt.date, end: dt.date) -> np.ndarray | None:
    """Dark hours of every night from ``start`` to ``end`` in order, or None when the cache lacks a night.

    Only the hours are read, in night order (the unique index on site and night): when there are as many
    rows as nights in the span, row ``i`` is the night ``start + i``.
    """
    rows = NightSky.objects.filter(site=site, night__gte=start, night__lte=end).order_by("night")
    hours = np.fromiter((row[0] for row in _fetched(rows.values_list("dark_hours"))), float)
    return hours if len(hours) == (end - start).days + 1 else None


def _fetched(queryset) -> list[tuple]:
    """The rows of a ``values_list`` query as the database driver returns them, in one fetch.

    Used for the long reads of a recompute (the usage log, the sky, the triggers), whose plain values
    (dates, numbers, text, None) both drivers return as Django would: Django's own row iterator would
    take about as long again as the query itself (benchmarks/README.md).
    """
    sql, params = queryset.query.sql_with_params()
    with transaction.get_connection(queryset.db).cursor() as cursor:
        cursor.execute(sql, params)
        return cursor.fetchall()


def usage_model(site: Site, log: UsageLog, first_day: dt.date, days: int) -> UsageModel:
    """Expected usage per night from ``first_day`` on, from the site's history and its sky."""
    end = first_day + dt.timedelta(days=days - 1)
    if len(log.nights):  # the span covers every logged night and every coming one
        start, end = min(_as_date(log.nights[0]), first_day), max(_as_date(log.nights[-1]), end)
    else:
        start = first_day
    sky = _dark_hours(site, start, end)
    if sky is None:  # the cache lacks nights: fill them, then read again
        site_sky_refresh(site, start, end)
        sky = _dark_hours(site, start, end)
        if sky is None:
            raise RuntimeError(f"the nights cache of {site} still lacks nights between {start} and {end}")
    past_dark = sky[(log.nights - np.datetime64(start, "D")).astype(int)]
    past_months = log.nights.astype("datetime64[M]").astype(int) % 12 + 1
    open_h = log.columns["open_hours"]
    # The history leaves out the nights of closures (``UsageLog.weather``): a season shut is not the weather's.
    weather = log.weather
    fraction, from_history = forecast.monthly_open_fraction(past_months[weather], open_h[weather], past_dark[weather])
    per_night, by_night = forecast.monthly_use_by_night(past_months[weather], open_h[weather], past_dark[weather])

    coming = np.datetime64(first_day, "D") + np.arange(days)
    months = coming.astype("datetime64[M]").astype(int) % 12 + 1
    dark = sky[(first_day - start).days :][:days]
    open_hours = np.where(by_night[months - 1], per_night[months - 1], dark * fraction[months - 1])

    # A counter per open hour (brake cycles, slews) from the telescope's own nights once it has sent
    # forecast.MIN_NIGHTS_FOR_HISTORY open ones: the site's rows before them count the site's use, not this
    # telescope's, and would dilute or swell its rate for as long as they outnumber its own.
    counted = slice(None)
    rates_from = f"{log.whose} log"
    if log.own is not None and int((open_h[log.own] > 0).sum()) >= forecast.MIN_NIGHTS_FOR_HISTORY:
        counted, rates_from = log.own, f"this telescope's own {log.own_nights:,} nights"
    total_open = float(open_h[counted].sum())
    per_open_hour = {
        field: (float(log.columns[field][counted].sum()) / total_open if total_open > 0 else 0.0)
        for field in metrics.USAGE_FIELDS.values()
    }
    per_open_hour["open_hours"] = 1.0

    # Dust per calendar month, as the open fraction is made, weighted by open hours: the mean PM10 while open (shown)
    # and the mean excess over clean air (calc.exposure.dust_excess), which the forecast weighs each coming open hour
    # by, 1 + s x excess: the mean weight of the month's past open hours. The weight of the mean PM10 would count a
    # month of nights at 10 and 30 as clean air and bring its plans due late (a traceability review: 1.05 for a
    # month whose hours weighed 1.20). A month measured on fewer than forecast.MIN_NIGHTS_FOR_HISTORY open nights
    # takes the site's overall means, and a site with fewer such nights in all counts as clean air, so one dusty
    # night cannot set a month.
    month_pm10, month_excess = np.full(12, np.nan), np.zeros(12)
    measured = ~np.isnan(log.pm10) & (open_h > 0) & weather
    pm10_nights = np.bincount(past_months[measured] - 1, minlength=12)[:12]
    if pm10_nights.sum() >= forecast.MIN_NIGHTS_FOR_HISTORY:
        own = pm10_nights >= forecast.MIN_NIGHTS_FOR_HISTORY
        weights = np.bincount(past_months[measured] - 1, weights=open_h[measured], minlength=12)[:12]
        with np.errstate(invalid="ignore", divide="ignore"):
            for values, into in ((log.pm10, month_pm10), (exposure.dust_excess(log.pm10), month_excess)):
                sums = np.bincount(past_months[measured] - 1, weights=(open_h * values)[measured], minlength=12)[:12]
                into[:] = np.where(own, sums / weights, sums.sum() / weights.sum())

    # Month-to-month spread: each complete past (year, month) against the same month of the other years
    # (calc.forecast.months_left_out). The month of the night after the last logged one (or of the first forecast
    # day, if earlier) is still being logged, so it and any later month are left out.
    keys = log.nights.astype("datetime64[M]").astype(int)  # months since 1970-01: one per (year, month)
    unlogged = min([np.datetime64(first_day, "D"), *log.nights[-1:] + 1])
    first_incomplete = int(unlogged.astype("datetime64[M]").astype(int))
    actual, expected = forecast.months_left_out(keys[weather], open_h[weather], past_dark[weather], first_incomplete)
    spread = forecast.monthly_spread(actual, expected)
    compared = int((expected > 0).sum())
    spread_months = compared if compared >= forecast.MIN_MONTHS_FOR_SPREAD else 0  # fewer: the prior (as above)

    return UsageModel(
        first_day=first_day,
        open_hours=open_hours,
        month_pm10=month_pm10,
        month_excess=month_excess,
        per_open_hour=per_open_hour,
        rates_from=rates_from,
        open_fraction=fraction,
        from_history=from_history,
        months_from_history=int((from_history | by_night).sum()),
        by_night=by_night,
        per_night=per_night,
        spread=spread,
        spread_months=spread_months,
        months=months,
        dark_hours=dark,
        pm10_months=int((pm10_nights >= forecast.MIN_NIGHTS_FOR_HISTORY).sum()),
        pm10_nights=int(pm10_nights.sum()),
        whose=log.whose,
        log_note=log.note,
        closed_nights=int((~weather).sum()),
    )


def forecast_model(site: Site, log: UsageLog, today: dt.date) -> UsageModel:
    """The usage model a recompute forecasts with: from the first night not yet logged to ``HORIZON_DAYS`` after
    today. That is today's night at the latest, or tomorrow's once today's is logged (a shutdown entered in the
    afternoon as 0 hours: a traceability review found tonight counted twice, logged and expected).

    Past nights after the last logged one are taken as used at the expected rate, a plan's from its baseline when
    that is later (``_site_recompute``): a log that lags behind still moves the due dates on (common practice, no
    published source). The cost of the assumption: a shutdown left unlogged counts as use, and after a long one
    every plan counting from before it is due. The basis says so once more than ``UNLOGGED_NIGHTS_SAID`` nights
    are missing."""
    last_logged = _as_date(log.nights[-1]) if len(log.nights) else None
    first_day = last_logged + dt.timedelta(days=1) if last_logged else today
    model = usage_model(site, log, first_day, (today - first_day).days + HORIZON_DAYS)
    return replace(model, unlogged_nights=max((today - first_day).days, 0)) if last_logged else model


# --- the recompute ----------------------------------------------------------------------------------


def _offset_date(first_day: dt.date, offset: int) -> dt.date | None:
    return None if offset < 0 else first_day + dt.timedelta(days=int(offset))


def effective_last_service(**where) -> dict[int, dt.date]:
    """Newest service date per plan of the service records matching ``where`` (``subsystem__telescope__site=site``,
    ``plan__in=plans``), counting only records neither corrected nor withdrawn: the date a plan counts from."""
    return dict(
        ServiceRecord.objects.filter(plan__isnull=False, corrected_by__isnull=True, void=False, **where)
        .values("plan_id")
        .annotate(last=Max("performed_on"))
        .values_list("plan_id", "last")
    )


def site_recompute(site: Site, today: dt.date | None = None) -> int:
    """Recompute and store the due state of every active plan at ``site``. Returns the number of plans stored.

    Recomputes of one site take turns: the site's row stays locked until the caller's transaction ends.
    Two at once on PostgreSQL would otherwise both delete the old rows, and the second would then insert
    beside the first's (a primary-key violation); taking turns, each also reads what the previous wrote.
    """
    # No savepoint: inside a caller's transaction (storing nights) a failure here undoes the whole of it.
    with transaction.atomic(savepoint=False):
        Site.objects.select_for_update().filter(pk=site.pk).exists()
        return _site_recompute(site, today or site_today(site))


def stale_sites(sites=None) -> list[Site]:
    """The sites (of ``sites``, or all) whose stored due states were computed before the site's today.

    Calendar triggers and forecasts move with the date, so states computed yesterday are out of date even on
    a quiet site. One query: a site's states share one ``computed_at``, so one row per site (found through
    the site's index) tells. A site with no states yet is not counted (it has nothing to bring forward).
    """
    newest = PlanStatus.objects.filter(site=OuterRef("pk")).values("computed_at")[:1]
    candidates = Site.objects.all() if sites is None else Site.objects.filter(pk__in=[s.pk for s in sites])
    return [
        site for site in candidates.annotate(computed_at=Subquery(newest))
        if site.computed_at is not None and site.computed_at.astimezone(site.zone).date() < site_today(site)
    ]


def sites_bring_up_to_date(sites=None) -> list[Site]:
    """Recompute each stale site (``stale_sites``) here and now; return those recomputed.

    With Celery beat the hourly task keeps states current; without it (the embedded default) the pages, the
    API and the ``due`` command call this before reading, so the first look of the day brings a site up to
    date.
    """
    stale = stale_sites(sites)
    for site in stale:
        site_recompute(site)
    return stale


class _Trigger(NamedTuple):
    """What the recompute reads of a trigger."""

    metric: str
    limit: float
    quantity: str
    direction: str


class _Plan(NamedTuple):
    """What the recompute reads of a service plan."""

    pk: int
    subsystem_id: int
    telescope_id: int
    counting_from: dt.date
    dust_sensitivity: float
    counting_from_given: bool
    whole_site: bool  # a shared enclosure's plan: it counts the whole site's nights (``UsageLog.key_for``)


def _site_recompute(site: Site, today: dt.date) -> int:
    # One query for the triggers of every active plan, each with the five plan fields read here: rows, not
    # model instances, since a site has hundreds. A plan without triggers has no due state, nor one none of whose
    # triggers gives figures (no mirror record, no reading yet): the pages say why (selectors.not_computed_reason).
    plans: list[_Plan] = []
    triggers_of: dict[int, list] = {}
    for plan_id, subsystem_id, telescope_id, kind, counting_from, sensitivity, given, *trigger in _fetched(
        Trigger.objects.filter(
            plan__subsystem__telescope__site=site, plan__active=True, plan__subsystem__retired_on__isnull=True
        )
        .order_by("plan_id", "pk")
        .values_list("plan_id", "plan__subsystem_id", "plan__subsystem__telescope_id", "plan__subsystem__kind",
                     "plan__counting_from", "plan__dust_sensitivity",
                     "plan__counting_from_given", "metric", "limit", "quantity", "direction")
    ):
        if plan_id not in triggers_of:
            plans.append(_Plan(plan_id, subsystem_id, telescope_id, counting_from, sensitivity, bool(given),
                               is_shared_enclosure(site, kind)))
            triggers_of[plan_id] = []
        triggers_of[plan_id].append(_Trigger(*trigger))
    recoat = any(t.metric == metrics.RECOAT_LINE for p in plans for t in triggers_of[p.pk])
    mirrors = _mirrors_by_subsystem(site) if recoat else {}
    # Each plan counts its telescope's usage (``UsageLog``): a site that logs one row a night has one log and
    # one usage model; a telescope that logs its own nights has its own; a shared enclosure counts the whole site's.
    closures = closures_of(site)
    logs = UsageLog.of_site(site, closures)
    models_: dict[int | None, UsageModel] = {}

    def usage_of(plan: _Plan) -> tuple[int | None, UsageLog, UsageModel]:
        key = UsageLog.key_for(logs, plan.telescope_id, plan.whole_site)
        if key not in models_:
            models_[key] = forecast_model(site, logs[key], today)
        return key, logs[key], models_[key]

    last_service = effective_last_service(subsystem__telescope__site=site)
    # A plan counts from its last service; ``counting_from`` only while it has none (service history from
    # before the plan was registered, logged afterwards, counts as it happened). With neither a service nor a
    # counting date given, its last service is unknown: it still counts from ``counting_from`` (the day it was
    # registered), but is due now (``_unknown_last_service``).
    baselines = {p.pk: last_service.get(p.pk, p.counting_from) for p in plans}
    unknown = {p.pk for p in plans if not p.counting_from_given and p.pk not in last_service}
    readings = _readings_by_subsystem_quantity(site, plans, triggers_of, baselines)
    def readings_of(plan: _Plan, trig) -> list[tuple[dt.datetime, float]]:
        """The readings of what ``trig`` watches since ``plan``'s own baseline (two plans may watch one quantity from
        different services)."""
        return [r for r in readings.get((plan.subsystem_id, trig.quantity), [])
                if r[0].astimezone(site.zone).date() >= baselines[plan.pk]]

    unconfirmed = _last_readings_before(site, [
        (p.subsystem_id, t.quantity, baselines[p.pk]) for p in plans for t in triggers_of[p.pk]
        if t.metric == metrics.READING and p.pk in last_service and not readings_of(p, t)
    ])

    downtime = _downtime_by_telescope(site, today, closures)
    if downtime and any(p.whole_site for p in plans):
        downtime[ALL_OUT] = _all_out(downtime, telescopes_observing(site))
    states: dict[int, list[TriggerState]] = {p.pk: [] for p in plans}
    groups: dict[tuple, list[tuple]] = {}  # (log, metric, dust sensitivity, telescope out) -> [(plan, trigger)]
    for plan in plans:
        for trig in triggers_of[plan.pk]:
            if trig.metric == metrics.CALENDAR_DAYS:
                states[plan.pk].append(_calendar_state(trig, baselines[plan.pk], today))
            elif trig.metric == metrics.RECOAT_LINE:
                _, log, model = usage_of(plan)
                state = _recoat_line_state(mirrors.get(plan.subsystem_id), today, log, model,
                                           downtime.get(plan.telescope_id, []))
                if state:
                    states[plan.pk].append(state)
            elif trig.metric == metrics.READING:
                since = (f"the last service ({baselines[plan.pk]:%d %b %Y})" if plan.pk in last_service
                         else f"the plan's start ({baselines[plan.pk]:%d %b %Y})")
                state = _reading_state(trig, readings_of(plan, trig), today, site.zone, since)
                if state is None and plan.pk in last_service and (
                        before := unconfirmed.get((plan.subsystem_id, trig.quantity, baselines[plan.pk]))):
                    state = _unconfirmed_state(trig, before, baselines[plan.pk], site.zone)
                if state:
                    states[plan.pk].append(state)
            else:
                sens = plan.dust_sensitivity if trig.metric == metrics.DUST_HOURS else 0.0
                # A telescope out of service for a recoat expects no use then; an enclosure all the site's telescopes
                # share still opens for the others, until all of them are out.
                if plan.whole_site:
                    out = ALL_OUT if downtime.get(ALL_OUT) else None
                else:
                    out = plan.telescope_id if plan.telescope_id in downtime else None
                groups.setdefault((usage_of(plan)[0], trig.metric, sens, out), []).append((plan, trig))

    # A counter's expected use runs from the first unlogged night, or from its plan's baseline (last service or
    # counting date) when that is later: use before the baseline is not the serviced part's (a service logged today
    # after months of unlogged nights starts from nothing, not from those months' assumed use).
    for (key, metric, sens, out), members in groups.items():
        log, model = logs[key], models_[key]
        first_day = model.first_day
        first_counted = np.datetime64(first_day, "D")
        ahead = max((today - first_day).days, 0)  # the model's day index of today: "the next month" starts there
        since = _day_array(baselines[p.pk] for p, _ in members)
        per_night = log.per_night(metric, sens)
        values = exposure.accumulated_since(log.nights, per_night, since)
        limits = np.array([t.limit for _, t in members], dtype=float)
        reached = exposure.reached_on(log.nights, per_night, since, limits)  # the night a limit was passed
        expected, down = model.expected(metric, sens), ""
        if out is not None:
            expected, down = without_downtime(expected, first_day, downtime[out])
        start = np.maximum((since - first_counted).astype(np.int64), 0)
        central, early, late = forecast.days_reached(limits - values, expected, model.spread, start)
        rate = float(expected[ahead:][:30].mean()) if len(expected) > ahead else 0.0
        basis = model.usage_basis(metric, sens) + down
        log_begins = _as_date(log.nights[0]) if len(log.nights) else None
        log_ends = _as_date(log.nights[-1]) if len(log.nights) else None
        for i, (plan, trig) in enumerate(members):
            expected_on = None
            if values[i] >= limits[i]:
                on = _as_date(reached[i])
                dates = (on, on, on)
                unlogged = ""
            else:
                expected_on = _offset_date(first_day, central[i])
                dates = tuple(_clamp(_offset_date(first_day, d[i]), today) for d in (central, early, late))
                unlogged = _reached_unlogged(expected_on, today)
            states[plan.pk].append(
                TriggerState(
                    metric=metric,
                    value=float(values[i]),
                    limit=trig.limit,
                    rate_per_day=rate,
                    forecast=dates[0],
                    earliest=dates[1],
                    latest=dates[2],
                    basis=(_counted_nights(baselines[plan.pk], log_ends) + basis
                           + _before_the_log(baselines[plan.pk], log_begins) + unlogged),
                    unit=metrics.METRICS[metric][1],
                    **_unlogged_said(model, first_day, baselines[plan.pk], today,
                                     downtime[out] if out is not None else []),
                    steps_over=_steps_over(downtime[out] if out is not None else [], first_day, dates[0]),
                    reached_unlogged_on=expected_on if unlogged else None,
                )
            )

    now = timezone.now()
    rows = []
    for plan in plans:
        if not states[plan.pk]:
            continue
        if plan.pk in unknown:
            states[plan.pk] = [_unknown_last_service(s, plan.counting_from, today) for s in states[plan.pk]]
        gov = governing(states[plan.pk])
        others = [s for s in states[plan.pk] if s is not gov]
        status = due_status(gov, today, site.look_ahead_days)
        gov_rate = None if gov.rate_per_day is None else float(gov.rate_per_day)
        reason = reason_text(gov)
        if plan.pk in unknown:
            reason = unknown_last_service_reason(reason, gov.reached, plan.counting_from)
        rows.append((
            plan.pk, site.pk, status, STATUSES.index(status), gov.metric, float(gov.value), float(gov.limit), gov.unit,
            gov_rate, gov.forecast, gov.earliest, gov.latest, last_service.get(plan.pk), plan.pk in unknown,
            reason, gov.basis, [_state_json(s) for s in others], now, gov.unlogged_nights, gov.reached_unlogged_on,
        ))
    PlanStatus.objects.filter(site=site).delete()
    _insert_all(PlanStatus, STATUS_COLUMNS, rows)
    return len(rows)


def _counted_nights(baseline: dt.date, log_ends: dt.date | None) -> str:
    """Which logged nights a counter's value now adds up, said first in its basis (a traceability review had to guess
    whether the night of the service day was in it: it is, as ``calc.exposure.accumulated_since`` counts)."""
    if log_ends is None or baseline > log_ends:
        return f"now: no night logged since {baseline:%d %b %Y}; coming: "
    return f"now: the logged nights of {baseline:%d %b %Y} to {log_ends:%d %b %Y}, both included; coming: "


def _steps_over(downtimes: list[Downtime], first_day: dt.date, forecast_on: dt.date | None) -> str:
    """What a counter's one-line reason names of ``downtimes``: those on nights from ``first_day`` (the first not
    logged) to its forecast day (to the horizon when it has none), whose nights it counts no use on, in words
    ("the closure of T70 for mount overhaul and the planned recoat of T70: Primary mirror"). "" when none."""
    names = list(dict.fromkeys(d.what for d in downtimes
                               if d.last >= first_day and (forecast_on is None or d.first <= forecast_on)))
    return " and ".join(names)


def _unlogged_said(model: UsageModel, first_day: dt.date, baseline: dt.date, today: dt.date,
                   downtimes: list[Downtime]) -> dict:
    """A counter's ``unlogged_from`` and ``unlogged_nights`` (``calc.triggers.TriggerState``): the nights from the first
    not logged (or its plan's baseline, if later) to yesterday that its forecast counts at the expected rate (those of
    ``downtimes``, a closure or a recoat, count none), when the log is more than ``UNLOGGED_NIGHTS_SAID`` nights
    behind; none otherwise."""
    since = max(first_day, baseline)
    if model.unlogged_nights <= UNLOGGED_NIGHTS_SAID or since >= today:
        return {}
    out = downtime_days(downtimes)
    counted = sum(1 for i in range((today - since).days) if since + dt.timedelta(days=i) not in out)
    return {"unlogged_from": since, "unlogged_nights": counted} if counted else {}


def _reached_unlogged(expected_on: dt.date | None, today: dt.date) -> str:
    """What a counter's basis adds when its expected use reaches the limit on a past night not yet logged: its forecast
    is then today (``_clamp``), and it would read "forecast <today>" day after day without saying why (a year's
    review). "" when the expected day is today or later."""
    if expected_on is None or expected_on >= today:
        return ""
    return (f"; at the expected rate the limit was reached on the night of {expected_on:%d %b %Y}, not logged yet: "
            "due today until the nights since the last logged one are logged")


def _before_the_log(baseline: dt.date, log_begins: dt.date | None) -> str:
    """What a counter's basis says when its plan counts from before the first logged night: those nights count no use
    (nothing says what they were), so its value is only what the log holds. "" when the log covers the baseline."""
    if log_begins is None or baseline >= log_begins:
        return ""
    nights = (log_begins - baseline).days
    return (f"; the log begins on {log_begins:%d %b %Y}: the {nights} night{'s' if nights != 1 else ''} from "
            f"{baseline:%d %b %Y} before it count no use (log them, or a counting date, for a truer value)")


#: The ``PlanStatus`` fields, in the order of the rows ``_site_recompute`` builds.
STATUS_COLUMNS = (
    "plan", "site", "status", "urgency", "metric", "value", "limit", "unit", "rate_per_day", "forecast_date",
    "earliest", "latest", "last_service_on", "last_service_unknown", "reason", "basis", "triggers", "computed_at",
    "unlogged_nights", "reached_unlogged_on",
)


def _insert_all(model, names: tuple[str, ...], rows: list[tuple]) -> None:
    """Insert rows of plain values (foreign keys as ids) into ``model``'s ``names`` fields in one statement.

    One round of SQL however many plans a site has: ``bulk_create`` would split the rows into batches
    bounded by the database's parameter limit (55 rows a statement on SQLite for PlanStatus), and would
    need a model instance per row. On PostgreSQL the rows go in one ``COPY``; elsewhere in one
    ``executemany``. Values are written as both databases read them: dates in ISO form, JSON as text,
    a date-time through Django's own conversion, the rest as they are. Nothing of ``pre_save`` runs, so
    the rows must carry every value (``auto_now`` fields included).
    """
    if not rows:
        return
    fields = [model._meta.get_field(name) for name in names]
    db = transaction.get_connection()  # itself, not the ``connection`` proxy: a thread-local lookup per use
    convert = [_converter(f, db) for f in fields]
    if any(convert):
        rows = [[c(v) if c and v is not None else v for c, v in zip(convert, row, strict=True)] for row in rows]
    columns = ", ".join(db.ops.quote_name(f.column) for f in fields)
    # Table and column names come from the model and are quoted; every value is a bound parameter.
    table = db.ops.quote_name(model._meta.db_table)
    with db.cursor() as cursor:
        if db.vendor == "postgresql":
            with cursor.copy(f"COPY {table} ({columns}) FROM STDIN") as copy:
                for row in rows:
                    copy.write_row(row)
        else:
            marks = ", ".join(["%s"] * len(fields))
            sql = f"INSERT INTO {table} ({columns}) VALUES ({marks})"  # noqa: S608  # nosec B608
            cursor.executemany(sql, rows)


def _converter(field, db):
    """How ``_insert_all`` writes a value of ``field``, or None to write it as it is."""
    kind = field.get_internal_type()
    if kind == "DateField":
        return dt.date.isoformat
    if kind == "JSONField":
        return functools.partial(json.dumps, cls=field.encoder)
    if kind == "DateTimeField":

        @functools.lru_cache(maxsize=8)  # the rows of one recompute share one time: converted once
        def moment(value):
            return field.get_db_prep_save(value, db)

        return moment
    return None


def _unknown_last_service(state: TriggerState, counting_from: dt.date, today: dt.date) -> TriggerState:
    """A trigger of a plan whose last service is unknown: its figures as counted from the plan's start (a floor:
    the real figure since the last service can only be higher), due today unless its limit is already reached,
    and its basis saying so."""
    basis = (f"last service unknown ({UNKNOWN_LAST_SERVICE}); counted meanwhile from the plan's start on "
             f"{counting_from:%d %b %Y}: {state.basis}")
    if state.reached:
        return replace(state, basis=basis)
    return replace(state, forecast=today, earliest=today, latest=today, basis=basis)


def unknown_last_service_reason(reason: str, reached: bool, counting_from: dt.date) -> str:
    """The sentence of a plan whose last service is unknown: due now for a baseline service; or, when a limit is
    reached even counting from the plan's start, ``reason`` (the governing trigger's) and why it may be further
    past."""
    start = f"{counting_from:%d %b %Y}"
    if reached:
        return (f"{reason} Last service unknown, so counted from the plan's start on {start}: the true figure may be "
                f"higher ({UNKNOWN_LAST_SERVICE}).")
    return (f"Last service unknown ({UNKNOWN_LAST_SERVICE}): due now. Its triggers count from the plan's start on "
            f"{start} until a service is logged.")


def _clamp(day: dt.date | None, today: dt.date) -> dt.date | None:
    """A forecast that falls in unlogged past nights is due now, not in the past."""
    return None if day is None else max(day, today)


def _calendar_state(trig, baseline: dt.date, today: dt.date) -> TriggerState:
    # A limit stored before limits were bounded (``metrics.MAX_LIMIT``) may lie beyond any date: counted at the bound,
    # it is a century away instead of failing the whole site's recompute.
    bound = metrics.MAX_LIMIT[metrics.CALENDAR_DAYS][0]
    days = int(round(min(trig.limit, bound))) if math.isfinite(trig.limit) else int(bound)
    due = baseline + dt.timedelta(days=days)
    return TriggerState(
        metric=metrics.CALENDAR_DAYS,
        value=float((today - baseline).days),
        limit=trig.limit,
        rate_per_day=1.0,
        forecast=due,
        earliest=due,
        latest=due,
        basis=f"calendar: {trig.limit:g} days after {baseline:%d %b %Y}",
        unit="days",
    )


def _readings_by_subsystem_quantity(
    site: Site, plans, triggers_of, baselines
) -> dict[tuple[int, str], list[tuple[dt.datetime, float]]]:
    """Readings since the earliest baseline of the plans watching each (subsystem, quantity) a condition trigger
    watches; each plan keeps those since its own (``_site_recompute``'s ``readings_of``). Keyed by the last plan's
    baseline, a plan serviced earlier lost its own readings (a diff review)."""
    wanted: dict[tuple[int, str], dt.date] = {}
    for p in plans:
        for t in triggers_of[p.pk]:
            if t.metric == metrics.READING:
                key = (p.subsystem_id, t.quantity)
                wanted[key] = min(wanted.get(key, baselines[p.pk]), baselines[p.pk])
    if not wanted:
        return {}
    quantities = {q for _, q in wanted}
    # A baseline is a local date at the site (the day of the last service): a reading counts from that
    # day's local midnight on.
    zone = site.zone
    since = dt.datetime.combine(min(wanted.values()), dt.time(), tzinfo=zone)  # no reading before any baseline
    out: dict[tuple[int, str], list[tuple[dt.datetime, float]]] = {}
    for sub_id, quantity, taken_at, value in Reading.objects.filter(
        subsystem__telescope__site=site, quantity__in=quantities, taken_at__gte=since, withdrawn_at__isnull=True,
    ).order_by("taken_at").values_list("subsystem_id", "quantity", "taken_at", "value"):
        key = (sub_id, quantity)
        if key in wanted and taken_at.astimezone(zone).date() >= wanted[key]:
            out.setdefault(key, []).append((taken_at, value))
    return out


def _last_readings_before(site: Site, wanted: list[tuple[int, str, dt.date]]) -> dict[tuple[int, str, dt.date], tuple]:
    """The newest reading (moment, value) of each (subsystem, quantity, baseline day) of ``wanted`` taken before the
    baseline's local midnight: for a plan serviced since its last reading (``_unconfirmed_state``). Keyed by the
    baseline too: two plans watching one quantity from different services each get their own. One query a key, the
    newest row only (never the whole history), and only for plans with no reading since their service."""
    zone = site.zone
    out: dict[tuple[int, str, dt.date], tuple] = {}
    for key in dict.fromkeys(wanted):
        sub_id, quantity, day = key
        newest = (Reading.objects.filter(subsystem_id=sub_id, quantity=quantity, withdrawn_at__isnull=True,
                                         taken_at__lt=dt.datetime.combine(day, dt.time(), tzinfo=zone))
                  .order_by("-taken_at").values_list("taken_at", "value").first())
        if newest is not None:
            out[key] = newest
    return out


def _unconfirmed_state(trig, before: tuple[dt.datetime, float], serviced: dt.date, zone) -> TriggerState | None:
    """A condition trigger with no reading since its plan's last service (``serviced``), whose last reading before it
    (``before``: moment, value) had reached the limit: still reached, until a reading confirms that the service brought
    it back (a year's review logged the brake's service with no reading, and the 4.86 bar against 5 bar it had been
    overdue for was no longer said anywhere). None when that reading had not reached the limit. Measuring after the
    work is common practice, no published source."""
    taken_at, value = before
    rising = trig.direction == Trigger.Direction.ABOVE
    label, unit = QUANTITIES[trig.quantity]
    on = taken_at.astimezone(zone).date()
    state = TriggerState(
        metric=metrics.READING, value=value, limit=trig.limit, rate_per_day=None, forecast=on, earliest=on, latest=on,
        basis=(f"{label}: no reading since the last service ({serviced:%d %b %Y}), and the last one before it had "
               "reached the limit: measure it again to confirm the service brought it back"),
        rising=rising, unit=unit,
    )
    return state if state.reached else None


@dataclass(frozen=True)
class Downtime:
    """A telescope out of service on coming nights, for a recoat in hand (``mirrors.services.recoat_in_hand``: going
    ahead, some order of it not finished): its counters expect no use on ``first`` to ``last``, both counted
    (``recoat_downtime``: its planned days, as its work orders now stand). Also a mirror a stopped recoat left out
    (``mirrors_left_out``), a closure (``closure_downtime``), and the nights every telescope of a site is out, for the
    enclosure they share (``_all_out``), with its own ``out``. ``changed``: why the nights differ from
    the recoat's planned days ("" when they do not)."""

    first: dt.date
    last: dt.date
    what: str  # "the planned recoat of T70: Primary mirror"
    out: str = "the telescope is out of service"
    changed: str = ""
    late: bool = False  # its days as its orders are dated have passed, some of its work still to do
    mirror_out: bool = False  # its removal underway or finished, its reinstall not finished
    mirror_id: int | None = None  # the mirror a recoat renews: its own reflectance forecast does not step over it

    @property
    def nights(self) -> int:
        return (self.last - self.first).days + 1

    def basis(self, nights: int) -> str:
        """What a counter's basis says of it, ``nights`` of it from the forecast's first night on."""
        changed = f"; {self.changed}" if self.changed else ""
        return (f"; no use on the {nights} night{'s' if nights != 1 else ''} of {self.what} ({self.first:%d %b %Y} to "
                f"{self.last:%d %b %Y}{changed}): {self.out}")


def downtime_days(downtimes) -> set[dt.date]:
    """Every night of ``downtimes`` (each with ``first`` and ``last``, both counted), each once."""
    return {d.first + dt.timedelta(days=i) for d in downtimes for i in range((d.last - d.first).days + 1)}


#: How a recoat's downtime is named, before its mirror (``recoat_downtime``); the enclosure's names its recoats so.
RECOAT_WHAT = "the planned recoat of "

#: The key of the downtimes of an enclosure all a site's telescopes share (``_all_out``), beside telescopes' ids.
ALL_OUT = "all telescopes"


def phase_lengths(plan) -> dict[str, dt.timedelta]:
    """How long after its first day each phase of a recoat plan (``mirrors.RecoatPlan``) ends, as planned, by the work
    its order does (``WorkOrder.recoat_phase``: "removal", ...): an order re-dated keeps its phase's days. A phase
    stored without readable dates is left out (the admin edits ``phases`` as JSON)."""
    from observatory_ops.calc.windows import RECOAT_PHASES  # the phases' names, by the work their orders do

    work_of = {p.name: p.work for p in RECOAT_PHASES if p.work}
    lengths = {}
    for phase in plan.phases if isinstance(plan.phases, list) else []:
        try:
            span = dt.date.fromisoformat(phase["last"]) - dt.date.fromisoformat(phase["first"])
        except (KeyError, TypeError, ValueError):
            continue
        if phase.get("name") in work_of:
            lengths[work_of[phase["name"]]] = max(span, dt.timedelta(0))
    return lengths


def recoat_downtime(plan, today: dt.date) -> Downtime:
    """The nights a recoat in hand (a ``mirrors.RecoatPlan`` with its ``work_orders`` and mirror's telescope read)
    takes its telescope out of service, as its work orders now stand (a year's review: a recoat re-dated or running
    late kept its planned days in the forecasts, and its telescope counted in service once they had passed):

    - from the first day of its work: the earliest day any of its orders (not withdrawn) is planned for or was
      started on, or its planned first day ``starts_on`` when none is dated (put off or brought forward by re-dating
      its orders, begun or not);
    - to the last day of its work still to do: each order still to do, its planned date and its phase's planned
      length (``plan.phases``); where one of them has no date, at least the recoat's planned length from its first
      day;
    - its mirror coming or come out (its removal underway or finished, its reinstall not finished) and those days
      passed: up to ``today``; from the next night on the forecasts expect use again, until the orders still to do
      are given their new days.

    One rule for the forecasts (``_downtime_by_telescope``), the dashboard and the booked runs it warns of
    (``recoats_in_hand``, ``mirrors.services.runs_over_recoats``). A phase stored without readable dates counts 0
    days (the admin edits ``phases`` as JSON).
    """
    from observatory_ops.workorders.models import State  # work orders build on planning

    orders = [o for o in plan.work_orders.all() if o.state != State.WITHDRAWN]
    to_do = [o for o in orders if o.state in (State.DRAFT, State.ISSUED, State.UNDERWAY)]
    length = phase_lengths(plan)
    zone = plan.mirror.subsystem.telescope.site.zone
    removal = plan.removal()
    begun_on = [o.started_at.astimezone(zone).date() for o in orders if o.started_at]
    if plan.continues_from is not None:  # going on from an earlier recoat's removal: out since its work was done
        from observatory_ops.workorders.selectors import recoat_began_on  # work orders build on planning

        begun_on.append(recoat_began_on(plan))
    dated = [o.planned_date for o in orders if o.planned_date] + begun_on
    first = min(dated) if dated else plan.starts_on
    ends = [o.planned_date + length.get(o.recoat_phase, dt.timedelta(0)) for o in to_do if o.planned_date]
    if any(o.planned_date is None for o in to_do) or not ends:
        ends.append(first + (plan.ends_on - plan.starts_on))
    last = max(ends)
    changed = []
    if plan.continues_from is not None:
        changed.append(f"out since {first:%d %b %Y}, the mirror removed by {plan.continues_from.number} for an earlier "
                       f"recoat, its work planned {plan.starts_on:%d %b %Y} to {plan.ends_on:%d %b %Y}")
    elif (first, last) != (plan.starts_on, plan.ends_on):
        changed.append(f"planned {plan.starts_on:%d %b %Y} to {plan.ends_on:%d %b %Y}, now as its work orders are "
                       "dated")
    reinstalled = any(o.recoat_phase == "reinstall" and o.state in (State.FINISHED, State.COUNTERSIGNED)
                      for o in orders)
    mirror_out = removal is not None and removal.state in (State.UNDERWAY, State.FINISHED, State.COUNTERSIGNED) and (
        not reinstalled)
    late = last < today
    if mirror_out and late:
        reinstall = next((o for o in to_do if o.recoat_phase == "reinstall"), None)
        said = (f"its reinstall {reinstall.number} planned for {reinstall.planned_date:%d %b %Y} is late"
                if reinstall is not None and reinstall.planned_date else "no day is set for its reinstall")
        coming = "is out" if removal.state != State.UNDERWAY else f"is coming out ({removal.number} underway)"
        changed.append(f"its mirror {coming} and {said}: out of service up to today")
        last = today
    telescope = plan.mirror.subsystem.telescope.name
    return Downtime(first, max(first, last), f"{RECOAT_WHAT}{telescope}: {plan.mirror.subsystem.name}",
                    changed="; ".join(changed), late=late, mirror_out=mirror_out, mirror_id=plan.mirror_id)


def recoats_in_hand(site: Site, today: dt.date) -> list:
    """The site's recoats in hand: an order of each drafted, issued or underway and none withdrawn (a withdrawn one
    stops the recoat), or one entered in the admin with no orders whose planned last day is not past, with their
    orders and their mirror's telescope and site, soonest first. One list for the forecasts, the dashboard's
    "Downtime planned", the booked runs over a recoat and the planner (the dashboard once counted a recoat without
    orders that the forecasts did not). A retired mirror's recoat is not done, so takes no telescope out
    (``mirrors.services.recoats_of_retired``). One plain query of each recoat's order states first, on every
    recompute's path, and two more only when some recoat is in hand (the benchmark's recompute spent 6 ms a site on
    one query with the rows and their relations, where none was in hand)."""
    from observatory_ops.mirrors.models import RecoatPlan  # mirrors builds on planning
    from observatory_ops.workorders.models import State  # work orders build on planning

    states: dict[int, set] = {}
    ends: dict[int, dt.date] = {}
    for pk, ends_on, state in RecoatPlan.objects.filter(mirror__subsystem__telescope__site=site,
                                                        mirror__subsystem__retired_on__isnull=True).values_list(
            "pk", "ends_on", "work_orders__state"):
        states.setdefault(pk, set()).add(state)
        ends[pk] = ends_on
    to_do = {State.DRAFT, State.ISSUED, State.UNDERWAY}
    in_hand = [pk for pk, held in states.items()
               if (held & to_do and State.WITHDRAWN not in held) or (held == {None} and ends[pk] >= today)]
    if not in_hand:
        return []
    return list(
        RecoatPlan.objects.filter(pk__in=in_hand).select_related("mirror__subsystem__telescope__site", "continues_from")
        .prefetch_related("work_orders").order_by("starts_on", "pk")
    )


def closures_of(site) -> list:
    """The closures of ``site`` (a Site or its id; ``planning.models.Closure``), with their telescopes: read once a
    recompute, for its logs (``UsageLog.of_site``) and its downtimes (``_downtime_by_telescope``)."""
    from .models import Closure

    return list(Closure.objects.filter(site=site).select_related("telescope"))


def _downtime_by_telescope(site: Site, today: dt.date, closures: list | None = None) -> dict[int, list[Downtime]]:
    """The site's telescopes out of service for a recoat in hand (``recoats_in_hand``) or closed (``Closure``: its
    own, or the whole site's), each with its downtimes (``recoat_downtime``: its days as its orders now stand;
    ``closure_downtime``), past days too (unlogged nights are counted from the first of them, ``without_downtime``).
    ``closures``: the site's (``closures_of``), where the caller has read them already."""
    down: dict[int, list[Downtime]] = {}
    in_hand = recoats_in_hand(site, today)
    for plan in in_hand:
        down.setdefault(plan.mirror.subsystem.telescope_id, []).append(recoat_downtime(plan, today))
    for out in mirrors_left_out(site, today, in_hand):
        down.setdefault(out.telescope_id, []).append(out.downtime)
    if closures is None:
        closures = closures_of(site)
    every = list(site.telescopes.values_list("pk", flat=True)) if any(c.telescope_id is None for c in closures) else []
    for closure in closures:
        for telescope_id in [closure.telescope_id] if closure.telescope_id else every:
            down.setdefault(telescope_id, []).append(closure_downtime(closure))
    for downtimes in down.values():
        downtimes.sort(key=lambda d: d.first)
    return down


@dataclass(frozen=True)
class MirrorLeftOut:
    """A mirror a stopped recoat left out of its telescope (``mirror_id``: its subsystem), and the downtime it
    holds the telescope out for."""

    telescope_id: int
    mirror_id: int
    downtime: Downtime


def mirrors_left_out(site: Site, today: dt.date, in_hand: list) -> list[MirrorLeftOut]:
    """The site's mirrors out of their telescopes (``workorders.selectors.telescopes_out``) with no recoat of
    ``in_hand`` (``recoats_in_hand``) to put them back, each with its telescope's downtime from the day it came out up
    to ``today``, as a recoat running late with its mirror out (``recoat_downtime``): from the next night on the
    forecasts expect use again (a recoat stopped with its mirror out and not planned again counted no downtime: the
    forecasts took the telescope as observing; the last notes). The forecasts and the dashboard read it. One query
    where no removal was ever finished, two once one was."""
    from observatory_ops.workorders.selectors import came_out_on, telescopes_out  # work orders build on planning

    # A recoat entered in the admin with no orders has no reinstall to put the mirror back (a diff review's hid it).
    covered = {plan.mirror.subsystem_id for plan in in_hand if plan.work_orders.all()}
    left = []
    for out in telescopes_out([site]):
        if out.subsystem_id in covered:
            continue
        first = came_out_on(out.removal)
        changed = (f"its {out.kind} out since {first:%d %b %Y} (removed by {out.removal.number}) and no recoat in "
                   "hand to put it back: out of service up to today")
        downtime = Downtime(first, max(first, today), f"the stopped recoat of {out.telescope}: {out.mirror}",
                            changed=changed, mirror_out=True)
        left.append(MirrorLeftOut(out.telescope_id, out.subsystem_id, downtime))
    return left


def closure_downtime(closure) -> Downtime:
    """A closure (``planning.models.Closure``) as the forecasts take it: no use on its nights."""
    if closure.telescope_id is None:
        return Downtime(closure.first_night, closure.last_night, f"the closure of the whole site for {closure.reason}",
                        "nothing is observed")
    return Downtime(closure.first_night, closure.last_night,
                    f"the closure of {closure.telescope.name} for {closure.reason}", "the telescope does not observe")


def downtimes_of(site: Site, telescope_id: int, whole_site: bool, today: dt.date) -> list[Downtime]:
    """The downtimes a counter of ``telescope_id`` expects no use on, as the recompute takes them: its telescope's
    recoats in hand, or for an enclosure all the site's telescopes share (``whole_site``) the nights all are out."""
    down = _downtime_by_telescope(site, today)
    if whole_site:
        return _all_out(down, telescopes_observing(site)) if down else []
    return down.get(telescope_id, [])


def telescopes_observing(site: Site) -> list[int]:
    """The site's telescopes an enclosure they share opens for: not those with every subsystem retired
    (``registry.selectors.telescopes_taken_down``), which never observe again, so it is closed once the others are out
    (a review: a telescope taken down kept the enclosure counted open through the others' downtime)."""
    from observatory_ops.registry.selectors import telescopes_taken_down  # the register's reads build on planning

    taken_down = telescopes_taken_down(site)
    return [pk for pk in site.telescopes.values_list("pk", flat=True) if pk not in taken_down]


def _all_out(downtime: dict[int, list[Downtime]], telescopes: list[int]) -> list[Downtime]:
    """The runs of nights on which every one of ``telescopes`` (the site's) is out (a recoat in hand, a closure), as
    downtimes of the enclosure they share: nobody opens it then. While one telescope is still in service, the
    enclosure opens for it and expects its use as before. Each run names what holds the telescopes out on it."""
    if not telescopes or any(t not in downtime for t in telescopes):
        return []
    out = None
    for telescope in telescopes:
        days = downtime_days(downtime[telescope])
        out = days if out is None else out & days
    spans: list[list[dt.date]] = []
    for day in sorted(out):
        if spans and spans[-1][1] == day - dt.timedelta(days=1):
            spans[-1][1] = day
        else:
            spans.append([day, day])
    runs: list[Downtime] = []
    for first, last in spans:
        held = [d.what for t in telescopes for d in downtime[t] if d.first <= last and first <= d.last]
        recoats = sorted({what.removeprefix(RECOAT_WHAT) for what in held if what.startswith(RECOAT_WHAT)})
        named = [f"{RECOAT_WHAT.replace('recoat', 'recoats') if len(recoats) > 1 else RECOAT_WHAT}"
                 f"{' and '.join(recoats)}"] if recoats else []
        named += sorted({what for what in held if not what.startswith(RECOAT_WHAT)})
        runs.append(Downtime(first, last, " and ".join(named), "every telescope of the site is out of service, so "
                                                               "the enclosure they share is not opened"))
    return runs


def without_downtime(expected: np.ndarray, first_day: dt.date, downtimes: list[Downtime]) -> tuple[np.ndarray, str]:
    """``expected`` (a counter's use per night from ``first_day`` on) with the nights of ``downtimes`` set to 0, and
    what its basis says of them."""
    expected, said = expected.copy(), ""
    out = np.zeros(len(expected), dtype=bool)
    named = 0
    for down in downtimes:
        start = max((down.first - first_day).days, 0)
        stop = min((down.last - first_day).days + 1, len(expected))
        if stop > start:
            out[start:stop] = True
            named += stop - start
            said += down.basis(stop - start)
    expected[out] = 0.0
    if named > int(out.sum()):  # downtimes overlapping (an overhaul through a shutdown): their nights once each
        said += f"; {int(out.sum())} nights out in all, those named above counted once each"
    return expected, said


def _mirrors_by_subsystem(site: Site) -> dict:
    """The site's mirrors by subsystem id, with their coatings, measurements and cleanings (all that
    ``mirror_forecast`` reads when given the day, the log and the usage model), in four queries."""
    from observatory_ops.mirrors.models import Mirror  # mirrors builds on planning

    mirrors = Mirror.objects.filter(subsystem__telescope__site=site).prefetch_related(
        "coatings", "measurements", "cleanings"
    )
    return {m.subsystem_id: m for m in mirrors}


def _recoat_line_state(mirror, today: dt.date, log: UsageLog, model: UsageModel,
                       downtimes: list[Downtime]) -> TriggerState | None:
    """A mirror's band reflectance now reaching its recoat line (see mirrors.services): the fit's estimate, or
    until there is a fit the last measurement or the computed fresh value, worded as the mirror page words them
    (``mirrors.services.reflectance_now``)."""
    from observatory_ops.mirrors.services import mirror_forecast, reflectance_now  # mirrors builds on planning

    if mirror is None:  # no mirror record yet (``selectors.not_computed_reason`` says so)
        return None
    state = mirror_forecast(mirror, today, log, model, downtimes)
    now = reflectance_now(state)
    if state.threshold is None or now.now is None:
        return None
    return TriggerState(
        metric=metrics.RECOAT_LINE,
        value=now.now,
        limit=state.threshold,
        rate_per_day=None,
        forecast=state.crossing,
        earliest=state.crossing_earliest,
        latest=state.crossing_latest,
        basis=f"band reflectance now: {now.basis}; recoat line {state.threshold_basis}",
        rising=False,
    )


#: A newest reading far on the good side of its trend is named only where the trend reaches the limit within a year of
#: it: where the forecast is near, the sentence matters, and noise alone on a flat line then names it in under 1 % of
#: series (calc.trend.newest_off_the_line; our own figure, common practice, no published source).
STEP_SAID_WITHIN_DAYS = 365


def reading_trend_fit(
    readings: list[tuple[dt.datetime, float]], limit: float, rising: bool
) -> tuple[trend.Trend | None, dt.datetime, str]:
    """The Theil-Sen trend a condition trigger forecasts from: fitted to the newest ``TREND_READINGS`` of
    ``readings`` (moment, value; oldest first, all since the trigger's baseline), in days from the first of them.
    Returns the fit (None with fewer than ``trend.MIN_READINGS``, all on one day, or readings that cannot be
    fitted), that first moment, and why they could not be fitted ("" otherwise). The recompute's due state and
    the subsystem page's trend line both come from here, and their dates from ``trend_date``."""
    newest = readings[-TREND_READINGS:]
    origin = newest[0][0]
    days = [(moment - origin).total_seconds() / 86400 for moment, _ in newest]
    if len(newest) < trend.MIN_READINGS or max(days) <= min(days):
        return None, origin, ""
    try:
        return trend.trend_to_limit(days, [value for _, value in newest], limit, rising), origin, ""
    except ValueError as exc:  # readings that cannot be fitted: shown, and no forecast from them
        return None, origin, str(exc)


def trend_date(origin: dt.datetime, offset_days: float | None, zone) -> dt.date | None:
    """The site's local date (``zone``, from ``Site.time_zone``) of the moment ``offset_days`` after ``origin``:
    the day a trend of ``reading_trend_fit`` reaches its limit, or an end of its band. Local, not UTC: an evening
    west of Greenwich is already the next day in UTC. None without an offset, or one so far out (past ten forecast
    horizons) that no date is meant. The due state's dates and the subsystem chart's mark of the crossing both
    come from here."""
    if offset_days is None or not np.isfinite(offset_days) or offset_days > 10 * HORIZON_DAYS:
        return None
    return (origin + dt.timedelta(days=float(offset_days))).astimezone(zone).date()


def _reading_state(trig, readings, today: dt.date, zone, since: str) -> TriggerState | None:
    """A condition trigger: latest reading against the limit, with the Theil-Sen trend's crossing date.

    ``readings`` are all since the baseline, oldest first; the trend uses the newest ``TREND_READINGS``.
    ``since`` names the baseline for the sentence ("the last service (22 May 2026)"), so the count it gives
    can be told from the readings listed and drawn, which include older ones.
    """
    if not readings:
        return None
    newest = readings[-TREND_READINGS:]
    counted = (f"{len(readings)} reading{'' if len(readings) == 1 else 's'}" if newest == readings
               else f"the newest {len(newest)} of {len(readings)} readings")
    counted += f" since {since}"
    readings = newest
    rising = trig.direction == Trigger.Direction.ABOVE
    label, unit = QUANTITIES[trig.quantity]
    fit, origin, problem = reading_trend_fit(readings, trig.limit, rising)
    no_fit = f"{counted}, no trend ({problem})" if problem else f"{counted}, too few for a trend"

    def day(offset: float | None) -> dt.date | None:
        on = trend_date(origin, offset, zone)
        return None if on is None else max(on, today)

    # The line's intercept too, where it starts: an onboarding review could rebuild the date only by guessing it.
    basis = (
        f"Theil-Sen trend of {counted}: {significant(fit.slope_per_day, signed=True)} {unit}/day "
        f"(95 % interval {significant(fit.slope_low, signed=True)} to {significant(fit.slope_high, signed=True)}), "
        f"the line at {significant(fit.intercept)} {unit} on {origin.astimezone(zone):%d %b %Y %H:%M} (site time, "
        f"{zone.key if hasattr(zone, 'key') else zone}), the first of "
        "them (the line through the median reading at the median of their days since)"
        if fit
        else no_fit
    )
    if fit and (off := trend.newest_off_the_line(
            [(m - origin).total_seconds() / 86400 for m, _ in readings], [v for _, v in readings], trig.limit, rising,
            within_days=STEP_SAID_WITHIN_DAYS)):
        # A forecast review adjusted a drive without logging it: the newest reading fell far under the limit, and the
        # trend still forecast the limit soon from the readings before, with nothing said.
        moment, value = readings[-1]
        basis += (f". The newest reading ({figure_text(metrics.READING, unit, value)} {unit}, "
                  f"{moment.astimezone(zone):%d %b %Y}) lies far {'under' if rising else 'over'} the line of the "
                  f"readings before it ({significant(off.expected)} {unit} on its day, {off.spreads:.0f} times their "
                  "robust spread): if the unit was adjusted, cleaned or repaired without a service logged, log that "
                  "service, and the trend starts again from it")
    state = TriggerState(
        metric=metrics.READING,
        value=readings[-1][1],
        limit=trig.limit,
        rate_per_day=fit.slope_per_day if fit else None,
        forecast=day(fit.crossing_day) if fit else None,
        earliest=day(fit.earliest_day) if fit else None,
        latest=day(fit.latest_day) if fit else None,
        basis=f"{label}: {basis}",
        rising=rising,
        unit=unit,
    )
    if state.reached:  # reached on the day of the first of the newest readings that are all past the limit
        first = len(readings) - 1
        while first > 0 and replace(state, value=readings[first - 1][1]).reached:
            first -= 1
        on = readings[first][0].astimezone(zone).date()
        state = replace(state, forecast=on, earliest=on, latest=on)
    return state


def band_start(first: dt.date, last: dt.date) -> str:
    """The first date of a forecast band as a sentence words it: its year left to the last date when they
    share it ("29 Dec 2026 and 29 Jan 2027", "03 Feb and 19 Feb 2027")."""
    return f"{first:%d %b}" if first.year == last.year else f"{first:%d %b %Y}"


def reason_text(state: TriggerState) -> str:
    """One sentence that says why a plan is where it is: trigger, value, limit, rate and forecast."""
    label = metrics.METRICS[state.metric][0]
    unit = state.unit
    if state.metric == metrics.READING:
        # Reached at the limit itself (calc.triggers.TriggerState.reached), so "at most 1 s" would not say it: a year's
        # review read "1 s against a limit of at most 1 s; past the limit".
        side = "above" if state.rising else "below"
        value, limit = (figure_text(metrics.READING, unit, figure) for figure in (state.value, state.limit))
        head = (f"Latest reading {value} {unit} against a limit of {limit} {unit} (reached at {limit} {unit} or "
                f"{side}); {state.basis}")
    elif state.metric == metrics.RECOAT_LINE:
        head = f"Reflectance now about {reflectance_text(state.value)}, recoat line {reflectance_text(state.limit)}"
    else:
        head = f"{label}: {state.value:,.0f} of {state.limit:,.0f} {unit}"
        if state.unlogged_nights and state.unlogged_from:
            # The value is the logged nights'; the forecast counts the rest as used (a review read "0 of 400 h,
            # forecast in 12 days" on a log 70 nights behind, and took the figure for the one the date came from).
            head += (f" logged; {state.unlogged_nights} nights from {state.unlogged_from:%d %b %Y} on, not logged, "
                     "are counted at the expected rate")
        if state.rate_per_day is not None and state.metric != metrics.CALENDAR_DAYS:
            head += (f", about {rate_text(state.rate_per_day)} {metrics.rate_unit(state.metric, unit)} per day "
                     "expected over the next 30 days")
        if state.steps_over and not state.reached:
            head += f", none on the nights of {state.steps_over}"
    if state.reached and state.metric == metrics.READING and state.forecast:
        # The day of the first reading past the limit (``_reading_state``), not where the trend crosses it.
        return f"{head}; limit reached since the reading of {state.forecast:%d %b %Y}."
    if state.reached and state.metric == metrics.CALENDAR_DAYS and state.value == round(state.limit):
        # Due on its day, overdue from the next (calc.triggers.due_status): "limit reached" beside "due" read as late.
        return f"{head}; due today, {state.forecast:%d %b %Y}: overdue from tomorrow."
    if state.reached:
        return f"{head}; limit reached{f' on {state.forecast:%d %b %Y}' if state.forecast else ''}."
    if state.forecast is None:
        return f"{head}; not reached within {HORIZON_DAYS // 366} years at the expected rate."
    when = f"; forecast {state.forecast:%d %b %Y}"
    if state.earliest and state.latest and state.earliest != state.latest:
        when += f" (between {band_start(state.earliest, state.latest)} and {state.latest:%d %b %Y})"
    elif state.earliest and not state.latest:
        when += f" (from {state.earliest:%d %b %Y}; the slow case runs past the horizon)"
    return head + when + "."


def _state_json(state: TriggerState) -> dict:
    # Stored as computed, like the governing trigger's columns: the pages round a figure once, when they write it
    # (a rate of 0.00051 rounded here to 0.0005 read "+0.000500" beside a basis of "+0.000510").
    rate = None if state.rate_per_day is None else float(state.rate_per_day)
    return trigger_figures(
        state.metric, float(state.value), state.limit, state.unit, rate, state.forecast, state.earliest, state.latest,
        state.basis,
    )
