from django.contrib import admin, messages
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.planning.admin import RecomputesSite
from observatory_ops.planning.services import plans_from_catalogue, site_today

from .catalogue import kind as catalogue_kind
from .forms import SubsystemAdminForm
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
class SubsystemAdmin(RecomputesSite, SimpleHistoryAdmin):
    """A subsystem added here gets what ``registry.services.subsystem_create`` gives one: its kind's hazard
    tags (when none are entered) and default service plans, counted from the site's today."""

    form = SubsystemAdminForm
    list_display = ("name", "telescope", "kind", "parent", "retired_on")
    list_filter = ("telescope__site", "telescope", "kind")
    search_fields = ("name", "serial_number")

    def site_of(self, obj):
        return obj.telescope.site

    def save_model(self, request, obj, form, change):
        if not change and not obj.hazards:
            obj.hazards = list(catalogue_kind(obj.kind).hazards)
        super().save_model(request, obj, form, change)

    def save_related(self, request, form, formsets, change):
        if not change:
            subsystem = form.instance
            plans = plans_from_catalogue(subsystem, site_today(subsystem.telescope.site))
            self.message_user(
                request,
                f"{subsystem}: hazard tags {', '.join(subsystem.hazards) or 'none'} and {len(plans)} default "
                "service plan(s) from its kind; change them under Service plans.",
                messages.INFO,
            )
        super().save_related(request, form, formsets, change)

    def has_delete_permission(self, request, obj=None):
        return False  # subsystems are retired (retired_on), never deleted, so their history stays
