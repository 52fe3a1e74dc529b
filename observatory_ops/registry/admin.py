from django.contrib import admin
from simple_history.admin import SimpleHistoryAdmin

from .models import Site, Subsystem, Telescope


@admin.register(Site)
class SiteAdmin(SimpleHistoryAdmin):
    list_display = ("name", "slug", "latitude_deg", "longitude_deg", "elevation_m", "time_zone")
    prepopulated_fields = {"slug": ("name",)}


@admin.register(Telescope)
class TelescopeAdmin(SimpleHistoryAdmin):
    list_display = ("name", "site", "aperture_m", "mount")
    list_filter = ("site", "mount")


@admin.register(Subsystem)
class SubsystemAdmin(SimpleHistoryAdmin):
    list_display = ("name", "telescope", "kind", "parent", "retired_on")
    list_filter = ("telescope__site", "telescope", "kind")
    search_fields = ("name", "serial_number")

    def has_delete_permission(self, request, obj=None):
        return False  # subsystems are retired (retired_on), never deleted, so their history stays
