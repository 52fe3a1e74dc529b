from django.contrib import admin
from django.forms.models import BaseInlineFormSet
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.logbook.services import service_date_problem
from observatory_ops.planning.admin import RecomputesSite

from . import services
from .models import CleaningEvent, CoatingEvent, Mirror, RecoatPlan, ReflectanceMeasurement


class CoatingFormSet(BaseInlineFormSet):
    """A coating added here restarts the mirror's recoat plans too, so its date must suit a service record."""

    def clean(self):
        super().clean()
        site = self.instance.subsystem.telescope.site if self.instance.subsystem_id else None
        for form in self.forms:
            day = form.cleaned_data.get("coated_on") if hasattr(form, "cleaned_data") else None
            if site is None or day is None or self._should_delete_form(form) or "coated_on" not in form.changed_data:
                continue
            problem = service_date_problem(site, day)
            if problem:
                why = f"The coating restarts the mirror's recoat plan from this date, and {problem}."
                form.add_error("coated_on", why)


class CoatingInline(admin.TabularInline):
    model = CoatingEvent
    formset = CoatingFormSet
    extra = 0


class CleaningInline(admin.TabularInline):
    model = CleaningEvent
    extra = 0


@admin.register(Mirror)
class MirrorAdmin(RecomputesSite, SimpleHistoryAdmin):
    list_display = ("subsystem", "diameter_mm", "thickness_mm", "material", "recoat_loss")
    inlines = [CoatingInline, CleaningInline]

    def site_of(self, obj):
        return obj.subsystem.telescope.site

    def save_formset(self, request, form, formset, change):
        """A coating added (or redated) here restarts the recoat plans as one logged on the mirror page does."""
        super().save_formset(request, form, formset, change)
        if formset.model is CoatingEvent:
            redated = [event for event, fields in formset.changed_objects if "coated_on" in fields]
            for event in [*formset.new_objects, *redated]:
                services.coating_service_records_log(event, request.user)


@admin.register(ReflectanceMeasurement)
class ReflectanceMeasurementAdmin(RecomputesSite, SimpleHistoryAdmin):
    """Measurements are evidence: added, never changed or deleted."""

    list_display = ("mirror", "measured_on", "value", "wavelength_nm", "position", "taken_by", "reading")
    readonly_fields = ("reading",)  # set only when a reading is filed here (mirrors.services.measurement_from_reading)

    def site_of(self, obj):
        return obj.mirror.subsystem.telescope.site

    def has_change_permission(self, request, obj=None):
        return False

    def has_delete_permission(self, request, obj=None):
        return False


@admin.register(RecoatPlan)
class RecoatPlanAdmin(SimpleHistoryAdmin):
    list_display = ("mirror", "starts_on", "ends_on", "cost")
