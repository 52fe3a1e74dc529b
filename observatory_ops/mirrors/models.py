"""A mirror's geometry and history: coatings, cleanings, reflectance measurements; recoat plans."""
from __future__ import annotations

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MaxValueValidator, MinValueValidator
from django.db import models
from django.urls import reverse
from simple_history.models import HistoricalRecords

from observatory_ops.calc import exposure
from observatory_ops.calc.coating import MATERIALS, METALS
from observatory_ops.calc.lifting import DENSITY
from observatory_ops.logbook.quantities import reflectance_text
from observatory_ops.registry.catalogue import KINDS
from observatory_ops.registry.models import Subsystem

#: The catalogue's mirror kinds (registry/catalogue.py), in the order light meets them: a telescope's
#: optical train. Only a subsystem of one of them takes a mirror record; one without a record is a gap in the
#: train's throughput, and its recoat line is not judged.
TRAIN_KINDS = ("primary_mirror", "secondary_mirror")


class Mirror(models.Model):
    """The optical facts of a mirror subsystem (primary or secondary)."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    subsystem = models.OneToOneField(Subsystem, on_delete=models.PROTECT, related_name="mirror")
    diameter_mm = models.FloatField(validators=[MinValueValidator(1)])
    thickness_mm = models.FloatField(validators=[MinValueValidator(1)])
    hole_mm = models.FloatField(default=0, validators=[MinValueValidator(0)])
    material = models.CharField(max_length=24, choices=[(k, k.replace("_", " ")) for k in DENSITY])
    lightweighting_fraction = models.FloatField(default=0, validators=[MinValueValidator(0), MaxValueValidator(0.95)])
    # No default: a cell weighs something, and a 0 nobody typed left the cell out of the lifting figures unnoticed.
    cell_mass_kg = models.FloatField(
        null=True, blank=True, validators=[MinValueValidator(0)],
        help_text="Mass of the cell the mirror is lifted in, and anything else below the hook with it, in kg. Empty: "
        "not entered, so the lifting figures are the mirror alone and a lift of the mirror in its cell is not "
        "started. 0: the mirror is lifted without its cell.",
    )
    recoat_loss = models.FloatField(
        default=0.08, validators=[MinValueValidator(0.001), MaxValueValidator(0.9)],
        help_text="Recoat when band reflectance has fallen by this fraction of its fresh value (0.08 = 8 %; "
        "the default is common practice, no published source).",
    )
    band_from_nm = models.FloatField(default=400)
    band_to_nm = models.FloatField(default=1000)
    dust_sensitivity = models.FloatField(
        default=1.0, validators=[MinValueValidator(0), MaxValueValidator(exposure.DUST_SENSITIVITY_MAX)],
        help_text="How much dust counts in the mirror's exposure: an open hour weighs 1 + this x the night's PM10 "
        "excess over clean air (0: dust does not matter; 1: an hour at twice the clean-air PM10 counts as two; at "
        "most 10). The reflectance decline is fitted against these weighted hours.",
    )

    def __str__(self) -> str:
        return str(self.subsystem)

    def get_absolute_url(self) -> str:
        return reverse("mirror-detail", args=[self.pk])

    def clean(self) -> None:
        if self.subsystem_id and self.subsystem.kind not in TRAIN_KINDS:
            kinds = " or ".join(KINDS[code].label.lower() for code in TRAIN_KINDS)
            raise ValidationError({"subsystem": f"{self.subsystem} is of the kind {self.subsystem.kind_label}: a "
                                                f"mirror record belongs only to a {kinds} subsystem, since it joins "
                                                "the telescope's optical train and sets the recoat line."})
        if self.hole_mm >= self.diameter_mm:
            raise ValidationError({"hole_mm": "The central hole must be smaller than the mirror."})
        if self.band_from_nm >= self.band_to_nm:
            raise ValidationError({"band_to_nm": "The band must end above where it starts."})

    @property
    def lift_inputs(self) -> dict:
        """``calc.lifting.lift_figures``'s inputs for the mirror in its cell, as a work order stores them; the cell
        mass None while not entered (an order's figures take it from here once it is: workorders.selectors
        .lift_inputs)."""
        return {
            "diameter_mm": self.diameter_mm, "thickness_mm": self.thickness_mm, "hole_mm": self.hole_mm,
            "material": self.material, "lightweighting_fraction": self.lightweighting_fraction,
            "fixture_kg": self.cell_mass_kg, "legs": 2, "angle_deg": 60,
        }


def validate_layers(value) -> None:
    if not isinstance(value, list):
        raise ValidationError("layers must be a list")
    for layer in value:
        if not isinstance(layer, dict) or layer.get("material") not in MATERIALS:
            raise ValidationError(f"each layer needs a material from {', '.join(MATERIALS)}")
        thickness = layer.get("thickness_nm")
        if not isinstance(thickness, int | float) or thickness < 0:
            raise ValidationError("each layer needs a thickness of 0 nm or more")


#: The names of the mirror metals (``calc.coating.METALS``) as pages and forms show them.
METAL_NAMES = {"al": "Aluminium (Al)", "ag": "Silver (Ag)"}


class CoatingEvent(models.Model):
    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    mirror = models.ForeignKey(Mirror, on_delete=models.PROTECT, related_name="coatings")
    coated_on = models.DateField()
    metal = models.CharField(max_length=4, choices=[(m, METAL_NAMES[m]) for m in METALS])
    layers = models.JSONField(default=list, blank=True, validators=[validate_layers],
                              help_text='Overcoats from the metal outward: [{"material": "SiO2", "thickness_nm": 100}]')
    note = models.CharField(max_length=200, blank=True)

    class Meta:
        ordering = ["-coated_on"]

    def __str__(self) -> str:
        return f"{self.coated_on} {self.recipe}"

    @property
    def recipe(self) -> str:
        overcoats = [f"{x['material']} {x['thickness_nm']:g} nm" for x in self.layers]
        return " + ".join([self.metal.capitalize(), *overcoats])


class CleaningEvent(models.Model):
    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    class Method(models.TextChoices):
        CO2_SNOW = "co2_snow", "CO2 snow"
        WASH = "wash", "wash"

    mirror = models.ForeignKey(Mirror, on_delete=models.PROTECT, related_name="cleanings")
    cleaned_on = models.DateField()
    method = models.CharField(max_length=12, choices=Method.choices)
    note = models.CharField(max_length=200, blank=True)
    work_order = models.ForeignKey(
        "workorders.WorkOrder", null=True, blank=True, on_delete=models.PROTECT, related_name="cleanings",
        help_text="The work order whose finishing recorded it; empty for a cleaning logged on the mirror's page.",
    )

    class Meta:
        ordering = ["-cleaned_on"]

    def __str__(self) -> str:
        return f"{self.mirror}: cleaned {self.cleaned_on:%d %b %Y} ({self.get_method_display()})"


class ReflectanceMeasurement(models.Model):
    """A measured reflectance (0..1): at one wavelength or averaged over the mirror's band. Append-only."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    mirror = models.ForeignKey(Mirror, on_delete=models.PROTECT, related_name="measurements")
    measured_on = models.DateField()
    value = models.FloatField(validators=[MinValueValidator(0), MaxValueValidator(1)])
    wavelength_nm = models.FloatField(null=True, blank=True, help_text="Empty: averaged over the mirror's band.")
    position = models.CharField(max_length=60, blank=True, help_text="Where on the mirror, e.g. 'centre', 'r=0.7 N'.")
    instrument = models.CharField(max_length=80, blank=True)
    before_cleaning = models.BooleanField(
        default=False,
        help_text="Measured before the mirror's cleaning of the same day: the decline fit counts it before that "
                  "cleaning. Otherwise a measurement on a cleaning day counts as taken after the cleaning.",
    )
    taken_by = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")
    reading = models.OneToOneField(
        "logbook.Reading", null=True, blank=True, on_delete=models.PROTECT, related_name="mirror_measurement",
        help_text="The logbook reading this measurement comes from (subsystem page or work order); empty when "
        "it was entered as a measurement (mirror page or admin).",
    )
    withdrawn_at = models.DateTimeField(
        null=True, blank=True, editable=False,
        help_text="Set when the measurement was withdrawn as wrong (``services.measurement_withdraw``): it stays "
        "listed, marked, and the decline fit leaves it out.",
    )
    withdrawn_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT, related_name="+", editable=False,
    )
    withdrawn_reason = models.CharField(max_length=200, blank=True, editable=False)

    class Meta:
        ordering = ["measured_on", "pk"]

    def __str__(self) -> str:
        """"T1: Primary mirror: reflectance 0.8600 at 550 nm, 01 Jun 2025", and "(withdrawn)" once it is."""
        where = f"at {self.wavelength_nm:g} nm" if self.wavelength_nm is not None else "over its band"
        withdrawn = " (withdrawn)" if self.withdrawn_at else ""
        return (f"{self.mirror}: reflectance {reflectance_text(self.value)} {where}, "
                f"{self.measured_on:%d %b %Y}{withdrawn}")

    @property
    def source(self) -> str:
        """The logbook reading the measurement came from (with its note), for the mirror page; blank otherwise."""
        if self.reading_id is None:
            return ""
        note = self.reading.note
        return f"logbook reading ({note})" if note else "logbook reading"


class RecoatPlan(models.Model):
    """A chosen downtime window turned into a sequence of work orders."""

    history = HistoricalRecords()  # who changed what, when: see observatory_ops/archive
    mirror = models.ForeignKey(Mirror, on_delete=models.PROTECT, related_name="recoat_plans")
    starts_on = models.DateField()
    ends_on = models.DateField()
    phases = models.JSONField(
        help_text="The phases that take days, in order: "
        '[{"name": ..., "days": ..., "first": ISO date, "last": ISO date}] '
        "(a phase at the telescope may pause over the crew's days off, so its last day is stored, not counted)."
    )
    cost = models.FloatField(help_text="Expected usable moonless open hours lost in the window.")
    created_at = models.DateTimeField(auto_now_add=True)
    created_by = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+")
    work_orders = models.ManyToManyField("workorders.WorkOrder", related_name="recoat_plans", blank=True)
    continues_from = models.ForeignKey(
        "workorders.WorkOrder", null=True, blank=True, on_delete=models.PROTECT, related_name="+", editable=False,
        help_text="The finished removal of an earlier recoat, stopped with the mirror out, that this recoat goes on "
        "from: it has no removal of its own (``mirrors.services.mirror_out``).",
    )

    class Meta:
        ordering = ["-starts_on"]

    def __str__(self) -> str:
        return f"{self.mirror}: recoat from {self.starts_on:%d %b %Y} to {self.ends_on:%d %b %Y}"

    @property
    def nights(self) -> int:
        """The nights the telescope is out of service: its first day to its last, both counted."""
        return (self.ends_on - self.starts_on).days + 1

    def removal(self):
        """The removal that takes or took this recoat's mirror out: its own phase order (withdrawn or not), or the
        earlier recoat's it goes on from (``continues_from``); None for neither. Reads ``work_orders`` as
        prefetched."""
        own = next((o for o in self.work_orders.all() if o.recoat_phase == "removal"), None)
        return own if own is not None else self.continues_from
