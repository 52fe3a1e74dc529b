from django.contrib import admin
from simple_history.admin import SimpleHistoryAdmin

from .models import NightUsage, Reading, ServiceRecord
from .services import WHOLE_SITE


class ReadOnlyAdmin(SimpleHistoryAdmin):
    """The log is written only through its own ways in, which check every value and recompute the site:
    nights by import, the API or the log page's form (a night, the site's or a telescope's, sent again with
    other figures is updated), readings and service records on the subsystem page (corrections are new rows).
    Here it is read, with its history."""

    def has_add_permission(self, request):
        return False

    def has_change_permission(self, request, obj=None):
        return False

    def has_delete_permission(self, request, obj=None):
        return False


@admin.register(NightUsage)
class NightUsageAdmin(ReadOnlyAdmin):
    list_display = ("site", "night", "whose", "open_hours", "slews", "brake_cycles", "pm10_ugm3", "source")
    list_filter = ("site", "telescope", "source")
    list_select_related = ("site", "telescope")
    date_hierarchy = "night"

    @admin.display(description="telescope", ordering="telescope__name")
    def whose(self, night: NightUsage) -> str:
        return night.telescope.name if night.telescope_id else WHOLE_SITE


@admin.register(Reading)
class ReadingAdmin(ReadOnlyAdmin):
    list_display = ("subsystem", "quantity", "value", "unit", "taken_at", "taken_by")
    list_filter = ("quantity", "subsystem__telescope")


@admin.register(ServiceRecord)
class ServiceRecordAdmin(ReadOnlyAdmin):
    list_display = ("performed_on", "subsystem", "plan", "summary", "performed_by", "corrects", "void")
    list_filter = ("subsystem__telescope",)
