from django.contrib import admin
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.planning.admin import RecomputesSite

from .models import NightUsage, Reading, ServiceRecord


@admin.register(NightUsage)
class NightUsageAdmin(RecomputesSite, SimpleHistoryAdmin):
    list_display = ("site", "night", "open_hours", "slews", "brake_cycles", "pm10_ugm3", "source")
    list_filter = ("site", "source")
    date_hierarchy = "night"

    def site_of(self, obj):
        return obj.site


class AppendOnlyAdmin(RecomputesSite, SimpleHistoryAdmin):
    """Readings and service records are evidence: added, never changed or deleted (corrections are new rows)."""

    def site_of(self, obj):
        return obj.subsystem.telescope.site

    def has_change_permission(self, request, obj=None):
        return False

    def has_delete_permission(self, request, obj=None):
        return False


@admin.register(Reading)
class ReadingAdmin(AppendOnlyAdmin):
    list_display = ("subsystem", "quantity", "value", "unit", "taken_at", "taken_by")
    list_filter = ("quantity", "subsystem__telescope")


@admin.register(ServiceRecord)
class ServiceRecordAdmin(AppendOnlyAdmin):
    list_display = ("performed_on", "subsystem", "plan", "summary", "performed_by", "corrects", "void")
    list_filter = ("subsystem__telescope",)
