"""Service plans, their triggers, the computed due state of each plan, and the per-site nights cache."""
from __future__ import annotations

import datetime as dt
import json
import math
import re

from django.core.exceptions import ObjectDoesNotExist, ValidationError
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models
from simple_history.models import HistoricalRecords

from observatory_ops.calc import exposure
from observatory_ops.calc.triggers import OVERDUE, STATUSES
from observatory_ops.logbook.quantities import (
    PLAUSIBLE_RANGE,
    QUANTITIES,
    QUANTITY_CHOICES,
    reflectance_text,
    unit_of,
    value_problem,
)
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.models import (
    EARLIEST_IN_SERVICE,
    Site,
    Subsystem,
    Telescope,
    name_alike,
    named_anew,
    text_newlines_normalised,
    validate_one_line,
)

from .metrics import MAX_LIMIT, METRIC_CHOICES, METRICS, READING, RECOAT_LINE


class ServicePlan(models.Model):
    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    subsystem = models.ForeignKey(Subsystem, on_delete=models.PROTECT, related_name="plans")
    name = models.CharField(max_length=160, validators=[validate_one_line])
    task = models.TextField(blank=True)
    # A plan's steps in the three groups a work order keeps apart: the lockout step goes between the first two
    # and the step that removes the locks between the last two (workorders.services), whatever their words.
    steps_powered = models.TextField(
        "steps under power, before isolation", blank=True,
        help_text="One a line: out of robotic control, parking, closing the dome, tests that need power.",
    )
    steps = models.TextField(
        "the work", blank=True,
        help_text="One a line. Done with the energy locked out where the hazards call for isolation.",
    )
    steps_restore = models.TextField(
        "steps after the locks are off", blank=True,
        help_text="One a line: restoring and testing (the step that removes the locks comes first by itself).",
    )
    tools = models.TextField(blank=True, help_text="One tool per line.")
    parts = models.TextField(
        blank=True,
        help_text="Spare parts used, one a line, named as in the site's parts register: 'Brake pad set' for one, "
        "'2 x Brake pad set' for more.",
    )
    readings = models.JSONField(
        default=list, blank=True,
        help_text='Readings its work orders ask for, as a JSON list of {"quantity": code, "limit": "in words"}; '
        "[] for none.",
    )
    hazards = models.JSONField(default=list, blank=True, help_text="Hazards of the task beyond the subsystem's.")
    estimated_hours = models.FloatField(default=1.0, validators=[MinValueValidator(0)])
    dust_sensitivity = models.FloatField(
        default=0.0, validators=[MinValueValidator(0), MaxValueValidator(exposure.DUST_SENSITIVITY_MAX)],
        help_text="0: dust does not matter; 1: an hour at twice the clean-air PM10 counts as two; at most 10.",
    )
    counting_from = models.DateField(help_text="Start of counting when the plan has no service record yet.")
    # A plan made with a new subsystem gets the day it was registered, which says nothing of when the equipment
    # was last serviced: until a service is logged or a date is given here, the plan is due for a baseline service.
    counting_from_given = models.BooleanField(
        "counting date known", default=True,
        help_text="Ticked: the date above is a real start (the last service before records began, or the day the "
        "equipment went into service new); changing the date ticks it. Unticked (the plans a new subsystem brings): "
        "its last service is unknown, so the plan is due now for a baseline service until a service is logged.",
    )
    basis = models.CharField(max_length=120, blank=True, help_text="Where the intervals come from.")
    active = models.BooleanField(default=True)

    class Meta:
        ordering = ["subsystem__telescope__name", "subsystem__name", "name"]
        indexes = [
            # The active plans' ids and subsystems alone, for the due list's count of plans with no state
            # (``selectors.not_computed_counts``): read from the index, not from the wide table (about 4 times faster
            # over 40,000 plans on PostgreSQL, benchmarks/README.md).
            models.Index(fields=["id", "subsystem"], condition=models.Q(active=True), name="plan_active_ids"),
        ]

    def __str__(self) -> str:
        return self.name

    def clean(self) -> None:
        text_newlines_normalised(self)
        errors = {}
        try:
            part_lines(self.parts)
        except ValueError as exc:
            errors["parts"] = str(exc)
        if self.readings is None:  # the admin's box left empty: no readings
            self.readings = []
        problem = readings_problem(self.readings)
        if problem:
            errors["readings"] = problem
        problem = self._counting_from_problem()
        if problem:
            errors["counting_from"] = problem
        if problem := self._subsystem_kept_problem():
            errors["subsystem"] = problem
        if self.subsystem_id and self.name and self.active and named_anew(self, "name", "subsystem_id", "active"):
            # Two active plans alike would be two due lines and two orders for one task (a site review added three).
            others = (ServicePlan.objects.filter(subsystem_id=self.subsystem_id, active=True).exclude(pk=self.pk)
                      .values_list("name", flat=True))
            if (alike := name_alike(self.name, others)) is not None:
                errors["name"] = (f"{alike!r} is already an active plan of this subsystem (capitals and spaces "
                                  "aside): change that plan, or give this one a name of its own.")
        if errors:
            raise ValidationError(errors)

    def _subsystem_kept_problem(self) -> str | None:
        """Why a stored plan may not go to the subsystem now chosen: anything is recorded under it (service records,
        work orders), which was the first subsystem's work and would read as the other's, at its site or another (an
        onboarding review moved a servo drive's plan, with its service, to another site's focuser unsaid: the drive's
        maintenance left its due list). A plan made on the wrong subsystem, with nothing recorded, moves, as a
        telescope entered under the wrong site does (tests/test_register_moves.py: both sites are recomputed)."""
        from observatory_ops.workorders.models import WorkOrder  # work orders build on planning

        if self._state.adding or not self.subsystem_id:
            return None
        stored = ServicePlan.objects.filter(pk=self.pk).values_list("subsystem_id", flat=True).first()
        if stored is None or stored == self.subsystem_id:
            return None
        records = self.service_records.count()
        orders = [o.number for o in WorkOrder.objects.filter(items__plan=self).distinct().order_by("pk")]
        if not records and not orders:
            return None
        was = Subsystem.objects.select_related("telescope__site").get(pk=stored)
        said = "; ".join(filter(None, (
            f"{records} service record{'s' if records != 1 else ''}" if records else "",
            f"work orders {', '.join(orders)}" if orders else "",
        )))
        return (f"This plan has records on {was.telescope.site}: {was.telescope.name}: {was.name} ({said}): that "
                "subsystem's work, which would read as the other's. Make a new plan on the other subsystem, and set "
                "this one inactive if it no longer applies to this one.")

    def _counting_from_problem(self) -> str | None:
        """Why the counting date, new or changed, cannot be: the plan counts from it as from a last service, so it
        takes the rule of service dates (``logbook.services.date_problem``: not after the site's today, at most
        ``MAX_YEARS_BACK`` years back). A date stored earlier is left alone: it grows older by itself."""
        from observatory_ops.logbook.services import date_problem  # the logbook's services import this module

        if self.counting_from is None or not self.subsystem_id:  # the fields' own messages say so
            return None
        if self.pk and ServicePlan.objects.filter(pk=self.pk, counting_from=self.counting_from).exists():
            return None
        problem = date_problem(self.subsystem.telescope.site, self.counting_from, "counting date")
        if problem is None:
            return None
        return (f"{problem[0].upper()}{problem[1:]}. The plan counts from this date as from a last service while it "
                "has none, so it takes the rule of service dates.")

    @property
    def step_groups(self) -> tuple[list[str], list[str], list[str]]:
        """(under power, the work, after the locks are off), each one step a line."""
        return tuple(
            [line.strip() for line in text.splitlines() if line.strip()]
            for text in (self.steps_powered, self.steps, self.steps_restore)
        )

    @property
    def step_list(self) -> list[str]:
        """Every step in the order of the work."""
        powered, work, restore = self.step_groups
        return powered + work + restore


#: What a plan's readings hold, as its refusals write it.
READING_SHAPE = '{"quantity": code, "limit": "in words"}'


#: The longest limit a plan's reading may give, in characters: the work order's row holds twice as many, so that a
#: mirror's recoat line can follow (``workorders.services._with_recoat_line``).
READING_LIMIT_LENGTH = 80


def readings_problem(readings: object) -> str | None:
    """Why a plan's readings cannot be what its work orders ask for (None when they can).

    They are a JSON list of ``READING_SHAPE`` ("limit" may be left out): a work order made for the plan asks for a
    reading of each quantity, in its unit (``workorders.services``, from ``logbook.quantities.QUANTITIES``), once per
    quantity, with the limit as the text its form shows (``RequiredReading.limit_text``).
    """
    longest = READING_LIMIT_LENGTH
    if not isinstance(readings, list):
        return (f"Readings must be a JSON list, [{READING_SHAPE}, ...] with a quantity's code in each, or [] for none; "
                f"not {_shown(readings)}.")
    seen: dict[str, int] = {}
    for number, entry in enumerate(readings, start=1):
        if not isinstance(entry, dict):
            return f"Reading {number}, {_shown(entry)}, must be written {READING_SHAPE}."
        other = sorted(set(entry) - {"quantity", "limit"})
        if other:
            return (f"Reading {number}, {_shown(entry)}, holds {', '.join(map(json.dumps, other))}: a reading holds "
                    '"quantity" and "limit" only.')
        quantity, limit = entry.get("quantity"), entry.get("limit", "")
        if "quantity" not in entry:
            return f'Reading {number}, {_shown(entry)}, has no "quantity": give the code of what to measure.'
        if not isinstance(quantity, str) or quantity not in QUANTITIES:
            return (f"Reading {number}: {_shown(quantity)} is not a reading quantity; the codes are "
                    f"{', '.join(QUANTITIES)}.")
        if not isinstance(limit, str):
            return (f"Reading {number} ({quantity}): the limit is written in words, in quotes (\"at most 2 s\"), "
                    f"or left out; not {_shown(limit)}.")
        if len(limit) > longest:
            return (f"Reading {number} ({quantity}): the limit is {len(limit)} characters long; a plan's limit "
                    f"may be at most {longest}.")
        if quantity in seen:
            return (f"Reading {number} ({quantity}) asks again for the quantity of reading {seen[quantity]}: a work "
                    "order asks for each quantity once, so give it once.")
        seen[quantity] = number
    return None


def _shown(value: object, longest: int = 60) -> str:
    """A value as it was written in JSON, cut short when long."""
    text = json.dumps(value, ensure_ascii=False)
    return text if len(text) <= longest else f"{text[:longest - 3]}..."


#: A counted line of a plan's parts: "2 x Brake pad set" (or "2x", "2 ×"); and any line that starts as one.
_COUNTED_PART = re.compile(r"^(?P<quantity>\d+(?:\.\d+)?)\s*[x×]\s+(?P<name>\S.*)$", re.IGNORECASE)
_LIKE_A_COUNT = re.compile(r"^[-+]?[\d.]+\s*[x×](\s|$)", re.IGNORECASE)


def part_lines(text: str) -> list[tuple[str, float]]:
    """A plan's parts as (name, quantity), one a line: "Brake pad set" is one, "2 x Brake pad set" two.

    Raises ValueError naming the line when it starts as a count but is not one ("-1 x Pad", "2 x") or its
    count is zero.
    """
    parts = []
    for number, line in enumerate(text.splitlines(), start=1):
        line = line.strip()
        counted = _COUNTED_PART.match(line)
        if counted is None:
            if _LIKE_A_COUNT.match(line):
                raise ValueError(f"line {number} ({line!r}): write a count as a number above zero, then x, then "
                                 "the part's name: '2 x Brake pad set'")
            if line:
                parts.append((line, 1.0))
            continue
        quantity = float(counted["quantity"])
        if quantity <= 0:
            raise ValueError(f"line {number} ({line!r}): the quantity must be more than zero")
        parts.append((counted["name"].strip(), quantity))
    return parts


class Trigger(models.Model):
    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    class Direction(models.TextChoices):
        ABOVE = "above", "rises to the limit"
        BELOW = "below", "falls to the limit"

    plan = models.ForeignKey(ServicePlan, on_delete=models.CASCADE, related_name="triggers")
    metric = models.CharField(max_length=24, choices=METRIC_CHOICES)
    limit = models.FloatField(validators=[MinValueValidator(0)])
    quantity = models.CharField(max_length=40, choices=QUANTITY_CHOICES, blank=True, help_text="Reading triggers only.")
    direction = models.CharField(max_length=8, choices=Direction.choices, default=Direction.ABOVE)

    class Meta:
        ordering = ["plan", "metric"]

    def __str__(self) -> str:
        if self.metric == READING and self.quantity in QUANTITIES:
            label, unit = QUANTITIES[self.quantity]  # "Settle time after a slew, at most 1.2 s", as the pages say it
            bound = "at most" if self.direction == self.Direction.ABOVE else "at least"
            return f"{label}, {bound} {self.limit:g} {unit}"
        return f"{self.get_metric_display()} {self.limit:g}"

    def clean(self) -> None:
        if self.metric == READING and not self.quantity:
            raise ValidationError({"quantity": "A reading trigger needs the quantity it watches."})
        if self.metric == RECOAT_LINE:
            problem = self._recoat_line_problem()
            if problem:
                raise ValidationError({"metric": problem})
        # None, or not a number: the field's own message says so.
        problem = self._limit_problem() if isinstance(self.limit, int | float) else None
        if problem:
            raise ValidationError({"limit": problem})

    def _reading_bound_problem(self) -> str | None:
        """Why a reading's limit inside its quantity's range (``logbook.quantities.PLAUSIBLE_RANGE``) can still never
        work as one: at the lowest value a reading can take, a rising limit is past at every reading and a falling
        one only at that value itself, never on the way down; at the highest, the other way round. The state reads
        a limit as reached at it (``calc.triggers.TriggerState.reached``). A limit of 0 is sound for a quantity that
        can be negative (a temperature)."""
        low, high = PLAUSIBLE_RANGE[self.quantity]
        if self.direction not in self.Direction.values or low < self.limit < high:  # no direction: the field says so
            return None
        at_low = self.limit <= low
        bound = low if at_low else high
        label, unit = QUANTITIES[self.quantity]
        unit = "" if self.quantity == "reflectance" else f" {unit}"  # a fraction: "never above 1"
        first = label.split()[0]
        acronym = len(first) > 1 and first.isupper()  # "RMS following error", "RCD trip time"
        named = label if acronym else label[0].lower() + label[1:]
        article = "an" if named[0] in ("AEFHILMNORSX" if acronym else "aeiou") else "a"
        beyond = "below" if at_low else "above"
        aside = "" if bound == 0 else f" (no {'lower' if at_low else 'higher'} reading is taken)"
        given = f"{self.limit:,g}{unit}"
        head = f"Limit: {article} {named} is never {beyond} {bound:,g}{unit}{aside}, so "
        rising = self.direction == self.Direction.ABOVE
        if rising == at_low:  # rises to the lowest value, or falls to the highest: passed at once
            return (f"{head}every reading would be past a limit of {given}: the plan would be overdue from its first "
                    f"reading on. Give the {'highest' if rising else 'lowest'} reading still acceptable, "
                    f"{'above' if at_low else 'below'} {bound:,g}{unit}.")
        way = "down" if at_low else "up"
        return (f"{head}no reading could {'fall' if at_low else 'rise'} past a limit of {given}: the plan would come "
                f"due only at a reading of {given} itself, never on the way {way}. Give the "
                f"{'lowest' if at_low else 'highest'} reading still acceptable, {'above' if at_low else 'below'} "
                f"{bound:,g}{unit}.")

    def _recoat_line_problem(self) -> str | None:
        """Why a trigger on the mirror's reflectance can never be computed on its plan's subsystem: one that has no
        mirror record and cannot have one (``takes_no_mirror``). A mirror subsystem whose record is not entered yet
        is not refused: its plan waits for the record (``planning.selectors.not_computed_reason`` says so)."""
        try:
            subsystem = self.plan.subsystem
        except ObjectDoesNotExist:  # no plan or no subsystem chosen yet: the fields' own messages say so
            return None
        if not takes_no_mirror(subsystem):
            return None
        return (f"{subsystem} is of the kind {subsystem.kind_label}, which has no mirror record and cannot have one "
                f"(only a {mirror_kinds_text()} subsystem does): a trigger on the mirror's reflectance could never be "
                "computed, and its plan would be left out of the due list. Choose another trigger, or put the plan "
                "on the mirror's own subsystem.")

    def _limit_problem(self) -> str | None:
        """Why the limit cannot be: not finite; a reading's outside its quantity's plausible range, or at an end of
        it (``_reading_bound_problem``); any other not above zero, or beyond its metric's bound
        (``metrics.MAX_LIMIT``)."""
        if not math.isfinite(self.limit):
            return f"The limit must be a finite number, not {self.limit}."
        if self.metric == READING:
            if self.quantity not in QUANTITIES:  # none chosen, or unknown: the field says so
                return None
            problem = value_problem(self.quantity, self.limit)
            return f"{problem[0].upper()}{problem[1:]}." if problem else self._reading_bound_problem()
        if self.limit <= 0:
            return "A usage or calendar limit must be more than zero."
        if self.metric not in MAX_LIMIT or self.limit <= MAX_LIMIT[self.metric][0]:  # unknown: the field says so
            return None
        bound, why = MAX_LIMIT[self.metric]
        label, unit = METRICS[self.metric]
        unit = f" {unit}" if unit else ""
        return (f"{label}: a limit of {self.limit:,.10g}{unit} is more than this tool takes, at most "
                f"{bound:,.10g}{unit} ({why}). Check the figure and its unit.")


def takes_no_mirror(subsystem: Subsystem) -> bool:
    """Whether ``subsystem`` has no mirror record and cannot have one: only a subsystem of a mirror kind
    (``mirrors.models.TRAIN_KINDS``) takes one (``Mirror.clean``), so a trigger on a mirror's reflectance is never
    computed anywhere else."""
    from observatory_ops.mirrors.models import TRAIN_KINDS  # mirrors builds on planning

    return subsystem.kind not in TRAIN_KINDS and not hasattr(subsystem, "mirror")


def mirror_kinds_text() -> str:
    """The kinds that take a mirror record, as a sentence names them: "primary mirror or secondary mirror"."""
    from observatory_ops.mirrors.models import TRAIN_KINDS  # mirrors builds on planning

    return " or ".join(KINDS[code].label.lower() for code in TRAIN_KINDS)


def trigger_figures(metric, value, limit, unit, rate_per_day, forecast, earliest, latest, basis) -> dict:
    """One trigger's figures as ``PlanStatus.triggers`` stores them and the subsystem page lists them.

    The one shape of a trigger's record: the recompute stores the plan's other triggers in it, and
    ``PlanStatus.trigger_rows`` rebuilds the governing one from the columns. The metric's label is looked
    up when shown, not stored with every state.
    """
    return {
        "metric": metric, "value": value, "limit": limit, "unit": unit, "rate_per_day": rate_per_day,
        "forecast": forecast.isoformat() if forecast else None,
        "earliest": earliest.isoformat() if earliest else None,
        "latest": latest.isoformat() if latest else None,
        "basis": basis,
    }


def figure_text(metric: str, unit: str, value: float) -> str:
    """A trigger's value or limit as the pages, the due list and the charts write it: a reflectance (a recoat line,
    or a reading of band reflectance) by ``reflectance_text``; any other reading as measured, to 4 significant
    figures (whole from 1,000 on, no exponent); a count or a number of days whole, as the sentence of its state
    words it."""
    if metric == RECOAT_LINE or (metric == READING and unit == unit_of("reflectance")):
        return reflectance_text(value)
    if metric == READING:
        # 4 significant figures, never an exponent: 12,345 reads "12,345" (its whole part), 0.0001234 as it is and
        # 0.000025 so too (``:g`` would write 2.5e-05 below 0.0001).
        if abs(value) >= 1000:
            return f"{value:,.0f}"
        if 0 < abs(value) < 1e-4:
            return f"{value:.{3 - math.floor(math.log10(abs(value)))}f}".rstrip("0")
        return f"{value:,.4g}"
    return f"{value:,.0f}"


#: The due list's "Now / limit" of a plan due for a baseline service (``PlanStatus.progress``).
UNKNOWN_PROGRESS = "last service unknown"


class PlanStatus(models.Model):
    """The due state of one plan, computed by ``planning.services.site_recompute``; never edited by hand.

    Kept in a table so the due list is one indexed query however many plans there are.
    """

    plan = models.OneToOneField(ServicePlan, on_delete=models.CASCADE, primary_key=True, related_name="status")
    # Not checked again by the database at every commit (a deferred check of a site's 400 rows was about
    # 2 ms of a recompute): the recompute holds the site's row locked while it writes, and a site that has
    # telescopes cannot be deleted (PROTECT), so the site of a state always exists. The plan's key stays
    # checked: a plan can be deleted while its site is being recomputed. No index of its own either: the
    # (site, status, forecast_date) index below serves every lookup by site.
    site = models.ForeignKey(Site, on_delete=models.CASCADE, related_name="+", db_index=False, db_constraint=False)
    status = models.CharField(max_length=8, choices=[(s, s) for s in STATUSES])
    urgency = models.PositiveSmallIntegerField(help_text="0 overdue, 1 due, 2 later: sorts the due list.")
    metric = models.CharField(max_length=24, choices=METRIC_CHOICES)
    value = models.FloatField()
    limit = models.FloatField()
    unit = models.CharField(max_length=16, blank=True)
    rate_per_day = models.FloatField(null=True)
    forecast_date = models.DateField(null=True)
    earliest = models.DateField(null=True)
    latest = models.DateField(null=True)
    last_service_on = models.DateField(null=True)
    last_service_unknown = models.BooleanField(
        default=False, help_text="No service record and no counting date given: due now for a baseline service."
    )
    reason = models.TextField(help_text="One sentence: which trigger, value, limit, rate and forecast.")
    basis = models.TextField(blank=True, help_text="How the governing trigger's figures were obtained.")
    triggers = models.JSONField(
        default=list, help_text="The figures of the plan's other triggers (the governing one is in the columns)."
    )
    computed_at = models.DateTimeField()
    unlogged_nights = models.PositiveIntegerField(
        default=0, help_text="Of a counter governing while its log is far behind: the nights not logged that its "
                             "forecast counts at the expected rate (calc.triggers.TriggerState); 0 otherwise.")
    reached_unlogged_on = models.DateField(
        null=True, help_text="The night the expected use passed the limit, not logged yet (then due today).")

    @property
    def metric_label(self) -> str:
        return self.get_metric_display()

    @property
    def trigger_rows(self) -> list[dict]:
        """Every trigger's figures, governing first, each with its metric's label (as the page lists them)."""
        governing = trigger_figures(
            self.metric, self.value, self.limit, self.unit, self.rate_per_day, self.forecast_date, self.earliest,
            self.latest, self.basis,
        )
        return [{**t, "label": METRICS[t["metric"]][0]} for t in (governing, *self.triggers)]

    @property
    def progress(self) -> str:
        """Value now against the limit, for the due list; "last service unknown" for a plan due for a baseline
        service (its figures count from the plan's start, not from a service) until a limit is reached."""
        if self.last_service_unknown and self.status != OVERDUE:
            return UNKNOWN_PROGRESS
        # The recompute keeps a recoat line's figures without a unit: a reflectance, a fraction (as ``due_record``).
        unit = unit_of("reflectance") if self.metric == RECOAT_LINE else self.unit
        return (f"{figure_text(self.metric, self.unit, self.value)} / "
                f"{figure_text(self.metric, self.unit, self.limit)} {unit}").strip()

    class Meta:
        verbose_name_plural = "plan statuses"
        indexes = [
            models.Index(fields=["site", "status", "forecast_date"]),
            models.Index(fields=["urgency", "forecast_date"]),
        ]

    def __str__(self) -> str:
        """"T1: Axis 1 brake: Check brake pads: due, computed 15 Jun 2026 04:10 UTC" (the admin's times are UTC)."""
        computed = self.computed_at.astimezone(dt.UTC)
        return f"{self.plan.subsystem}: {self.plan.name}: {self.status}, computed {computed:%d %b %Y %H:%M} UTC"


class NightSky(models.Model):
    """Cached sky figures of one local night at one site (``calc.nights``), so pages never recompute."""

    site = models.ForeignKey(Site, on_delete=models.CASCADE, related_name="sky")
    night = models.DateField()
    sunset = models.DateTimeField(null=True)
    sunrise = models.DateTimeField(null=True)
    dusk = models.DateTimeField(null=True)
    dawn = models.DateTimeField(null=True)
    dark_hours = models.FloatField()
    moon_illumination = models.FloatField()
    moonless_dark_hours = models.FloatField()

    class Meta:
        verbose_name_plural = "night skies"
        ordering = ["site", "night"]
        constraints = [models.UniqueConstraint(fields=["site", "night"], name="one_sky_row_per_site_night")]

    def __str__(self) -> str:
        return f"{self.site}: night of {self.night:%a %d %b %Y} ({self.dark_hours:.1f} h dark)"


class BookedRun(models.Model):
    """An observing run booked at a site: nights that are expensive (or impossible) to lose to downtime."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    site = models.ForeignKey(Site, on_delete=models.CASCADE, related_name="booked_runs")
    title = models.CharField(max_length=120, validators=[validate_one_line])
    starts_on = models.DateField()
    ends_on = models.DateField()
    blocked = models.BooleanField(default=True, help_text="Off: the nights cost more instead of being excluded.")

    class Meta:
        ordering = ["starts_on"]

    def __str__(self) -> str:
        return f"{self.title} ({self.starts_on} to {self.ends_on})"

    def clean(self) -> None:
        if self.ends_on < self.starts_on:
            raise ValidationError({"ends_on": "A run cannot end before it starts."})


def validate_reason_on_one_line(value: str) -> None:
    """A closure's reason, said in every basis it moves: one line, as a name is (``validate_one_line``)."""
    try:
        validate_one_line(value)
    except ValidationError:
        raise ValidationError("Write the reason on one line, without tabs or other control characters.") from None


#: The longest closure taken, in nights: a telescope out for longer is retired (its subsystems), not closed.
CLOSURE_NIGHTS_MAX = 731


class Closure(models.Model):
    """Nights a telescope, or the whole site, does not observe for a reason other than the weather: a winter season
    shut, a mount overhaul. Its nights count no use (``planning.services._downtime_by_telescope``: those not logged,
    and the whole site's rows standing in for a telescope closed alone), and they are left out of the history the
    months' open fractions and the forecasts' spread are made from (``UsageLog.closed``): a closure is not weather.
    Calendar limits run on: grease ages in a shut dome. A night is named by the evening's date, as in the log."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    site = models.ForeignKey(Site, on_delete=models.CASCADE, related_name="closures")
    telescope = models.ForeignKey(
        Telescope, on_delete=models.CASCADE, null=True, blank=True, related_name="closures",
        help_text="Empty: the whole site is closed, every telescope and the enclosure.")
    first_night = models.DateField(help_text="The first night not observed, named by the evening's date.")
    last_night = models.DateField(help_text="The last night not observed; observing starts again the night after.")
    reason = models.CharField(max_length=200, validators=[validate_reason_on_one_line],
                              help_text="Said with every forecast it moves, such as \"winter shutdown\" or \"mount "
                                        "overhaul\".")

    class Meta:
        ordering = ["site", "first_night", "pk"]

    def __str__(self) -> str:
        return f"{self.whose} closed {self.first_night:%d %b %Y} to {self.last_night:%d %b %Y}: {self.reason}"

    @property
    def whose(self) -> str:
        """"F50" or "the whole site"."""
        return self.telescope.name if self.telescope_id else "the whole site"

    @property
    def nights(self) -> int:
        return (self.last_night - self.first_night).days + 1

    def covers(self, telescope_id: int | None) -> bool:
        """Whether it closes ``telescope_id`` (None: the site's own log, closed only by a whole-site closure)."""
        return self.telescope_id is None or self.telescope_id == telescope_id

    def clean(self) -> None:
        """Its nights in order, within bounds (from 1900, at most ``CLOSURE_NIGHTS_MAX`` nights, starting within the
        forecasts' horizon), its telescope the site's, and no other closure of the same telescope (or of the whole
        site, for one of the whole site) on any of its nights."""
        errors = {}
        for name in ("first_night", "last_night"):
            day = getattr(self, name)
            if day is not None and day < EARLIEST_IN_SERVICE:
                errors[name] = f"{day.isoformat()} looks mistyped: give a date from {EARLIEST_IN_SERVICE:%Y} on."
        if errors:
            raise ValidationError(errors)
        if self.first_night and self.last_night:
            if self.last_night < self.first_night:
                raise ValidationError({"last_night": "The last night comes before the first night."})
            if self.nights > CLOSURE_NIGHTS_MAX:
                raise ValidationError({"last_night": (
                    f"{self.nights:,} nights is longer than {CLOSURE_NIGHTS_MAX:,}: a telescope out for good is "
                    "retired (its subsystems, on their pages), not closed.")})
        if self.telescope_id and self.site_id and self.telescope.site_id != self.site_id:
            raise ValidationError({"telescope": f"{self.telescope.name} is not at {self.site.name}."})
        if self.site_id and self.first_night and self.last_night:
            from .services import HORIZON_DAYS, site_today  # the services build on these models

            ahead = site_today(self.site) + dt.timedelta(days=HORIZON_DAYS)
            if self.first_night > ahead:
                raise ValidationError({"first_night": (
                    f"{self.first_night:%d %b %Y} is more than {HORIZON_DAYS // 366} years ahead, further than the "
                    "forecasts look: enter it nearer the time.")})
            # One of a telescope may overlap one of the whole site (an overhaul running through the winter shutdown);
            # two of the same would be counted as one and said twice.
            others = Closure.objects.filter(site=self.site_id, telescope=self.telescope_id,
                                            first_night__lte=self.last_night,
                                            last_night__gte=self.first_night).exclude(pk=self.pk)
            if clash := others.select_related("telescope").first():
                raise ValidationError(f"Its nights overlap another closure: {clash}. Change that one, or these dates.")


class DigestSent(models.Model):
    """One person mailed a site's due digest of a day, while that day is not yet sent to everyone
    (``Site.digest_sent_on`` says when it is): a send that failed part-way is taken up by mailing only the others
    (``digest.due_digest_send``). Written once the person's message was accepted, never before; the site's rows are
    removed when its day is sent to all."""

    site = models.ForeignKey(Site, on_delete=models.CASCADE, related_name="+")
    day = models.DateField(help_text="The site's local day of the digest.")
    address = models.EmailField(max_length=254)
    sent_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        verbose_name_plural = "digests sent"
        constraints = [
            models.UniqueConstraint(fields=["site", "day", "address"], name="digest_sent_once_per_person_and_day")
        ]

    def __str__(self) -> str:
        return f"{self.site}: due digest of {self.day:%d %b %Y} sent to {self.address}"
