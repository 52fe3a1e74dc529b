from django.contrib import admin
from simple_history.admin import SimpleHistoryAdmin

from .models import NightUsage, Reading, ServiceRecord
from .nights_csv import FROM_SITE
from .services import FIGURE_FROM_SITE, WHOLE_SITE


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


def _figure_or_sites(name: str):
    """An admin column of a figure a telescope's night may leave to the site's row (``nights_csv.FROM_SITE``): left
    out, it reads as the site's, not as an empty value."""

    @admin.display(description=NightUsage._meta.get_field(name).verbose_name, ordering=name)
    def shown(night: NightUsage):
        value = getattr(night, name)
        return FIGURE_FROM_SITE if value is None and night.telescope_id else value

    return shown


_FIGURES = {name: _figure_or_sites(name) for name in FROM_SITE}


@admin.register(NightUsage)
class NightUsageAdmin(ReadOnlyAdmin):
    list_display = ("site", "night", "whose", "open_hours", _FIGURES["slews"], _FIGURES["brake_cycles"],
                    _FIGURES["pm10_ugm3"], "source")
    list_filter = ("site", "telescope", "source")
    list_select_related = ("site", "telescope")
    date_hierarchy = "night"
    # The record page, read-only, shows the figures as the list does.
    fields = ("site", "telescope", "night", "open_hours", *_FIGURES.values(), "humidity_pct", "dew", "rain",
              "source", "recorded_at")
    readonly_fields = tuple(_FIGURES.values())

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
