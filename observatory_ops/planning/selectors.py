"""Reads of the planning app for pages, commands and the API."""
from __future__ import annotations

import datetime as dt

import numpy as np
from django.conf import settings
from django.db.models import Count, Prefetch, Q, QuerySet

from observatory_ops.calc import exposure, forecast
from observatory_ops.calc.triggers import OVERDUE, STATUSES
from observatory_ops.logbook.models import ServiceRecord
from observatory_ops.logbook.quantities import (
    QUANTITIES,
    REFLECTANCE_DECIMALS,
    reflectance_text,
    significant,
    unit_of,
)
from observatory_ops.registry.catalogue import COMMON_PRACTICE, KINDS
from observatory_ops.registry.models import Site, Subsystem, is_shared_enclosure

from . import metrics, plots
from .models import (
    UNKNOWN_PROGRESS,
    NightSky,
    PlanStatus,
    ServicePlan,
    Trigger,
    figure_text,
    mirror_kinds_text,
    takes_no_mirror,
)

#: The catalogue's default limit of each quantity a condition trigger of its plans watches (registry.catalogue).
CATALOGUE_READING_LIMITS: dict[str, float] = {
    trigger[2]: trigger[1]
    for kind in KINDS.values() for template in kind.plans for trigger in template.triggers
    if trigger[0] == metrics.READING
}
#: Where each of those defaults comes from (the catalogue words it inside its plans' ``basis``) and whose own
#: figure should replace it.
DEFAULT_LIMIT_SOURCES: dict[str, tuple[str, str]] = {
    "settle_time_s": (COMMON_PRACTICE, "mount"),  # calc.trend.SETTLE_TIME_LIMIT_S
}


#: The due list's order, most urgent first, ties by telescope and plan: the page's status sort, the CSV and the API.
DUE_ORDER = ("urgency", "forecast_date", "plan__subsystem__telescope__name", "plan_id")


def due_rows() -> QuerySet[PlanStatus]:
    """Every computed plan state with what a due-list row shows, in one query, most urgent first."""
    return PlanStatus.objects.select_related("plan__subsystem__telescope__site").order_by(*DUE_ORDER)


def due_for_site(site: Site) -> QuerySet[PlanStatus]:
    """Overdue and due items at a site, most urgent first."""
    return due_rows().filter(site=site).exclude(status="later")


def status_counts(site: Site) -> dict[str, int]:
    return status_counts_by_site([site])[site.pk]


def status_counts_by_site(sites: list[Site]) -> dict[int, dict[str, int]]:
    """Each site's number of plans in each status, from the stored states, by site id: one query for all of them."""
    counts = {site.pk: dict.fromkeys(STATUSES, 0) for site in sites}
    for site_id, status, n in (
        PlanStatus.objects.filter(site__in=list(counts)).order_by().values_list("site", "status")
        .annotate(n=Count("pk"))
    ):
        counts[site_id][status] = n
    return counts


def recent_service(site: Site) -> QuerySet[ServiceRecord]:
    return ServiceRecord.objects.filter(subsystem__telescope__site=site).select_related(
        "subsystem", "plan", "performed_by"
    )


def plans_with_status(subsystem: Subsystem) -> QuerySet[ServicePlan]:
    return (
        ServicePlan.objects.filter(subsystem=subsystem)
        .select_related("status")
        .prefetch_related(Prefetch("triggers", queryset=Trigger.objects.order_by("metric")))
        .order_by("-active", "name")
    )


#: Why a counted plan has no due state (``not_computed_reason``), as the pages and the plan's admin say it.
NO_TRIGGER = "no trigger: add one in the admin (Service plans)"
NOT_RECOMPUTED = "not computed yet: the site has not been recomputed since the plan was saved"


def not_computed_reason(plan: ServicePlan) -> str | None:
    """Why ``plan`` has no due state, when it is counted (active, its subsystem in service) and has none: it is then
    missing from the due list and the site's counts, so the subsystem page, the dashboard (``plans_not_computed``) and
    the plan's admin say why and what to do. None for a plan with a state, or one not counted.

    The recompute (``services._site_recompute``) stores a state from the triggers that give figures, so a plan gets
    none when it has no trigger (``NO_TRIGGER``) or none of its triggers can be judged (``_trigger_not_judged``);
    otherwise its site was not recomputed since it was saved (``NOT_RECOMPUTED``).
    """
    if not plan.active or plan.subsystem.retired_on is not None or getattr(plan, "status", None) is not None:
        return None
    triggers = list(plan.triggers.all())
    if not triggers:
        return NO_TRIGGER
    unjudged = [_trigger_not_judged(plan, trigger) for trigger in triggers]
    if None in unjudged:
        return NOT_RECOMPUTED
    unjudged = list(dict.fromkeys(unjudged))  # two alike are said once
    if len(triggers) == 1:
        return "its only trigger {} and {}".format(*unjudged[0])
    if len(unjudged) == 1:
        return "each of its triggers {} and {}".format(*unjudged[0])
    return "none of its triggers can be judged: " + "; ".join(f"one {what} and {why}" for what, why in unjudged)


def _trigger_not_judged(plan: ServicePlan, trigger: Trigger) -> tuple[str, str] | None:
    """(what the trigger reads, why it gives no figures and what to do) for a trigger the recompute can give no
    figures yet: one on the mirror's reflectance without a mirror record (``services._recoat_line_state``; refused in
    the admin where the subsystem cannot have one, ``Trigger.clean``) or its coating (``mirrors.services
    .mirror_forecast``: no fresh value), one on a reading with none since the plan's baseline, its last service or its
    start (``services._reading_state``). None for a trigger that gives figures: every other metric always does."""
    from .services import effective_last_service

    subsystem = plan.subsystem
    if trigger.metric == metrics.RECOAT_LINE:
        what = "reads the mirror's reflectance"
        mirror = getattr(subsystem, "mirror", None)
        if mirror is None and takes_no_mirror(subsystem):
            return what, (f"a subsystem of the kind {subsystem.kind_label} has no mirror record (only a "
                          f"{mirror_kinds_text()} subsystem does): replace the trigger in the admin (Service plans) "
                          "with one this subsystem can count")
        if mirror is None:
            return what, "this subsystem has no mirror record: add the mirror and its coating in the admin (Mirrors)"
        if not mirror.coatings.exists():
            return what, "its mirror has no coating recorded: add the coating in the admin (Mirrors)"
        return None
    if trigger.metric != metrics.READING or trigger.quantity not in QUANTITIES:
        return None
    served = effective_last_service(plan=plan).get(plan.pk)
    baseline = served or plan.counting_from
    zone = subsystem.telescope.site.zone
    if subsystem.readings.filter(quantity=trigger.quantity, withdrawn_at__isnull=True,
                                 taken_at__gte=dt.datetime.combine(baseline, dt.time(), tzinfo=zone)).exists():
        return None
    since = "the last service" if served else "the plan's start"
    return (f"watches readings of {_mid_sentence(QUANTITIES[trigger.quantity][0])}",
            f"none is logged since {since} ({baseline:%d %b %Y}): log one (Log a reading, on the subsystem's page)")


def plans_not_computed(site: Site) -> list[ServicePlan]:
    """The site's counted plans (active, their subsystem in service) that have no due state, each with
    ``not_computed``: why (``not_computed_reason``). The dashboard names them: the due list and the counts leave
    them out."""
    plans = list(
        ServicePlan.objects.filter(
            subsystem__telescope__site=site, active=True, subsystem__retired_on__isnull=True, status__isnull=True
        ).select_related("subsystem__telescope__site", "status").prefetch_related("triggers")
    )
    for plan in plans:
        plan.not_computed = not_computed_reason(plan)
    return plans


def not_computed_counts(sites: list[Site] | None = None) -> list[tuple[Site, int]]:
    """For the due list, which cannot show them: how many counted plans of each site (of ``sites``; every site when
    None) have no due state, in two queries whatever the number of sites; the dashboard says which and why
    (``plans_not_computed``)."""
    plans = ServicePlan.objects.filter(active=True, subsystem__retired_on__isnull=True, status__isnull=True)
    if sites is not None:
        plans = plans.filter(subsystem__telescope__site__in=sites)
    counts = dict(plans.values_list("subsystem__telescope__site").annotate(n=Count("pk")).values_list(
        "subsystem__telescope__site", "n"))
    return [(site, counts[site.pk]) for site in Site.objects.filter(pk__in=counts).order_by("name")] if counts else []


def _mid_sentence(label: str) -> str:
    """A quantity's label inside a sentence: "Motor current" reads "motor current"; "RMS following error" stays."""
    return label if label[:2].isupper() else label[:1].lower() + label[1:]


def forecast_quantities(subsystem: Subsystem) -> set[str]:
    """The reading quantities that move a forecast of the subsystem: those its active plans' condition triggers
    watch, and reflectance for a mirror (its readings join the decline fit behind the recoat line)."""
    plans = ServicePlan.objects.filter(subsystem=subsystem, active=True)
    watched = set(Trigger.objects.filter(plan__in=plans, metric=metrics.READING).values_list("quantity", flat=True))
    if hasattr(subsystem, "mirror"):
        watched.add("reflectance")
    return watched


def watched_quantities(subsystem: Subsystem) -> set[str]:
    """The reading quantities that move a forecast of the subsystem (``forecast_quantities``) and those its
    active plans ask for on their work orders: what a reading of it is most likely to be."""
    plans = ServicePlan.objects.filter(subsystem=subsystem, active=True)
    asked = {entry["quantity"] for readings in plans.values_list("readings", flat=True) for entry in readings}
    return forecast_quantities(subsystem) | asked


def reading_limits(subsystem: Subsystem) -> dict[str, list[float]]:
    """The limits of the subsystem's active reading triggers that a reading rises to, by quantity: what a reading typed
    in another unit is compared with (``logbook.forms.ReadingForm``)."""
    limits: dict[str, list[float]] = {}
    for quantity, limit in Trigger.objects.filter(
        plan__subsystem=subsystem, plan__active=True, metric=metrics.READING, direction=Trigger.Direction.ABOVE,
    ).values_list("quantity", "limit"):
        limits.setdefault(quantity, []).append(limit)
    return limits


def unwatched_reading_note(subsystem: Subsystem, quantity: str) -> str | None:
    """What to tell whoever logs a reading that no service plan of the subsystem watches; None when one does.

    Such a reading is kept (any quantity may be logged on any subsystem), but a wrong pick should be noticed.
    """
    if quantity in forecast_quantities(subsystem):
        return None
    label = _mid_sentence(QUANTITIES[quantity][0])
    return (f"No condition trigger of {subsystem.name}'s service plans watches {label}: this reading is stored "
            "with its history, but it moves no forecast.")


def reading_before_counting_note(subsystem: Subsystem, quantity: str, day: dt.date) -> str | None:
    """What to tell whoever logs a reading of ``quantity`` dated ``day`` (the site's local date) that comes before
    the day the subsystem's plans watching it count from: their last service, or their start while none is logged.
    Such a reading is kept but judges nothing (``services._readings_by_subsystem_quantity``). None when every plan
    watching the quantity counts it, or none watches it (``unwatched_reading_note`` says so)."""
    from .services import effective_last_service

    plans = list(ServicePlan.objects.filter(
        subsystem=subsystem, active=True, triggers__metric=metrics.READING, triggers__quantity=quantity
    ).distinct().order_by("name"))
    last_service = effective_last_service(plan__in=plans)
    serviced = [(p.name, last_service[p.pk]) for p in plans if p.pk in last_service and day < last_service[p.pk]]
    unserviced = [(p.name, p.counting_from) for p in plans if p.pk not in last_service and day < p.counting_from]
    notes = []
    if unserviced:
        names = " and ".join(f"{name} ({start:%d %b %Y})" for name, start in unserviced)
        notes.append(
            f"This reading of {day:%d %b %Y} is before the start of {names}, with no service of "
            f"{'it' if len(unserviced) == 1 else 'them'} logged, so it judges nothing yet. Entering past readings? "
            "Log the last service first (Log service for this plan, dated when it was done): the plan then counts "
            "from it, and the readings after it count."
        )
    if serviced:
        names = " and ".join(f"{name} ({on:%d %b %Y})" for name, on in serviced)
        notes.append(f"This reading of {day:%d %b %Y} is before the last service of {names}: a plan judges the "
                     "readings since its last service, so this one is kept in the history only.")
    return " ".join(notes) or None


def nights_before_unknown_starts_note(site: Site, nights: list[tuple[int | None, dt.date]]) -> str:
    """Why stored ``nights`` ((telescope id, or None for the whole site's; night)) move no counter of some plans: they
    are before the start of plans whose last service is unknown (no service record, counting date not given:
    ``ServicePlan.counting_from_given``), which count from their start until a service is logged. A telescope's night
    reaches its own telescope's plans; the whole site's reaches every telescope's. "" when no such plan with a usage
    trigger is reached."""
    from .services import effective_last_service

    if not nights:
        return ""
    owners = {telescope for telescope, _ in nights}
    reached = Q() if None in owners else Q(subsystem__telescope__in=owners)
    plans = list(ServicePlan.objects.filter(
        reached, subsystem__telescope__site=site, subsystem__retired_on__isnull=True, active=True,
        counting_from_given=False, counting_from__gt=min(night for _, night in nights),
        triggers__metric__in=[*metrics.USAGE_FIELDS, metrics.DUST_HOURS],
    ).select_related("subsystem").distinct())
    if not plans:
        return ""
    serviced = effective_last_service(plan__in=plans)
    unknown = [p for p in plans if p.pk not in serviced]
    # The latest start among the unknown plans each owner's nights reach: a night before it moves none of that plan.
    latest: dict[int | None, dt.date] = {}
    for plan in unknown:
        for owner in (None, plan.subsystem.telescope_id):
            latest[owner] = max(latest.get(owner, plan.counting_from), plan.counting_from)
    before = sum(1 for telescope, night in nights if night < latest.get(telescope, night))
    if not before:
        return ""
    first, last = min(p.counting_from for p in unknown), max(p.counting_from for p in unknown)
    when = f"{first:%d %b %Y}" if first == last else f"{first:%d %b %Y} to {last:%d %b %Y}"
    one, count = before == 1, len(unknown)
    return (
        f"{before} of these nights {'is' if one else 'are'} before the start ({when}) of {count} service "
        f"plan{'' if count == 1 else 's'} whose last service is unknown, so {'it moves' if one else 'they move'} none "
        "of their counters. Log each plan's last service (Log service for this plan, on its subsystem page): it then "
        "counts from that day, and the nights after it count."
    )


def _iso_utc(moment) -> str | None:
    return moment.astimezone(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ") if moment else None


def sky_records(site: Site, start: dt.date, end: dt.date) -> list[dict]:
    """Cached nights of a site as JSON-ready dicts (same keys as ``calc.nights.NightTable.to_records``)."""
    return [
        {
            "date": n.night.isoformat(),
            "sunset": _iso_utc(n.sunset),
            "sunrise": _iso_utc(n.sunrise),
            "dusk": _iso_utc(n.dusk),
            "dawn": _iso_utc(n.dawn),
            "dark_hours": round(n.dark_hours, 4),
            "moon_illumination": round(n.moon_illumination, 4),
            "moonless_dark_hours": round(n.moonless_dark_hours, 4),
        }
        for n in NightSky.objects.filter(site=site, night__gte=start, night__lte=end).order_by("night")
    ]


#: Decimals of the due list's value and limit for programs: those every reflectance is written to, the finest figure
#: the list holds, so a value and its limit are rounded alike and compare digit for digit.
DUE_RECORD_DECIMALS = REFLECTANCE_DECIMALS
#: Significant figures of the due list's rate for programs: a rate is small beside its value (a trend of +0.00204 s a
#: day, a reflectance falling by 0.00002 a day), so decimals would cut it short or round it to 0; 4, as a reading's
#: value is written (``models.figure_text``). People read a rate as ``rate_text`` writes it.
DUE_RECORD_RATE_FIGURES = 4
#: Significant figures of a rate per day wherever a person reads it (``rate_text``): 3, as a trend's slope is written
#: in its basis (``services._reading_state``).
RATE_FIGURES = 3


def rate_text(rate: float, signed: bool = False, grouped: bool = True) -> str:
    """A rate per day as every page, sentence and download for people writes it: the reason sentence, the subsystem
    page's trigger table, the mirror page, the expected use, the due list's CSV. Significant figures, not decimals, so
    a slow rate keeps its figures and a non-zero rate never reads "0.0" (0.004117 -> "0.00412", 5.216 -> "5.22",
    1234.5 -> "1,230"); ``signed`` puts "+" before a rising trend; ``grouped=False`` leaves out the thousands
    separators (a CSV cell a spreadsheet reads as a number)."""
    text = significant(rate, RATE_FIGURES, signed=signed)
    return text if grouped else text.replace(",", "")


def due_record(status: PlanStatus) -> dict:
    """One plan's due state as a JSON-ready dict: the one serialiser of ``due --json`` and the API's due list; README.md
    (Ingest API) lists its keys. ``page`` is the subsystem page's address, built as the due digest builds its links."""
    # The recompute keeps a recoat line's figures without a unit; they are a reflectance, a fraction as a reading is.
    unit = unit_of("reflectance") if status.metric == metrics.RECOAT_LINE else status.unit
    return {
        **_plan_keys(status.plan),
        "status": status.status,
        "trigger": status.metric,
        "value": round(status.value, DUE_RECORD_DECIMALS),
        "limit": round(status.limit, DUE_RECORD_DECIMALS),
        "unit": unit,
        "rate": None if status.rate_per_day is None else float(f"{status.rate_per_day:.{DUE_RECORD_RATE_FIGURES}g}"),
        "forecast_date": _iso(status.forecast_date),
        "earliest": _iso(status.earliest),
        "latest": _iso(status.latest),
        "last_service_on": _iso(status.last_service_on),
        "last_service_unknown": status.last_service_unknown,
        "unlogged_nights": status.unlogged_nights,
        "reached_unlogged_on": _iso(status.reached_unlogged_on),
        "computed_at": status.computed_at.astimezone(dt.UTC).isoformat(timespec="seconds"),
        "reason": status.reason,
    }


#: The status of a plan that has no due state (``not_computed_reason``) in ``due_records``: a program reading the
#: list sees it, where leaving it out would read as nothing due.
NOT_COMPUTED = "not_computed"


def _iso(day: dt.date | None) -> str | None:
    return day.isoformat() if day else None


def _plan_keys(plan: ServicePlan) -> dict:
    """The keys of a due record that name its plan, subsystem, telescope and site."""
    subsystem = plan.subsystem
    return {
        "site": subsystem.telescope.site.slug,
        "telescope": subsystem.telescope.name,
        "telescope_id": subsystem.telescope_id,
        "subsystem": f"{subsystem.telescope.name}: {subsystem.name}",
        "subsystem_id": subsystem.pk,
        "kind": subsystem.kind,
        "page": settings.SITE_URL + subsystem.get_absolute_url(),
        "plan": plan.name,
        "plan_id": plan.pk,
    }


def not_computed_record(plan: ServicePlan) -> dict:
    """A plan of ``plans_not_computed`` as a due record: its status ``NOT_COMPUTED``, no figures, and why (an API
    review: a brake check that could not be judged was missing from the list, as if nothing were due)."""
    return {
        **_plan_keys(plan), "status": NOT_COMPUTED, "trigger": None, "value": None, "limit": None, "unit": None,
        "rate": None, "forecast_date": None, "earliest": None, "latest": None, "last_service_on": None,
        "last_service_unknown": None, "unlogged_nights": 0, "reached_unlogged_on": None, "computed_at": None,
        "reason": f"Not computed, so left out of the site's counts: {plan.not_computed}.",
    }


def due_records(site: Site | None = None) -> list[dict]:
    """The due list as programs read it (the API and ``due --json``): every computed plan's ``due_record``, most
    urgent first, then every plan that cannot be computed yet (``not_computed_record``); of one site, or of all."""
    rows = due_rows() if site is None else due_rows().filter(site=site)
    sites = [site] if site is not None else list(Site.objects.order_by("name"))
    return [due_record(status) for status in rows] + [
        not_computed_record(plan) for each in sites for plan in plans_not_computed(each)]


#: Columns of the due list's CSV download, for people: names as the page shows them, dates in ISO form.
DUE_CSV_HEADER = (
    "status", "site", "telescope", "subsystem", "service", "trigger", "now", "limit", "unit", "rate per day",
    "forecast", "earliest", "latest", "last service", "days past the limit", "why",
)


def due_csv_row(status: PlanStatus) -> list:
    """One due-list row for the CSV download, in the order of ``DUE_CSV_HEADER``.

    The page's words (site and subsystem names, the trigger's label), where ``due_record`` gives the
    slug and codes that programs read.
    """
    subsystem = status.plan.subsystem
    record = due_record(status)
    unknown = status.progress == UNKNOWN_PROGRESS  # the page's words for a plan due for a baseline service
    value, limit, unit = record["value"], status.limit, record["unit"]
    if status.metric == metrics.RECOAT_LINE:  # a reflectance, written as every page writes one
        value, limit = reflectance_text(status.value), reflectance_text(status.limit)
    from .services import site_today  # services reads this module

    last = status.last_service_on.isoformat() if status.last_service_on else "not known" if \
        status.last_service_unknown else ""
    # How long an overdue plan has been past its limit, at the site's today (its forecast date is the day it passed).
    past = (site_today(subsystem.telescope.site) - status.forecast_date).days if \
        status.status == OVERDUE and status.forecast_date and not status.last_service_unknown else ""
    return [
        status.get_status_display(), subsystem.telescope.site.name, subsystem.telescope.name, subsystem.name,
        status.plan.name, metrics.METRICS[status.metric][0], status.progress if unknown else value, limit, unit,
        "" if status.rate_per_day is None else rate_text(status.rate_per_day, grouped=False),
        record["forecast_date"], record["earliest"], record["latest"], last, past, status.reason,
    ]


def catalogue_revision(plan: ServicePlan):
    """The catalogue plan (``registry.catalogue.PlanTemplate``) this plan was made from (its kind's plan of the same
    name) when its present steps or tools differ from the plan's, else None: the catalogue's wording is revised from
    time to time (safety wording among it), and a plan stored earlier keeps its own until an engineer takes the new
    (``services.plan_steps_from_catalogue``), or keeps theirs on purpose."""
    kind = KINDS.get(plan.subsystem.kind)
    template = next((t for t in kind.plans if t.name == plan.name), None) if kind else None
    if template is None:
        return None
    stored = {field: "\n".join(line.strip() for line in getattr(plan, field).splitlines() if line.strip())
              for field in template.stored_steps}
    return None if stored == template.stored_steps else template


def default_limit_notes(plan: ServicePlan) -> list[str]:
    """A note for each condition trigger of the plan whose limit is still exactly the catalogue's default for its
    quantity: a figure of the trade, not this equipment's."""
    notes = []
    for trigger in plan.triggers.all():
        if trigger.metric != metrics.READING or trigger.limit != CATALOGUE_READING_LIMITS.get(trigger.quantity):
            continue
        label, unit = QUANTITIES[trigger.quantity]
        basis, owner = DEFAULT_LIMIT_SOURCES[trigger.quantity]
        notes.append(
            f"{label}: limit is the catalogue's default ({trigger.limit:g} {unit}, {basis}); set this {owner}'s own "
            "figure from its maker's data or its commissioning tests."
        )
    return notes


def _reading_trigger(plan: ServicePlan, basis: str) -> Trigger | None:
    """The condition trigger of the plan whose figures have this basis: the one watching the quantity it names."""
    label = basis.split(":")[0]
    return next((t for t in plan.triggers.all() if t.metric == metrics.READING and t.quantity in QUANTITIES
                 and QUANTITIES[t.quantity][0] == label), None)


def _rising(plan: ServicePlan, row: dict) -> bool:
    """Whether a trigger row's value rises to its limit: all counters do; a reflectance falls to its recoat
    line; a reading as its trigger says."""
    if row["metric"] == metrics.RECOAT_LINE:
        return False
    if row["metric"] != metrics.READING:
        return True
    watching = _reading_trigger(plan, row["basis"])
    return watching is None or watching.direction == Trigger.Direction.ABOVE


def trigger_table(plan: ServicePlan) -> list[dict]:
    """The rows of a plan's trigger table as the subsystem page shows them (``PlanStatus.trigger_rows``):
    dates as dates, ``reached`` where the limit is already reached (its forecast is then the day it was
    reached), ``value_text`` and ``limit_text`` as ``models.figure_text`` writes them, and ``rate``: the rate
    per day in words that say what it is (the expected mean over the next 30 days for a counter, the trend for a
    reading; none for a calendar trigger). While the plan's last service is unknown its days since are "unknown",
    and a counter's figure, counted from the plan's start, is "at least" that."""
    unknown = plan.status.last_service_unknown
    rows = []
    for row in plan.status.trigger_rows:
        rising = _rising(plan, row)
        rate = row["rate_per_day"]
        if rate is None or row["metric"] == metrics.CALENDAR_DAYS:
            words = ""
        elif row["metric"] == metrics.READING:
            words = f"{rate_text(rate, signed=True)} {row['unit']}/day (trend)"  # as the basis writes it
        else:
            words = f"{rate_text(rate)} {metrics.rate_unit(row['metric'], row['unit'])} (mean of the next 30 days)"
        value_text = figure_text(row["metric"], row["unit"], row["value"])
        if unknown and row["metric"] == metrics.CALENDAR_DAYS:
            value_text = "unknown"
        elif unknown and (row["metric"] in metrics.USAGE_FIELDS or row["metric"] == metrics.DUST_HOURS):
            value_text = f"at least {value_text}"
        rows.append({
            **row,
            "rate": words,
            "value_text": value_text,
            "limit_text": figure_text(row["metric"], row["unit"], row["limit"]),
            "reached": row["value"] >= row["limit"] if rising else row["value"] <= row["limit"],
            **{key: row[key] and dt.date.fromisoformat(row[key]) for key in ("forecast", "earliest", "latest")},
        })
    return rows


#: Months the table of expected use shows at the least; more when a forecast on the page lies further out.
EXPECTED_USE_MONTHS = 12


def expected_use_by_month(subsystem: Subsystem, plans: list[ServicePlan]) -> dict | None:
    """The site's expected use month by month, as the forecasts of the subsystem's counters make it: None when
    the page shows no such forecast.

    Computed by the recompute's own usage model (``services.forecast_model``): for each coming month its
    nights, their mean dark hours, the open fraction of that calendar month with the history behind it
    (``calc.forecast.logged_per_month``), the mean PM10, and for open hours and each (metric, dust sensitivity)
    the page's triggers count, the expected amount per day (``UsageModel.expected``) and its running total from
    the first forecast night. A forecast is the day that running total reaches the trigger's limit less its
    value now. Rows run to the month of the furthest forecast shown, and at least ``EXPECTED_USE_MONTHS``.
    """
    from .services import UsageLog, downtimes_of, forecast_model, site_today, without_downtime

    counted = metrics.USAGE_FIELDS.keys() | {metrics.DUST_HOURS}
    columns = [(metrics.OPEN_HOURS, 0.0)]  # every other figure is made from the expected open hours
    furthest, shown = None, False
    for plan in plans:
        for row in getattr(plan, "trigger_table", []):  # the plans with a computed state
            if row["metric"] not in counted:
                continue
            shown = True
            key = (row["metric"], plan.dust_sensitivity if row["metric"] == metrics.DUST_HOURS else 0.0)
            columns += [] if key in columns else [key]
            if row["forecast"] and not row["reached"]:
                furthest = max(furthest or row["forecast"], row["forecast"])
    if not shown:
        return None
    site = subsystem.telescope.site
    log = UsageLog.for_subsystem(subsystem)
    model = forecast_model(site, log, site_today(site))
    logged, years = forecast.logged_per_month(log.nights[log.weather])
    days = np.datetime64(model.first_day, "D") + np.arange(len(model.open_hours))
    month_of_day = days.astype("datetime64[M]")
    last = np.datetime64(model.first_day, "M") + (EXPECTED_USE_MONTHS - 1)
    if furthest is not None:
        last = max(last, np.datetime64(furthest, "M"))
    expected = [model.expected(metric, sens) for metric, sens in columns]
    # A recoat in hand takes the telescope out: its nights expect no use, as the forecasts take them (an onboarding
    # review could not match a brake's forecast to this table, which counted them).
    downtimes = downtimes_of(site, subsystem.telescope_id, is_shared_enclosure(site, subsystem.kind),
                             site_today(site))
    out_days = np.zeros(len(days), dtype=bool)
    if downtimes:
        expected = [without_downtime(e, model.first_day, downtimes)[0] for e in expected]
        out_days = without_downtime(np.ones(len(days)), model.first_day, downtimes)[0] == 0.0
    running = [np.cumsum(e) for e in expected]
    rows = []
    for month in np.unique(month_of_day[month_of_day <= last]):
        index = np.flatnonzero(month_of_day == month)
        calendar = int(month.astype(int) % 12)  # 0 = January
        rows.append({
            "month": month.astype(dt.date),
            "nights": len(index),
            # Over the nights in service where some are out, as the use per day is: dark hours x open fraction = it.
            "dark_hours": float(model.dark_hours[index][~out_days[index]].mean() if (~out_days[index]).any()
                                else model.dark_hours[index].mean()),
            "open_fraction": float(model.open_fraction[calendar]),
            "from_history": bool(model.from_history[calendar]),
            "by_night": bool(model.by_night[calendar]),  # its use taken by the night, not by its darkness
            "per_night": float(model.per_night[calendar]),
            "years": int(years[calendar]),
            "logged_nights": int(logged[calendar]),
            "pm10": None if np.isnan(model.month_pm10[calendar]) else float(model.month_pm10[calendar]),
            "excess": float(model.month_excess[calendar]),
            "out": int(out_days[index].sum()),
            # (per day in service, running total at the month's end) of each column: the nights out add nothing
            "figures": [(rate_text(float(e[index][~out_days[index]].mean()) if (~out_days[index]).any() else 0.0),
                         f"{r[index[-1]]:,.0f}") for e, r in zip(expected, running, strict=True)],
        })
    headers = [
        metrics.METRICS[metric][0] + (f" (dust sensitivity {sens:g})" if metric == metrics.DUST_HOURS else "")
        + f", {metrics.METRICS[metric][1]}"
        for metric, sens in columns
    ]
    return {
        "first_day": model.first_day, "rows": rows, "headers": headers, "basis": model.basis,
        "telescope": subsystem.telescope.name if log.telescope_id else "",  # from its own nights
        "dust_basis": model.dust_basis if any(m == metrics.DUST_HOURS for m, _ in columns) else "",
        "prior": forecast.PRIOR_OPEN_FRACTION, "least_nights": forecast.MIN_NIGHTS_FOR_HISTORY,
        "darkness_leads_up_to": forecast.DARKNESS_LEADS_UP_TO, "by_night": any(row["by_night"] for row in rows),
        "clean_air": exposure.CLEAN_AIR_PM10_UGM3,
        "downtimes": [f"{d.what} ({d.first:%d %b %Y} to {d.last:%d %b %Y}"
                      f"{'; ' + d.changed if d.changed else ''}): {d.out}" for d in downtimes
                      if d.last >= model.first_day],  # those over the table's nights, not long past
    }


def _trigger_words(row) -> str:
    """A trigger (or a historical row of one) in words with its limit: "Calendar days: 90 days", "Settle time after a
    slew above 1.2 s"."""
    what, unit = metrics.METRICS.get(row.metric, (row.metric, ""))
    if row.metric == metrics.READING:
        what, unit = QUANTITIES[row.quantity][:2] if row.quantity in QUANTITIES else (row.quantity or "a reading", "")
        side = "below" if row.direction == Trigger.Direction.BELOW else "above"
        return f"{what} {side} {row.limit:g} {unit}".strip()
    return f"{what}: {row.limit:g} {unit}".strip()


def limit_changes(plan: ServicePlan, since: dt.date, zone) -> list[str]:
    """How ``plan``'s triggers changed on or after ``since`` (its baseline: the last service, or its start), oldest
    first, each with the day in the site's time and who changed it: a limit raised or lowered, what a trigger counts
    changed, a trigger added or removed (their history, ``Trigger.history``). A forecast review relaxed a safety
    interlock test from 90 to 120 days and its "overdue" cleared with nothing said on the plan, then tightened it to 60
    and a service logged next was recorded as 37 days late. One query."""
    from observatory_ops.archive.history import person

    start = dt.datetime.combine(since, dt.time(), tzinfo=zone)
    rows = list(Trigger.history.filter(plan_id=plan.pk).select_related("history_user").order_by("id", "history_date",
                                                                                                 "history_id"))
    # The triggers the plan was made with are its start, not a change (made together, within minutes).
    made = min((row.history_date for row in rows), default=None)
    said, before = [], {}
    for row in rows:
        previous = before.get(row.id)
        before[row.id] = row
        if row.history_date < start or (row.history_type == "+" and row.history_date - made < dt.timedelta(minutes=5)):
            continue
        if row.history_type == "+":
            change = f"{_trigger_words(row)} added"
        elif row.history_type == "-":
            change = f"{_trigger_words(row)} removed"
        elif previous is None:  # its earlier state not kept (a change before the history was)
            change = f"a trigger changed, now {_trigger_words(row)}"
        elif _trigger_words(previous) != _trigger_words(row):
            change = f"{_trigger_words(previous)} changed to {_trigger_words(row)}"
        else:
            continue
        who = person(row.history_user) if row.history_user else "someone not recorded"
        said.append((row.history_date, f"{row.history_date.astimezone(zone):%d %b %Y}, by {who}: {change}"))
    return [text for _, text in sorted(said, key=lambda pair: pair[0])]


def plans_with_plots(subsystem: Subsystem) -> list[ServicePlan]:
    """The subsystem's plans, each with ``plot``: an SVG of its governing trigger (see ``plots``), ``caption``: the
    words under it where it needs them (the fitted decline of a recoat line), ``trigger_table``: its triggers' rows
    (``trigger_table``), and ``default_limits``: the notes of ``default_limit_notes``; a plan with no due state has
    ``not_computed`` instead: why (``not_computed_reason``). A plot is described (aria-describedby) by the plan's due
    sentence, a recoat line's by its caption too: registry/subsystem_detail.html gives them the ids plan-<pk>-reason
    and plan-<pk>-caption."""
    from observatory_ops.mirrors.services import mirror_forecast  # mirrors builds on planning

    from .services import UsageLog, downtimes_of, site_today

    site = subsystem.telescope.site
    today = site_today(site)
    plans = list(plans_with_status(subsystem))
    log = None
    flat = None  # the downtimes the forecasts step over, for the charts (read at the first chart of use)
    for plan in plans:
        status = getattr(plan, "status", None)  # a plan not computed yet has none
        plan.plot, plan.caption, plan.unread, plan.default_limits = None, "", [], default_limit_notes(plan)
        plan.catalogue_revision = catalogue_revision(plan)
        if status is None:
            plan.subsystem = subsystem
            plan.not_computed = not_computed_reason(plan)
            continue
        plan.trigger_table = trigger_table(plan)
        baseline = status.last_service_on or plan.counting_from  # as the recompute counts
        plan.limit_changes = limit_changes(plan, baseline, site.zone)
        # A condition trigger with no reading since the baseline has no figures: say so rather than drop it.
        shown = {row["basis"].split(":")[0] for row in status.trigger_rows if row["metric"] == metrics.READING}
        since = "the last service" if status.last_service_on else "the plan's start"
        plan.unread = [
            (QUANTITIES[t.quantity][0], baseline, since) for t in plan.triggers.all()
            if t.metric == metrics.READING and t.quantity in QUANTITIES and QUANTITIES[t.quantity][0] not in shown
        ]
        if status.progress == UNKNOWN_PROGRESS:  # no picture of the way to a limit from a service nobody knows
            continue
        title = f"{plan.name}: {status.get_metric_display()}"
        described = f"plan-{plan.pk}-reason"
        if status.metric == metrics.CALENDAR_DAYS:
            points = [(baseline, 0.0), (today, status.value)]
        elif status.metric == metrics.RECOAT_LINE:
            # The state the recompute stored this trigger from (services._recoat_line_state), computed again here
            # for its fit: the picture and the figures come from the one function.
            mirror = getattr(subsystem, "mirror", None)
            log = log or UsageLog.for_subsystem(subsystem)
            decline = mirror_forecast(mirror, today, log) if mirror else None
            if decline is not None and decline.threshold is not None:
                plan.plot = plots.recoat_svg(decline, today, title, f"{described} plan-{plan.pk}-caption")
                plan.caption = plots.recoat_caption(decline)
            continue
        elif status.metric == metrics.READING:
            trigger = _reading_trigger(plan, status.basis)
            rising = trigger.direction == Trigger.Direction.ABOVE
            taken = list(subsystem.readings.filter(quantity=trigger.quantity, withdrawn_at__isnull=True)
                         .order_by("taken_at")
                         .values_list("taken_at", "value"))
            plan.plot = plots.readings_svg(
                [(plots.day_of(moment, site.zone), value) for moment, value in taken],
                reading_trend(taken, baseline, site.zone, trigger.limit, rising), status.limit, status.unit, today,
                plan.trigger_table[0]["reached"], status.forecast_date, status.earliest, status.latest, rising, title,
                (baseline, f"{'last service' if status.last_service_on else 'plan start'} {baseline:%d %b %Y}"),
                described_by=described,
            )
            continue
        else:
            log = log or UsageLog.for_subsystem(subsystem)
            # The running count since the baseline, by the recompute's rule (calc.exposure.accumulated_since).
            counted, totals = exposure.running_since(
                log.nights, log.per_night(status.metric, plan.dust_sensitivity), baseline
            )
            points = [(baseline, 0.0)] + list(zip(counted.astype(object), totals.tolist(), strict=True))
        if status.metric != metrics.CALENDAR_DAYS and flat is None:  # its telescope's downtimes, read once a page
            flat = [(d.first, d.last) for d in downtimes_of(site, subsystem.telescope_id,
                                                            is_shared_enclosure(site, subsystem.kind), today)]
        plan.plot = plots.accumulation_svg(
            points, status.limit, status.unit, today, status.value, status.forecast_date, status.earliest,
            status.latest, title=title, metric=status.metric, described_by=described,
            flat=flat if status.metric != metrics.CALENDAR_DAYS else (),
        )
    return plans


def reading_trend(
    taken: list[tuple[dt.datetime, float]], baseline: dt.date, zone, limit: float, rising: bool
) -> plots.TrendLine | None:
    """The Theil-Sen line a condition trigger's due state came from, on a chart's axis of days (``plots.day_of``).

    Fitted by the recompute's own function (``services.reading_trend_fit``) to the readings ``taken`` (oldest first)
    since the baseline's local day, its crossing dated as the recompute dates it (``services.trend_date``). None
    where the recompute has no trend either.
    """
    from .services import reading_trend_fit, trend_date

    counted = [(moment, value) for moment, value in taken if moment.astimezone(zone).date() >= baseline]
    if not counted:
        return None
    fit, origin, _ = reading_trend_fit(counted, limit, rising)
    if fit is None:  # the state says why
        return None
    start = plots.day_of(origin, zone)
    last = (counted[-1][0] - origin).total_seconds() / 86400
    crossing = None if fit.crossing_day is None else start + fit.crossing_day
    return plots.TrendLine(start, start + last, fit.value_at(0.0), fit.slope_per_day, crossing,
                           trend_date(origin, fit.crossing_day, zone))


#: How long after its last night a closure is still listed on the dashboard.
CLOSURE_LISTED_AFTER_DAYS = 30


def closures_listed(site, today: dt.date) -> list:
    """The site's closures under way, coming, or ended in the last ``CLOSURE_LISTED_AFTER_DAYS`` days, the earliest
    first, each with ``state``: "under way", "coming" or "ended" (the dashboard lists them), and ``runs_over``: the
    booked runs on its nights still to come (a manager's review: the admin warned of a clash once, on saving, and the
    dashboard never again, where a recoat's clash stays said)."""
    from .models import BookedRun, Closure

    since = today - dt.timedelta(days=CLOSURE_LISTED_AFTER_DAYS)
    closures = list(Closure.objects.filter(site=site, last_night__gte=since).select_related("telescope")
                    .order_by("first_night", "pk"))
    runs = list(BookedRun.objects.filter(site=site, ends_on__gte=today).order_by("starts_on", "pk")) if any(
        c.last_night >= today for c in closures) else []
    for closure in closures:
        closure.state = ("ended" if closure.last_night < today else "coming" if closure.first_night > today
                         else "under way")
        closure.runs_over = [] if closure.state == "ended" else [  # an ended one is not to be moved (a diff review)
            r for r in runs if r.starts_on <= closure.last_night and r.ends_on >= max(closure.first_night, today)]
    return closures


def nights_unlogged_said(site, last_nights: list, today: dt.date) -> int:
    """The nights from the newest logged one (of ``last_nights``: ``logbook.selectors.last_nights``) to yesterday, none
    logged but those of a closure of the whole site (nothing to log then), when more than
    ``services.UNLOGGED_NIGHTS_SAID``: the forecasts count them as used, and the dashboard says so. 0 otherwise."""
    from .models import Closure
    from .services import UNLOGGED_NIGHTS_SAID, closure_downtime, downtime_days

    newest = max((row.night for row in last_nights), default=None)
    if newest is None or (today - newest).days - 1 <= UNLOGGED_NIGHTS_SAID:
        return 0
    first, last = newest + dt.timedelta(days=1), today - dt.timedelta(days=1)
    closed = downtime_days(closure_downtime(c) for c in Closure.objects.filter(
        site=site, telescope__isnull=True, first_night__lte=last, last_night__gte=first))
    behind = sum(1 for i in range((last - first).days + 1) if first + dt.timedelta(days=i) not in closed)
    return behind if behind > UNLOGGED_NIGHTS_SAID else 0
