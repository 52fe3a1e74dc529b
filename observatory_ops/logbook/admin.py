from django.contrib import admin
from simple_history.admin import SimpleHistoryAdmin

from .models import NightUsage, Reading, ServiceRecord


class ReadOnlyAdmin(SimpleHistoryAdmin):
    """The log is written only through its own ways in, which check every value and recompute the site:
    nights by import or the API (a night sent again with other figures is updated), readings and service
    records on the subsystem page (corrections are new rows). Here it is read, with its history."""

    def has_add_permission(self, request):
        return False

    def has_change_permission(self, request, obj=None):
        return False

    def has_delete_permission(self, request, obj=None):
        return False


@admin.register(NightUsage)
class NightUsageAdmin(ReadOnlyAdmin):
    list_display = ("site", "night", "open_hours", "slews", "brake_cycles", "pm10_ugm3", "source")
    list_filter = ("site", "source")
    date_hierarchy = "night"


@admin.register(Reading)
class ReadingAdmin(ReadOnlyAdmin):
    list_display = ("subsystem", "quantity", "value", "unit", "taken_at", "taken_by")
    list_filter = ("quantity", "subsystem__telescope")


@admin.register(ServiceRecord)
class ServiceRecordAdmin(ReadOnlyAdmin):
    list_display = ("performed_on", "subsystem", "plan", "summary", "performed_by", "corrects", "void")
    list_filter = ("subsystem__telescope",)
