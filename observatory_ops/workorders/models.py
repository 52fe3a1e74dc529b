"""Work orders, what they cover, the readings they ask for, spare parts, energy isolation points, and the
ticks of their checklist."""
from __future__ import annotations

import re

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models
from django.urls import reverse
from simple_history.models import HistoricalRecords

from observatory_ops.logbook.quantities import QUANTITIES, QUANTITY_CHOICES
from observatory_ops.registry.models import (
    Site,
    Subsystem,
    Telescope,
    name_alike,
    named_anew,
    validate_one_line,
)


class State(models.TextChoices):
    """Lifecycle of a work order (our own names). See ``lifecycle.TRANSITIONS`` for who may move it."""

    DRAFT = "draft", "draft"
    ISSUED = "issued", "issued"
    UNDERWAY = "underway", "underway"
    FINISHED = "finished", "finished, awaiting countersignature"
    COUNTERSIGNED = "countersigned", "countersigned"
    WITHDRAWN = "withdrawn", "withdrawn"


class CrewMember(models.Model):
    """One person chosen by account on a finished order's crew (``WorkOrder.crew_members``; declared before the order,
    whose history copies it). Its key to the person keeps them (PROTECT): the admin names the crews a person was on
    instead of deleting them (``access.selectors.protecting_fields``)."""

    work_order = models.ForeignKey("WorkOrder", on_delete=models.CASCADE, related_name="+")
    person = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")

    class Meta:
        verbose_name = "work order's crew"
        verbose_name_plural = "work orders' crews"
        constraints = [models.UniqueConstraint(fields=["work_order", "person"], name="crew_member_once_per_order")]

    def __str__(self) -> str:
        return f"{self.work_order.number}: crew: {self.person.get_full_name() or self.person.get_username()}"


class WorkOrder(models.Model):
    # who changed what, when: see observatory_ops/archive; the crew chosen by account with the rest
    history = HistoricalRecords(m2m_fields=["crew_members"])
    class Type(models.TextChoices):
        # Terms as EN 13306 (maintenance terminology) uses them.
        PREVENTIVE = "preventive", "preventive"
        CORRECTIVE = "corrective", "corrective"
        CONDITION_BASED = "condition", "condition-based"

    class Priority(models.IntegerChoices):
        URGENT = 1, "urgent"
        HIGH = 2, "high"
        NORMAL = 3, "normal"
        LOW = 4, "low"

    site = models.ForeignKey(Site, on_delete=models.PROTECT, related_name="work_orders")
    telescope = models.ForeignKey(Telescope, null=True, blank=True, on_delete=models.PROTECT, related_name="+")
    title = models.CharField(max_length=200, validators=[validate_one_line])
    order_type = models.CharField(max_length=12, choices=Type.choices, default=Type.PREVENTIVE)
    priority = models.PositiveSmallIntegerField(choices=Priority.choices, default=Priority.NORMAL)
    state = models.CharField(max_length=16, choices=State.choices, default=State.DRAFT)
    planned_date = models.DateField(null=True, blank=True)
    assignee = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT, related_name="assigned_work_orders"
    )
    estimated_hours = models.FloatField(
        default=1.0,
        validators=[
            MinValueValidator(0),
            MaxValueValidator(
                1000, message="An estimate above 1,000 hours is not accepted: split the work into several orders."
            ),
        ],
    )
    estimate_basis = models.TextField(
        blank=True, editable=False,
        help_text="Where the estimated hours came from when the order was made (the plans' own estimates, a recoat "
                  "phase's days); emptied when an engineer edits the estimate.",
    )
    steps = models.TextField(blank=True, help_text="One step per line.")
    tools = models.TextField(blank=True, help_text="One tool per line.")
    hazards = models.JSONField(default=list, blank=True)
    at_telescope = models.BooleanField(
        default=True,
        help_text="False for work done away from the telescope (a mirror at a coating plant): the order carries "
        "the work's own hazards, not its subsystems'.",
    )
    recoat_phase = models.CharField(
        max_length=20, blank=True,
        help_text="The recoat phase this order does (removal, coating, reinstall, realignment: "
        "calc.windows.Phase.work); blank for other work. A finished removal with no reinstall finished since means "
        "the telescope stands without its mirror.",
    )
    lift_inputs = models.JSONField(
        null=True, blank=True, help_text="Mirror and rigging figures for the lifting numbers (see calc.lifting)."
    )
    actual_hours = models.FloatField(
        null=True, blank=True, validators=[MinValueValidator(0)],
        help_text="Person-hours, as the finish form asks: everyone's hours on the work added up (two people for 3 "
        "hours is 6), not the time from start to end. Shared among its subsystems' service records, they are the "
        "reliability page's maintenance hours.",
    )
    findings = models.TextField(blank=True)
    created_at = models.DateTimeField(auto_now_add=True)
    created_by = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")
    issued_at = models.DateTimeField(null=True, blank=True)
    started_at = models.DateTimeField(null=True, blank=True)
    finished_at = models.DateTimeField(null=True, blank=True)
    finished_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    countersigned_at = models.DateTimeField(null=True, blank=True)
    countersigned_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    withdrawn_reason = models.CharField(max_length=200, blank=True)
    unticked_at_finish = models.JSONField(
        default=list, blank=True,
        help_text="Checklist lines nobody ticked when the work was finished; the person finishing confirmed that "
                  "they were done or did not apply.",
    )
    hazards_confirmed_at_finish = models.JSONField(
        default=list, blank=True,
        help_text="Hazard codes its subsystems gained after it was made, which it lacked when the work was "
                  "finished; the person finishing confirmed that they were controlled or did not arise, and the "
                  "findings say how.",
    )
    isolation_unticked_at_finish = models.JSONField(
        default=list, blank=True,
        help_text="The lockout step, isolation points and lock removal nobody ticked when the work was finished; the "
                  "person finishing answered for them on their own (isolation_confirmed_at_finish), not with the "
                  "other unticked lines, and the findings say why.",
    )
    isolation_confirmed_at_finish = models.CharField(
        max_length=16, blank=True,
        help_text="The answer given for an unticked energy isolation: a key of cautions.ISOLATION_UNTICKED "
                  "(isolated, not_needed, not_isolated); blank when none was asked.",
    )
    isolation_at_finish = models.JSONField(
        null=True, blank=True,
        help_text="The energy isolation as it stood when the work was finished, so that a later change of the register "
                  "cannot change the record: the points its lockout locked (id, energy, telescope, subsystem, the line "
                  "as it read) and the warnings of points the register lacked. Null for orders not finished, and for "
                  "those finished before it was kept (they read the register as it is).",
    )
    crew = models.JSONField(
        null=True, blank=True,
        help_text="Who did the work with the person who finished it, names as printed on its crew lines: the people "
                  "chosen by account (crew_members) as they were named then, and the others typed by name (visitors, "
                  "contractors); [] when none was named, null for orders finished before the form asked.",
    )
    crew_members = models.ManyToManyField(
        settings.AUTH_USER_MODEL, through=CrewMember, blank=True, related_name="+",
        help_text="The people of the crew chosen by their accounts on the finish form: none of them may countersign "
                  "the work (selectors.on_the_crew).",
    )
    hand_back_left_to = models.ManyToManyField(
        "self", symmetrical=False, blank=True, related_name="hand_backs_held",
        help_text="The orders still at work on the telescope when this one was finished or withdrawn with its "
                  "hand-back to robotic and remote control not done, whose crews it was left to (the last crew out "
                  "hands the telescope back: services.left_to_the_last_crew); their pages say they hold it.",
    )
    crew_by_account = models.BooleanField(
        default=False,
        help_text="Finished since the finish form chose the crew's people by account: crew_members alone is who did "
                  "the work with the person finishing. False for orders finished before, whose crew is only names as "
                  "typed.",
    )

    class Meta:
        ordering = ["-created_at"]
        indexes = [models.Index(fields=["site", "state", "planned_date"])]

    def __str__(self) -> str:
        return f"{self.number} {self.title}"

    @property
    def number(self) -> str:
        return f"WO-{self.pk:05d}" if self.pk else "WO-new"

    def get_absolute_url(self) -> str:
        return reverse("workorder-detail", args=[self.pk])

    @property
    def step_list(self) -> list[str]:
        return [line.strip() for line in self.steps.splitlines() if line.strip()]

    @property
    def tool_list(self) -> list[str]:
        return [line.strip() for line in self.tools.splitlines() if line.strip()]

    def clean(self) -> None:
        """What a form may change of an order as stored. The admin's change form, the admin history's revert (which
        would bring back every field of an earlier version, state and steps included) and the edit page all save
        through a form that calls this; the lifecycle moves go through ``services.work_order_move`` and
        ``services.work_order_finish``, never a form.

        Finished, countersigned or withdrawn, the order is the record: nothing of it changes
        (``closed_edit_refusal``). Once the work has started, what its checklist is made of stays as stored
        (``FIXED_ONCE_STARTED``). And its state is never moved by a form (``state_move_refusal``)."""
        stored = WorkOrder.objects.filter(pk=self.pk).values(*RECORD_FIELDS).first() if self.pk else None
        changed = [field for field in RECORD_FIELDS if stored and getattr(self, field) != stored[field]]
        if not changed:
            return
        if why := self.closed_edit_refusal(_field_names(changed)):
            raise ValidationError(why)
        if set(changed) & set(FIXED_ONCE_STARTED):
            if why := self.started_edit_refusal("steps, hazards, telescope and state"):
                raise ValidationError(why)
        if "state" in changed:
            raise ValidationError(self.state_move_refusal(stored["state"], self.state))

    def _stored_state(self) -> str | None:
        return WorkOrder.objects.filter(pk=self.pk).values_list("state", flat=True).first() if self.pk else None

    def started_edit_refusal(self, what: str) -> str:
        """Why ``what`` ("the subsystems it covers") of this order may not change, "" while it may: as stored, a
        draft or an issued order is still edited. Underway, the technicians tick its lockout step, the steps done with
        the energy isolated and the isolation points it locks (its telescope's and its subsystems') as they stand, so a
        change would move them under the lockout in progress; finished or withdrawn, it is the record
        (``closed_edit_refusal``)."""
        if self._stored_state() == State.UNDERWAY:
            return (
                f"{self.number} is underway: its {what} are not changed while the work is underway, since its lockout "
                "step, the steps done with the energy isolated and the isolation points it locks are ticked as they "
                "stand. To change the work, leave it safe, withdraw this order on its page (saying why) and make a new "
                "one."
            )
        return self.closed_edit_refusal(what)

    def closed_edit_refusal(self, what: str) -> str:
        """Why ``what`` ("findings") of this order may not change because, as stored, it is finished, countersigned
        or withdrawn (``CLOSED_STATES``), and how such a record is corrected; "" while it is not closed."""
        state = self._stored_state()
        if state not in CLOSED_STATES:
            return ""
        return f"{self.number} is {State(state).label}: its record stays as it was, its {what} included. " + (
            RECORD_CORRECTED[state]
        )

    def state_move_refusal(self, stored: str, asked: str) -> str:
        """Why a form may not move this order from ``stored`` to ``asked``: each move is made on the order's page,
        where the lifecycle's conditions are checked and its dates and records written (``lifecycle.TRANSITIONS``)."""
        from .lifecycle import available  # lifecycle reads State from this module

        moves = ", ".join(f"'{t.label}'" for t in available(stored))
        onward = f"it moves on only by the lifecycle, on its page: {moves}" if moves else "it moves no further"
        return (
            f"{self.number} is {State(stored).label}: its state is not changed here (to {State(asked).label}). From "
            f"{State(stored).label} {onward}."
        )


#: The states in which the work is over, done or given up: the order is part of the record from then on.
CLOSED_STATES = (State.FINISHED, State.COUNTERSIGNED, State.WITHDRAWN)
#: How a closed order's record is corrected, by its state: finishing wrote service records, which are corrected by a
#: new record that points back to the one it replaces (``logbook.models.ServiceRecord.corrects``).
_FINISHED_CORRECTED = (
    "Finished work orders are part of the record: correct them with a new service record (\"correct\" beside its "
    "service record on the subsystem page), which points back to the one it replaces."
)
RECORD_CORRECTED = {
    State.FINISHED: _FINISHED_CORRECTED,
    State.COUNTERSIGNED: _FINISHED_CORRECTED,
    State.WITHDRAWN: "Withdrawn work orders are part of the record: for the work, make a new work order.",
}
#: What an order's checklist is made of, with the state it is in: its steps (the lockout step, the work done locked
#: out), its hazards (whether it is locked out at all, and its cautions), its telescope (whose isolation points the
#: lockout step locks) and whether the work is at the telescope. Fixed once the work has started (``WorkOrder.clean``).
FIXED_ONCE_STARTED = ("state", "steps", "hazards", "telescope_id", "at_telescope")
#: Every stored field of an order but its id: all fixed once it is closed (``WorkOrder.clean``).
RECORD_FIELDS = tuple(field.attname for field in WorkOrder._meta.concrete_fields if not field.primary_key)


def listed(words: list[str]) -> str:
    """``words`` in a sentence: "a", "a and b", "a, b and c"."""
    return " and ".join([", ".join(words[:-1]), words[-1]] if len(words) > 1 else words)


def _field_names(attnames: list[str]) -> str:
    """The fields as people read them, e.g. "findings and actual hours"."""
    return listed([str(WorkOrder._meta.get_field(attname).verbose_name) for attname in attnames])


class WorkOrderItem(models.Model):
    """One subsystem (and, when it comes from a due item, its plan) that a work order covers."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    work_order = models.ForeignKey(WorkOrder, on_delete=models.CASCADE, related_name="items")
    subsystem = models.ForeignKey(Subsystem, on_delete=models.PROTECT, related_name="+")
    plan = models.ForeignKey("planning.ServicePlan", null=True, blank=True, on_delete=models.PROTECT, related_name="+")
    why = models.TextField(blank=True, help_text="The due reason when the work order was made.")

    class Meta:
        ordering = ["pk"]

    def __str__(self) -> str:
        plan = f": {self.plan.name}" if self.plan_id else ""
        return f"{self.work_order.number}: {self.subsystem}{plan}"


class RequiredReading(models.Model):
    """A reading the technician must record to finish the work order."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    work_order = models.ForeignKey(WorkOrder, on_delete=models.CASCADE, related_name="required_readings")
    subsystem = models.ForeignKey(Subsystem, on_delete=models.PROTECT, related_name="+")
    quantity = models.CharField(max_length=40, choices=QUANTITY_CHOICES)
    unit = models.CharField(max_length=16)
    limit_text = models.CharField(max_length=160, blank=True)
    reading = models.OneToOneField(
        "logbook.Reading", null=True, blank=True, on_delete=models.PROTECT, related_name="+",
        help_text="The logbook reading recorded on completion.",
    )
    not_measured = models.CharField(
        max_length=200, blank=True,
        help_text="Why the reading was not taken, as the person finishing said it (no meter on site, say); empty when "
                  "it was recorded.",
    )

    class Meta:
        ordering = ["pk"]

    def __str__(self) -> str:
        limit = f", {self.limit_text}" if self.limit_text else ""
        recorded = f": recorded {self.reading.value:g} {self.unit}" if self.reading_id else ""
        return f"{self.work_order.number}: {self.subsystem}: {self.quantity_label} ({self.unit}){limit}{recorded}"

    @property
    def quantity_label(self) -> str:
        return QUANTITIES[self.quantity][0]

    @property
    def limit_value(self) -> float | None:
        """The number of a limit written "at most L" or "at least L", as a reading trigger's limit is written on the
        order; None for a limit in words ("within the maker's range") or none."""
        match = _LIMIT.fullmatch(self.limit_text.strip())
        return None if match is None else float(match["limit"])

    def beyond_limit(self, value: float | None) -> bool:
        """True when ``value`` is past a limit written "at most L" or "at least L" (``limit_value``). A limit in
        words is not judged here."""
        limit = self.limit_value
        if limit is None or value is None:
            return False
        return value > limit if "at most" in self.limit_text else value < limit

    @property
    def recorded_beyond_limit(self) -> bool:
        """The recorded reading is past its limit (it was recorded as measured, and the record flags it)."""
        return self.reading is not None and self.beyond_limit(self.reading.value)


_LIMIT = re.compile(r"at (?P<side>most|least) (?P<limit>[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)")


#: The most of one part that a stock figure, a count or an order's part line takes: a site's spares run to tens or
#: hundreds of a kind, so a figure beyond it is a slip of the keyboard (1e9 typed for 1), which would leave a shortfall
#: of hundreds of millions to count. Our own bound (common practice, no published source).
PART_QUANTITY_MAX = 10_000


def part_quantity_too_many(label: str) -> str:
    """What is said of a quantity of a part above ``PART_QUANTITY_MAX``, named by ``label`` ("Filter used (each)"),
    without a closing full stop: the models' validators, the forms and the services' refusals all say it so."""
    return f"{label}: more than {PART_QUANTITY_MAX:,} of one part is not accepted; check the figure"


#: Units of the parts register that are things counted, singular to plural: "2 sets", "1 pack". Any other unit
#: (each, a measure such as m, kg or l, an abbreviation) prints as the register writes it: "2 each", "1.5 m".
_COUNTED_PLURALS = {
    "bottle": "bottles", "box": "boxes", "cylinder": "cylinders", "kit": "kits", "pack": "packs", "pair": "pairs",
    "piece": "pieces", "roll": "rolls", "set": "sets", "swab": "swabs", "unit": "units",
}
_COUNTED_SINGULARS = {plural: singular for singular, plural in _COUNTED_PLURALS.items()}
#: Units a part is counted in whole: a register in one of these holds whole parts, so 1.5 of them is a slip (half a
#: fan is not a part). Other units (m, kg, l, g ...) take fractions. Our own list, common practice: the things
#: counted above, singular and plural, and the words for one of anything.
COUNTED_UNITS = frozenset({"each", "ea", "pc", "pcs", *_COUNTED_PLURALS, *_COUNTED_PLURALS.values()})


def counted_whole(unit: str) -> bool:
    """Whether a part in ``unit`` is counted in whole parts (``COUNTED_UNITS``)."""
    return unit.strip().lower() in COUNTED_UNITS


def amount_text(quantity: float, unit: str) -> str:
    """A quantity with its unit as it reads: "1 set", "2 sets", "3 each", "0.5 m"."""
    word = unit.strip()
    table = _COUNTED_SINGULARS if quantity == 1 else _COUNTED_PLURALS
    return f"{quantity:g} {table.get(word.lower(), word)}".rstrip()


def part_quantity_not_whole(part: Part, quantity: float, label: str) -> str:
    """Why ``quantity`` of ``part`` cannot be right as a count ("" when it can): a part counted in whole units
    (``COUNTED_UNITS``) given a fraction. ``label`` names the figure, as ``part_quantity_too_many``'s does."""
    if counted_whole(part.unit) and quantity != int(quantity):
        return f"{label}: {quantity:g} is not a whole number, and {part.name} is counted in whole parts ({part.unit})"
    return ""


def _at_most_part_quantity(label: str) -> MaxValueValidator:
    return MaxValueValidator(PART_QUANTITY_MAX, message=f"{part_quantity_too_many(label)}.")


class Part(models.Model):
    """A spare part kept in stock at a site."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    site = models.ForeignKey(Site, on_delete=models.PROTECT, related_name="parts")
    name = models.CharField(
        max_length=120, validators=[validate_one_line],
        help_text="As the service plans' parts lines name it (\"2 x Brake pad set\"): a drafted order reserves the "
        "part whose name a line gives. Unique at the site, capitals and surrounding spaces aside.",
    )
    part_number = models.CharField(max_length=60, blank=True)
    quantity_on_hand = models.FloatField(
        default=0, validators=[MinValueValidator(0), _at_most_part_quantity("Quantity on hand")]
    )
    reorder_point = models.FloatField(
        default=0, validators=[MinValueValidator(0), _at_most_part_quantity("Reorder point")]
    )
    unit = models.CharField(max_length=16, default="each")
    location = models.CharField(max_length=80, blank=True)

    class Meta:
        ordering = ["site", "name"]
        constraints = [models.UniqueConstraint(fields=["site", "name"], name="part_name_unique_per_site")]

    def __str__(self) -> str:
        return f"{self.name} ({self.part_number})" if self.part_number else self.name

    def clean(self) -> None:
        """A name another part of the site already has, capitals and surrounding spaces aside, is refused: a plan's
        parts line would name both, and a drafted order would reserve one of them by chance
        (``selectors.register_part``)."""
        if not self.site_id or not self.name:
            return
        others = Part.objects.filter(site_id=self.site_id).exclude(pk=self.pk).values_list("name", flat=True)
        if twin := name_alike(self.name, others):
            raise ValidationError({"name": (
                f"Name: \"{self.name.strip()}\" is the name of another part at this site, \"{twin.strip()}\", "
                "but for capitals or spaces, and a service plan's parts line could not tell the two apart. Use that "
                "part, or give this one a name of its own."
            )})

    @property
    def low(self) -> bool:
        return self.quantity_on_hand <= self.reorder_point


class PartUse(models.Model):
    """A part planned for a work order, and how many were used on completion."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    work_order = models.ForeignKey(WorkOrder, on_delete=models.CASCADE, related_name="part_uses")
    part = models.ForeignKey(Part, on_delete=models.PROTECT, related_name="uses")
    quantity_planned = models.FloatField(
        default=1, validators=[MinValueValidator(0), _at_most_part_quantity("Quantity planned")]
    )
    quantity_used = models.FloatField(
        null=True, blank=True, validators=[MinValueValidator(0), _at_most_part_quantity("Quantity used")]
    )
    quantity_short = models.FloatField(
        default=0, validators=[MinValueValidator(0)],
        help_text="How many of those used the parts register did not hold when the work was finished: the register "
                  "was brought to zero, and the difference waits for the site engineer to count the stock.",
    )
    short_counted_at = models.DateTimeField(
        null=True, blank=True,
        help_text="When the stock was counted and the register corrected after the shortfall; empty while it waits.",
    )

    class Meta:
        ordering = ["pk"]

    def __str__(self) -> str:
        used = f", {self.quantity_used:g} used" if self.quantity_used is not None else ""
        return f"{self.work_order.number}: {self.part}, {self.quantity_planned:g} {self.part.unit} planned{used}"

    @property
    def short_to_count(self) -> bool:
        """Used beyond the register, and the stock not counted since."""
        return self.quantity_short > 0 and self.short_counted_at is None


class IsolationPoint(models.Model):
    """Where an energy source of a telescope is isolated and locked out (for the lockout step)."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    class Energy(models.TextChoices):
        AC = "ac", "AC mains"
        DC = "dc", "DC supplies"
        SERVO = "servo", "servo drives"
        AIR = "air", "compressed air"
        HYDRAULIC = "hydraulic", "hydraulic pressure"
        OTHER = "other", "other"

    telescope = models.ForeignKey(Telescope, on_delete=models.CASCADE, related_name="isolation_points")
    subsystem = models.ForeignKey(
        Subsystem, on_delete=models.CASCADE, null=True, blank=True, related_name="isolation_points",
        help_text="For a subsystem with a supply of its own, e.g. the dome's drives: listed on its orders and on every "
        "order at a telescope that can move. Blank: for all work on the telescope.",
    )
    energy = models.CharField(
        max_length=16, choices=Energy.choices,
        help_text="The energy it isolates: its work orders print that energy's caution (workorders.cautions).",
    )
    label = models.CharField(max_length=120, validators=[validate_one_line],
                             help_text="What to switch, lock and tag, e.g. 'Mount main isolator'.")
    location = models.CharField(max_length=120, blank=True)
    verify = models.CharField(max_length=160, blank=True, help_text="How to prove it is dead (test before touch).")

    class Meta:
        ordering = ["telescope", "energy", "label"]

    def __str__(self) -> str:
        return f"{self.get_energy_display()}: {self.label}"

    def clean(self) -> None:
        if self.subsystem_id and self.telescope_id and self.subsystem.telescope_id != self.telescope_id:
            raise ValidationError({"subsystem": "The subsystem must belong to the point's telescope."})
        if self.telescope_id and self.label and named_anew(self, "label", "telescope_id", "subsystem_id", "energy"):
            # Two points of one energy by one name where one order locks both (the same subsystem's, or one of them
            # the whole telescope's): the lockout would list the name twice, and which is which is left to the crew
            # at the panel (a site review registered one isolator twice).
            scope = models.Q(subsystem__isnull=True) | models.Q(subsystem_id=self.subsystem_id)
            others = (IsolationPoint.objects.filter(scope, telescope_id=self.telescope_id, energy=self.energy)
                      .exclude(pk=self.pk).values_list("label", flat=True))
            if (alike := name_alike(self.label, others)) is not None:
                raise ValidationError({"label": (
                    f"{alike!r} ({self.get_energy_display()}) is already registered for this telescope: the lockout "
                    "would list two points by one name. If it is the same point, edit that one; if not, name this "
                    "one apart (where it is, what it feeds)."
                )})

    @property
    def description(self) -> str:
        """The point in one line, as the page, the checklist record and the printed sheet word it."""
        where = f"{self.telescope.name}: {self.subsystem.name}" if self.subsystem_id else self.telescope.name
        return (
            f"{where}: {self.get_energy_display()}: {self.label}"
            + (f" ({self.location})" if self.location else "")
            + (f"; prove dead: {self.verify}" if self.verify else "")
        )


class EnergyControlInspection(models.Model):
    """A periodic inspection of a telescope's energy control procedure: at least once a year an authorised person
    other than those using it watches the lockout done and checks it against the procedure, and certifies it (OSHA 29
    CFR 1910.147(c)(6): the equipment, the date, the employees observed and the inspector). An auditor's review found
    nowhere to keep it. ``selectors.energy_control_inspections`` says which are due; the site's dashboard shows them."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive

    telescope = models.ForeignKey(Telescope, on_delete=models.PROTECT, related_name="energy_control_inspections")
    inspected_on = models.DateField(help_text="The day the inspection was made (the site's date).")
    inspector = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+",
        help_text="The authorised person who made it: not one of those using the procedure that day.",
    )
    employees = models.CharField(
        max_length=300, validators=[validate_one_line],
        help_text="Who was observed applying the procedure, e.g. 'Pavo Linnet, Ivo Tarrant'.",
    )
    findings = models.TextField(
        help_text="What was checked, any deviation or inadequacy found, and what was done about it; 'none found' when "
                  "the procedure was followed as written.",
    )
    recorded_by = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+",
                                    editable=False)
    recorded_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["telescope", "-inspected_on", "-pk"]

    def __str__(self) -> str:
        return f"{self.telescope}: energy control procedure inspected {self.inspected_on:%d %b %Y}"


class ChecklistTick(models.Model):
    """One tick on a work order's checklist (a step done, an isolation point locked out), or one taken back.

    Append-only: taking a tick back is a new row with ``ticked=False``, never a delete, so the record keeps
    who confirmed what and when, and who took it back. The newest row for a step or a point gives its
    state. A step is known by its position in ``WorkOrder.step_list``, a point by its id. What was ticked is
    copied at the time, so a later edit of the steps or of the point register cannot change what was
    confirmed, and a tick whose copied text no longer reads as the line does now counts for nothing.
    """

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive

    class Kind(models.TextChoices):
        STEP = "step", "step"
        POINT = "point", "isolation point"

    work_order = models.ForeignKey(WorkOrder, on_delete=models.CASCADE, related_name="ticks")
    kind = models.CharField(max_length=8, choices=Kind.choices)
    step_index = models.PositiveSmallIntegerField(
        null=True, blank=True, help_text="Position of the step in the work order's step list, counted from 0."
    )
    isolation_point = models.ForeignKey(
        IsolationPoint, null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    text = models.TextField(help_text="What was ticked, as it read at the time.")
    ticked = models.BooleanField(help_text="False when this row takes an earlier tick back.")
    result = models.CharField(
        max_length=200, blank=True, default="",
        help_text="What was found, for a step that asks for its result (registry.catalogue.asks_result).",
    )
    in_place_of_holder = models.CharField(
        max_length=300, blank=True, default="",
        help_text="An engineer's tick on a lock's line in place of whoever put the lock on: why (that person not at "
        "the site, how they were sought, how they will be told before they are back at work: OSHA 29 CFR "
        "1910.147(e)(3)). Empty otherwise.",
    )
    recorded_at = models.DateTimeField(auto_now_add=True)
    recorded_by = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")

    class Meta:
        ordering = ["pk"]
        constraints = [
            models.CheckConstraint(
                condition=(
                    models.Q(kind="step", step_index__isnull=False, isolation_point__isnull=True)
                    | models.Q(kind="point", step_index__isnull=True, isolation_point__isnull=False)
                ),
                name="checklist_tick_names_one_step_or_one_point",
            )
        ]

    def __str__(self) -> str:
        return f"{self.work_order.number}: {'ticked' if self.ticked else 'taken back'}: {self.text[:60]}"

    @property
    def line(self) -> tuple[str, int | None]:
        """Which checklist line this row is about: (kind, step position or isolation point id)."""
        return self.kind, self.step_index if self.kind == self.Kind.STEP else self.isolation_point_id
