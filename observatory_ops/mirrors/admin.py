from django.contrib import admin
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.planning.admin import RecomputesSite

from .models import CleaningEvent, CoatingEvent, Mirror, RecoatPlan, ReflectanceMeasurement


class CoatingInline(admin.TabularInline):
    model = CoatingEvent
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


@admin.register(ReflectanceMeasurement)
class ReflectanceMeasurementAdmin(RecomputesSite, SimpleHistoryAdmin):
    """Measurements are evidence: added, never changed or deleted."""

    list_display = ("mirror", "measured_on", "value", "wavelength_nm", "position", "taken_by")

    def site_of(self, obj):
        return obj.mirror.subsystem.telescope.site

    def has_change_permission(self, request, obj=None):
        return False

    def has_delete_permission(self, request, obj=None):
        return False


@admin.register(RecoatPlan)
class RecoatPlanAdmin(SimpleHistoryAdmin):
    list_display = ("mirror", "starts_on", "ends_on", "cost")
