"""Nightly usage, readings and service records.

Readings and service records are append-only: nothing edits or deletes them. A wrong service record
is corrected by a new record that points to it (``corrects``); the newest record of a chain is the one
that counts.
"""
from __future__ import annotations

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models
from simple_history.models import HistoricalRecords

from observatory_ops.registry.models import Site, Subsystem, Telescope

from .quantities import QUANTITY_CHOICES


class NightUsage(models.Model):
    """One night's usage: the site's (``telescope`` empty), or one telescope's own.

    The night belongs to the local date of its evening. A telescope's log is its own rows, and the site's
    rows on the nights it has none of its own (``planning.services.UsageLog``): a site whose telescopes share
    one dome sends one row a night; a site whose telescopes are used apart sends one row per telescope, and
    may send the site's row too (the dome's controller) for the telescopes that send nothing. A telescope's row
    takes each figure it leaves out (a counter or PM10 stored empty) from the site's row of that night, unless its
    open hours are 0 (idle while the site was open: what it leaves out counts 0).
    """

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    class Source(models.TextChoices):
        IMPORT = "import", "CSV import"
        API = "api", "control software"
        FORM = "form", "typed in"
        DEMO = "demo", "demo generator"

    site = models.ForeignKey(Site, on_delete=models.PROTECT, related_name="nights")
    telescope = models.ForeignKey(
        Telescope, null=True, blank=True, on_delete=models.PROTECT, related_name="nights",
        help_text="Empty: the site's night, counted for every telescope with no row of its own that night.",
    )
    night = models.DateField(help_text="Local date of the evening the night starts.")
    open_hours = models.FloatField(validators=[MinValueValidator(0), MaxValueValidator(24)])
    # The counters are empty (unknown) only on a telescope's row that does not give them: the site's row of that
    # night gives them instead (``planning.services.UsageLog``). The site's rows hold 0 for a counter not sent.
    slews = models.PositiveIntegerField(default=0, null=True, blank=True)
    axis1_travel_deg = models.FloatField(default=0, null=True, blank=True, validators=[MinValueValidator(0)])
    axis2_travel_deg = models.FloatField(default=0, null=True, blank=True, validators=[MinValueValidator(0)])
    brake_cycles = models.PositiveIntegerField(default=0, null=True, blank=True)
    pm10_ugm3 = models.FloatField(null=True, blank=True, validators=[MinValueValidator(0)])
    humidity_pct = models.FloatField(null=True, blank=True, validators=[MinValueValidator(0), MaxValueValidator(100)])
    dew = models.BooleanField(default=False)
    rain = models.BooleanField(default=False)
    source = models.CharField(max_length=8, choices=Source.choices, default=Source.FORM)
    recorded_at = models.DateTimeField(auto_now=True)

    class Meta:
        ordering = ["site", "night"]
        constraints = [
            # Read by site in night order (the recompute's log): this index leads with both.
            models.UniqueConstraint(fields=["site", "night", "telescope"], name="one_usage_row_per_telescope_night"),
            # NULLs are distinct in a unique index, so the site's own row needs a partial one.
            models.UniqueConstraint(
                fields=["site", "night"], condition=models.Q(telescope__isnull=True),
                name="one_site_usage_row_per_night",
            ),
        ]

    def __str__(self) -> str:
        whose = f"{self.site.slug} {self.telescope.name}" if self.telescope_id else self.site.slug
        return f"{whose} {self.night}: {self.open_hours:g} h open"

    def clean(self) -> None:
        if self.telescope_id and self.site_id and self.telescope.site_id != self.site_id:
            raise ValidationError({"telescope": "The telescope belongs to another site."})


class Reading(models.Model):
    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    subsystem = models.ForeignKey(Subsystem, on_delete=models.PROTECT, related_name="readings")
    quantity = models.CharField(max_length=40, choices=QUANTITY_CHOICES)
    unit = models.CharField(max_length=16)
    value = models.FloatField()
    taken_at = models.DateTimeField()
    taken_by = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")
    note = models.CharField(max_length=200, blank=True)
    withdrawn_at = models.DateTimeField(
        null=True, blank=True, editable=False,
        help_text="Set when the reading was withdrawn as wrong (``services.reading_withdraw``): it stays on the "
        "record, marked, and no plan's trend counts it.",
    )
    withdrawn_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT, related_name="+", editable=False,
    )
    withdrawn_reason = models.CharField(max_length=200, blank=True, editable=False)

    class Meta:
        ordering = ["-taken_at"]
        indexes = [models.Index(fields=["subsystem", "quantity", "taken_at"])]

    def __str__(self) -> str:
        return f"{self.get_quantity_display()}: {self.value:g} {self.unit}"


#: The kind of maintenance a service record counts as (the reliability page's hours, the records CSV): its work order's
#: type (``WorkOrder.Type`` values), else a repair of a failure logged without an order (corrective), else service
#: against one of the subsystem's plans (planned work: preventive), else work logged with neither.
WITHOUT_ORDER_OR_PLAN = "without_order"


def maintenance_type(order_type: str | None, plan_id: int | None, repaired_failure: bool) -> str:
    """The kind of maintenance of a record whose order has ``order_type`` (None: no order); see above."""
    return order_type or ("corrective" if repaired_failure else "preventive" if plan_id else WITHOUT_ORDER_OR_PLAN)


class ServiceRecord(models.Model):
    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    subsystem = models.ForeignKey(Subsystem, on_delete=models.PROTECT, related_name="service_records")
    plan = models.ForeignKey(
        "planning.ServicePlan", null=True, blank=True, on_delete=models.PROTECT, related_name="service_records"
    )
    performed_on = models.DateField(help_text="Local date the work was done.")
    performed_by = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")
    hours_spent = models.FloatField(
        null=True, blank=True, validators=[MinValueValidator(0), MaxValueValidator(1000)],
        help_text="Hours of work; empty when not known (a service back-filled from memory, a cleaning logged on the "
        "mirror page): such a record counts no maintenance hours.",
    )
    summary = models.CharField(max_length=200)
    findings = models.TextField(blank=True)
    corrects = models.OneToOneField(
        "self", null=True, blank=True, on_delete=models.PROTECT, related_name="corrected_by",
        help_text="The earlier record this one replaces.",
    )
    void = models.BooleanField(default=False, help_text="This correction withdraws the record it corrects.")
    correction_reason = models.CharField(
        max_length=200, blank=True, default="",
        help_text="A correction's why: what was wrong with the record it corrects (logbook.forms.CorrectionForm).",
    )
    repaired_failure = models.BooleanField(
        default=False, verbose_name="repaired a failure",
        help_text="Logged without a corrective work order, this work repaired a failure: the reliability page counts "
        "it as one, and its hours as corrective.",
    )
    work_order = models.ForeignKey(
        "workorders.WorkOrder", null=True, blank=True, on_delete=models.PROTECT, related_name="service_records"
    )
    limit_passed_on = models.DateField(
        null=True, blank=True, editable=False,
        help_text="For work on a plan that was overdue: the day its governing limit was passed, as its due state said "
        "when the work was logged (``logbook.services.due_before``). How late the work came, kept after "
        "the plan counts again.",
    )
    due_when_logged = models.TextField(
        blank=True, default="", editable=False,
        help_text="For work on a plan: the plan's due sentence as it stood when the work was logged (which trigger, "
        "value, limit and forecast: ``logbook.services.due_of_work``); empty for ad hoc work and for work logged "
        "before it was kept. An export review's insurer asked what each service was due against.",
    )
    timeliness = models.CharField(
        max_length=12, blank=True, default="", editable=False, choices=[
            ("late", "late: after its limit was passed"), ("on time", "on time: before its limit was passed"),
            ("from start", "due from the start: its last service before was not known"),
            ("no state", "no due state: the plan had no trigger, no reading yet, or was not counted"),
        ],
        help_text="For work on a plan, as its due state stood when the work was logged; empty for ad hoc work and for "
        "work logged before it was kept (``timeliness_text``).",
    )
    created_at = models.DateTimeField(auto_now_add=True)
    created_by = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")

    class Meta:
        ordering = ["-performed_on", "-created_at"]

    @property
    def timeliness_text(self) -> str:
        """Whether the work came late, in words for an export: "ad hoc" without a plan, "not kept" for work on a plan
        logged before the tool kept it."""
        if self.void:
            return "withdrawn (counts nothing)"
        if self.plan_id is None:
            return "ad hoc"
        return self.get_timeliness_display() if self.timeliness else "not kept (logged before it was)"

    def __str__(self) -> str:
        return f"{self.performed_on} {self.summary}"

    @property
    def days_after_limit(self) -> int | None:
        """How many days after its plan's limit was passed the work was done; None when it was not late."""
        return (self.performed_on - self.limit_passed_on).days if self.limit_passed_on else None

    def clean(self) -> None:
        if self.void and not self.corrects_id:
            raise ValidationError("Only a correction can withdraw a record.")
        if self.plan_id and self.plan.subsystem_id != self.subsystem_id:
            raise ValidationError({"plan": "The plan belongs to another subsystem."})
