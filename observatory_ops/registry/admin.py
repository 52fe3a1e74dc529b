from django.contrib import admin, messages
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.planning.admin import RecomputesSite
from observatory_ops.planning.services import plans_from_catalogue, site_recompute
from observatory_ops.workorders.cautions import HAZARDS

from .catalogue import kind as catalogue_kind
from .forms import CrewDaysOffFormSet, SiteAdminForm, SubsystemAdminForm
from .models import CrewDayOff, Site, Subsystem, Telescope
from .templatetags.coordinates import coordinates


class CrewDayOffInline(admin.TabularInline):
    """Public holidays and other whole days the crew is off, listed with the site's working weekdays."""

    model = CrewDayOff
    formset = CrewDaysOffFormSet
    fields = ("date", "note")
    extra = 1


@admin.register(Site)
class SiteAdmin(SimpleHistoryAdmin):
    form = SiteAdminForm
    inlines = [CrewDayOffInline]
    list_display = ("name", "slug", "position", "elevation_m", "time_zone")
    prepopulated_fields = {"slug": ("name",)}

    @admin.display(description="position")
    def position(self, site):
        return coordinates(site)

    def save_related(self, request, form, formsets, change):
        super().save_related(request, form, formsets, change)
        # These move due states: what counts as due, and which nights a shared enclosure's plans count.
        if change and {"look_ahead_days", "shared_enclosure"} & set(form.changed_data):
            site_recompute(form.instance)
            self.message_user(request, f"Due states of {form.instance} recomputed.", messages.INFO)


@admin.register(Telescope)
class TelescopeAdmin(SimpleHistoryAdmin):
    list_display = ("name", "site", "aperture_m", "mount")
    list_filter = ("site", "mount")


@admin.register(Subsystem)
class SubsystemAdmin(RecomputesSite, SimpleHistoryAdmin):
    """A subsystem added here gets what ``registry.services.subsystem_create`` gives one: its kind's hazard
    tags and default service plans, counted from the site's today with the last service unknown (due for a baseline
    service until one is logged: ``plans_from_catalogue``). Hazards ticked when adding it are added to
    its kind's, never put in their place: the tags choose the cautions on its work orders. A change that
    leaves out any of its kind's own hazards is saved, with a warning naming them."""

    form = SubsystemAdminForm
    list_display = ("name", "telescope", "kind", "parent", "retired_on")
    list_filter = ("telescope__site", "telescope", "kind")
    search_fields = ("name", "serial_number")

    def site_of(self, obj):
        return obj.telescope.site

    def save_model(self, request, obj, form, change):
        own = catalogue_kind(obj.kind).hazards
        if not change:
            obj.hazards = [code for code in HAZARDS if code in {*own, *obj.hazards}]
        super().save_model(request, obj, form, change)
        left_out = [HAZARDS[code] for code in HAZARDS if code in own and code not in obj.hazards]
        if change and left_out:
            self.message_user(
                request,
                f"{obj}: saved without these hazards of its kind: {', '.join(left_out)}. Work orders made for it "
                "from now on will then lack those cautions; tick them again unless it truly has none of them.",
                messages.WARNING,
            )

    def save_related(self, request, form, formsets, change):
        if not change:
            subsystem = form.instance
            plans = plans_from_catalogue(subsystem, None)
            self.message_user(
                request,
                f"{subsystem}: hazards {', '.join(HAZARDS[code] for code in subsystem.hazards) or 'none'} (its "
                f"kind's and any ticked), and {len(plans)} default service plan(s) from its kind; change the plans "
                "under Service plans. Their last service is unknown, so each is due for a baseline service: on the "
                "subsystem page, log the last service of each plan if you know it.",
                messages.INFO,
            )
        super().save_related(request, form, formsets, change)

    def has_delete_permission(self, request, obj=None):
        return False  # subsystems are retired (retired_on), never deleted, so their history stays
