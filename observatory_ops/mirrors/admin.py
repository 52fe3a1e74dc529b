from collections.abc import Callable

from django import forms
from django.contrib import admin
from django.forms.models import BaseInlineFormSet
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.calc.exposure import DUST_SENSITIVITY_MAX
from observatory_ops.logbook.services import date_problem, service_date_problem
from observatory_ops.planning.admin import RecomputesSite
from observatory_ops.registry.forms import ChoicesNamedWithSite, ProtectedNamed
from observatory_ops.registry.services import retired_work_problem
from observatory_ops.workorders.forms import (
    HEAVIEST_LOAD,
    LARGEST_MIRROR,
    LIFTED_MASS_MAX_KG,
    MIRROR_DIAMETER_MAX_MM,
    MIRROR_DIAMETER_MIN_MM,
    MIRROR_THICKNESS_MAX_MM,
    MIRROR_THICKNESS_MIN_MM,
    THICKEST_MIRROR,
    millimetres_at_least,
    within_bounds,
)

from . import services
from .forms import MEASURABLE_NM, CoatingEventAdminForm, MeasurementChecks, MirrorAdminForm
from .models import CleaningEvent, CoatingEvent, Mirror, RecoatPlan, ReflectanceMeasurement


class RestartsPlansFormSet(BaseInlineFormSet):
    """Coating or cleaning rows: each one added (or redated) here restarts the mirror's plans as one logged on the
    mirror page does, through the same service (``restart``), so its date must suit a service record, and not come
    after the day the mirror was retired (``registry.services.retired_work_problem``), as on the mirror page."""

    date_field: str
    event: str  # "coating" or "cleaning"
    restarts: str  # the plans it restarts, in words
    restart: Callable  # the service that restarts them: services.<event>_service_records_log(event, by)

    def clean(self):
        super().clean()
        site = self.instance.subsystem.telescope.site if self.instance.subsystem_id else None
        for form in self.forms:
            day = form.cleaned_data.get(self.date_field) if hasattr(form, "cleaned_data") else None
            redated = self.date_field in form.changed_data
            if site is None or day is None or self._should_delete_form(form) or not redated:
                continue
            if problem := service_date_problem(site, day):
                why = f"The {self.event} restarts the mirror's {self.restarts} from this date, and {problem}."
                form.add_error(self.date_field, why)
            elif problem := retired_work_problem(self.instance.subsystem, day, f"A {self.event}"):
                form.add_error(self.date_field, problem)

    def events_to_restart_from(self) -> list:
        """The rows saved as new, or with a new date."""
        redated = [event for event, fields in self.changed_objects if self.date_field in fields]
        return [*self.new_objects, *redated]


class CoatingFormSet(RestartsPlansFormSet):
    date_field, event, restarts = "coated_on", "coating", "recoat plans"
    restart = staticmethod(services.coating_service_records_log)


class CleaningFormSet(RestartsPlansFormSet):
    date_field, event, restarts = "cleaned_on", "cleaning", "cleaning plans"
    restart = staticmethod(services.cleaning_service_records_log)


class CoatingInline(admin.StackedInline):
    """Stacked, so each field's help (the overcoats' format above all) shows under it, not in a tooltip."""

    model = CoatingEvent
    form = CoatingEventAdminForm
    formset = CoatingFormSet
    extra = 0


class CleaningInline(admin.TabularInline):
    model = CleaningEvent
    formset = CleaningFormSet
    extra = 0
    # Set by the finish of the order that did the cleaning (workorders.services.work_order_finish), never chosen: a
    # site review linked a cleaning to another site's order from this list.
    readonly_fields = ("work_order",)


def band_edge_problem(label: str, value_nm: float) -> str:
    """What is wrong with a mirror's band edge, "" when nothing is. The band must lie where the optical data of every
    coating material overlap (``MEASURABLE_NM``, from ``calc.coating``), so the fresh value of any coating the mirror
    is given, now or at its next recoat, can be computed over it; an edge typed in micrometres is named as such."""
    low, high = MEASURABLE_NM
    if low <= value_nm <= high:
        return ""
    overlap = (f"{low:,g} to {high:,g} nm, where the optical data of every coating material overlap, so that the fresh "
               "value of any coating can be computed over the band")
    if low <= value_nm * 1000 <= high:
        return (f"{label}: {value_nm:g} looks like micrometres: {value_nm * 1000:g} nm. The band is in nanometres, "
                f"{overlap}.")
    return f"{label}: {value_nm:g} nm is outside {overlap}. The band is in nanometres."


class MirrorRecordForm(MirrorAdminForm):
    """The mirror admin's form, its figures held to bounds: the band where the fresh value can be computed
    (``band_edge_problem``), the diameter, thickness and cell mass to the lift form's bounds (``workorders.forms``), so
    the figures a lift takes from the record are ones that form takes, and the dust sensitivity to
    ``calc.exposure.DUST_SENSITIVITY_MAX``. A figure out of bounds is refused beside its field; nothing is stored."""

    BOUNDS = {
        "diameter_mm": [within_bounds("Diameter (mm)", 0, MIRROR_DIAMETER_MAX_MM, LARGEST_MIRROR, above_low=True),
                        millimetres_at_least("Diameter (mm)", MIRROR_DIAMETER_MIN_MM)],
        "thickness_mm": [within_bounds("Thickness (mm)", 0, MIRROR_THICKNESS_MAX_MM, THICKEST_MIRROR, above_low=True),
                         millimetres_at_least("Thickness (mm)", MIRROR_THICKNESS_MIN_MM)],
        "cell_mass_kg": [within_bounds("Cell mass (kg)", 0, LIFTED_MASS_MAX_KG, HEAVIEST_LOAD)],
        "dust_sensitivity": [within_bounds("Dust sensitivity", 0, DUST_SENSITIVITY_MAX,
                                           "0: dust does not matter; 1: an hour at twice the clean-air PM10 counts "
                                           "as two")],
    }

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        for name, checks in self.BOUNDS.items():
            self.fields[name].validators.extend(checks)
        low, high = MEASURABLE_NM
        self.fields["band_to_nm"].help_text = (
            f"The band the fresh value and the band means are averaged over, both edges in nanometres from {low:,g} "
            f"to {high:,g} nm."
        )

    def clean_band_from_nm(self) -> float:
        return self._band_edge("band_from_nm", "Band from")

    def clean_band_to_nm(self) -> float:
        return self._band_edge("band_to_nm", "Band to")

    def _band_edge(self, name: str, label: str) -> float:
        value = self.cleaned_data[name]
        if problem := band_edge_problem(label, value):
            raise forms.ValidationError(problem)
        return value


@admin.register(Mirror)
class MirrorAdmin(ProtectedNamed, ChoicesNamedWithSite, RecomputesSite, SimpleHistoryAdmin):
    form = MirrorRecordForm
    list_display = ("subsystem", "diameter_mm", "thickness_mm", "material", "recoat_loss")
    inlines = [CoatingInline, CleaningInline]
    site_path = "subsystem__telescope__site"

    def save_formset(self, request, form, formset, change):
        """A coating or a cleaning added (or redated) here restarts the mirror's plans as one logged on the mirror
        page does."""
        super().save_formset(request, form, formset, change)
        if isinstance(formset, RestartsPlansFormSet):
            for event in formset.events_to_restart_from():
                formset.restart(event, request.user)


class MeasurementAdminForm(MeasurementChecks, forms.ModelForm):
    """A measurement added here is held to what the mirror page's form holds it to (``MeasurementChecks``: the
    wavelength's bounds, the question of a band mean above the fresh value, with its box), and its date to the rule
    of every logged date and to the mirror's retire day, as there (``services._check_date``)."""

    class Meta:
        model = ReflectanceMeasurement
        fields = "__all__"

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        low, high = MEASURABLE_NM
        if "wavelength_nm" in self.fields:  # not on a stored measurement's page, which shows it read only
            self.fields["wavelength_nm"].help_text = (
                f"Empty: averaged over the mirror's band. Otherwise the one wavelength measured, {low:g} to {high:g} "
                "nm."
            )

    def measured_mirror(self, data: dict) -> Mirror | None:
        return data.get("mirror")

    def clean(self):
        data = super().clean()
        mirror, day = data.get("mirror"), data.get("measured_on")
        if mirror and day and (problem := date_problem(mirror.subsystem.telescope.site, day, "measurement date")):
            self.add_error("measured_on", problem[0].upper() + problem[1:] + ".")
        elif mirror and day and (problem := retired_work_problem(mirror.subsystem, day, "A measurement")):
            self.add_error("measured_on", problem)
        return data


@admin.register(ReflectanceMeasurement)
class ReflectanceMeasurementAdmin(ChoicesNamedWithSite, RecomputesSite, SimpleHistoryAdmin):
    """Measurements are evidence: added, never changed or deleted."""

    form = MeasurementAdminForm
    list_display = ("mirror", "measured_on", "value", "wavelength_nm", "position", "taken_by", "reading")
    readonly_fields = ("reading",)  # set only when a reading is filed here (mirrors.services.measurement_from_reading)
    site_path = "mirror__subsystem__telescope__site"

    def get_fields(self, request, obj=None):
        """A stored measurement's page, read only, leaves out the add page's question about the value
        (``MeasurementChecks``), which it showed as "Value confirmed: None"."""
        fields = super().get_fields(request, obj)
        return fields if obj is None else [name for name in fields if name not in MeasurementChecks.declared_fields]

    def has_change_permission(self, request, obj=None):
        return False

    def has_delete_permission(self, request, obj=None):
        return False


@admin.register(RecoatPlan)
class RecoatPlanAdmin(ChoicesNamedWithSite, RecomputesSite, SimpleHistoryAdmin):
    list_display = ("mirror", "starts_on", "ends_on", "cost")
    site_path = "mirror__subsystem__telescope__site"  # its days and orders are the forecasts' downtime
