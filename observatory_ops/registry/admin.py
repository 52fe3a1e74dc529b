from django.contrib import admin, messages
from django.urls import reverse
from django.utils.html import format_html, format_html_join
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.planning.admin import RecomputesSite
from observatory_ops.planning.services import plans_from_catalogue
from observatory_ops.workorders.cautions import HAZARDS

from .catalogue import kind as catalogue_kind
from .forms import (
    ChoicesNamedWithSite,
    CrewDaysOffFormSet,
    ProtectedNamed,
    SiteAdminForm,
    SubsystemAdminForm,
    TelescopeListFilter,
)
from .models import CrewDayOff, Site, Subsystem, Telescope
from .selectors import SLUG_KEPT, parts_of, slug_uses
from .services import parts_retire_with, site_settings_apply, subsystem_parts_follow
from .templatetags.coordinates import coordinates


class CrewDayOffInline(admin.TabularInline):
    """Public holidays and other whole days the crew is off, listed with the site's working weekdays."""

    model = CrewDayOff
    formset = CrewDaysOffFormSet
    fields = ("date", "note")
    extra = 1


@admin.register(Site)
class SiteAdmin(ProtectedNamed, SimpleHistoryAdmin):
    form = SiteAdminForm
    inlines = [CrewDayOffInline]
    list_display = ("name", "slug", "position", "elevation_m", "time_zone", "site_id")
    prepopulated_fields = {"slug": ("name",)}
    filter_horizontal = ("digest_to",)

    @admin.display(description="site id (a task run by hand takes it)", ordering="pk")
    def site_id(self, site):
        """The number ``celery call`` takes (README, "A task can be run by hand"): no page said it."""
        return site.pk

    @admin.display(description="position")
    def position(self, site):
        return coordinates(site)

    # Once anything reaches the site by its slug (``selectors.slug_uses``), the slug is shown, not offered, with why.
    @staticmethod
    def _slug_in_use(request, site) -> bool:
        """Whether ``site``'s slug is in use, asked once a request: the admin asks for a form's fields many times."""
        if site is None:
            return False
        known = request.__dict__.setdefault("_slug_in_use", {})
        if site.pk not in known:
            known[site.pk] = bool(slug_uses(site))
        return known[site.pk]

    def get_exclude(self, request, obj=None):
        exclude = tuple(super().get_exclude(request, obj) or ())
        return (*exclude, "slug") if self._slug_in_use(request, obj) else exclude

    def get_readonly_fields(self, request, obj=None):
        fields = (*super().get_readonly_fields(request, obj), "digest_state")
        return (*fields, "slug_kept") if self._slug_in_use(request, obj) else fields

    @admin.display(description="due digest")
    def digest_state(self, site):
        """When the site's digest last went out and to whom it goes now (an operator review: a digest that stopped,
        its only recipient made inactive, showed nowhere but in the worker's log)."""
        from observatory_ops.planning.digest import mail_is_printed, recipients  # planning builds on the register

        if site is None or site.pk is None:
            return "-"
        to = recipients(site)
        last = f"last sent for {site.digest_sent_on:%d %b %Y}" if site.digest_sent_on else "not sent yet"
        from observatory_ops.planning.digest import listed_gone  # planning builds on the register

        gone = " (the administrators: none of those listed under Due digest to can receive it)" if listed_gone(
            site) else ""
        goes = (f"goes to {len(to)} address{'es' if len(to) != 1 else ''}{gone}" if to else
                "goes to nobody: no one it would go to has an e-mail address and the engineer role or above, so "
                "none is sent")
        printed = "; mail is printed to the log, not sent (EMAIL_BACKEND)" if mail_is_printed() else ""
        refused = f"; {site.digest_refused}" if site.digest_refused else ""
        return f"{last}; {goes}{printed}{refused}"

    def get_fields(self, request, obj=None):
        fields = list(super().get_fields(request, obj))
        if "slug_kept" in fields:  # where the slug's box would be, under the name
            fields.remove("slug_kept")
            fields.insert(fields.index("name") + 1, "slug_kept")
        return fields

    def get_prepopulated_fields(self, request, obj=None):
        return {} if self._slug_in_use(request, obj) else super().get_prepopulated_fields(request, obj)

    @admin.display(description="slug")
    def slug_kept(self, site):
        return f"{site.slug}: kept as it is, since it is in use: {slug_uses(site)}. {SLUG_KEPT}."

    def save_related(self, request, form, formsets, change):
        super().save_related(request, form, formsets, change)
        if change and site_settings_apply(form.instance, set(form.changed_data)):
            self.message_user(request, f"Due states of {form.instance} recomputed.", messages.INFO)


@admin.register(Telescope)
class TelescopeAdmin(ProtectedNamed, RecomputesSite, SimpleHistoryAdmin):
    """A telescope moved to another site (allowed while nothing is recorded of it: ``Telescope.clean``) takes its
    subsystems' plans along: both sites are recomputed (``RecomputesSite``)."""

    list_display = ("name", "site", "aperture_m", "mount")
    list_filter = ("site", "mount")
    site_path = "site"


@admin.register(Subsystem)
class SubsystemAdmin(ChoicesNamedWithSite, RecomputesSite, SimpleHistoryAdmin):
    """A subsystem added here gets what ``registry.services.subsystem_create`` gives one: its kind's hazard
    tags and default service plans, counted from its in-service date where one is given (a new unit, as serviced when
    fitted), else from the site's today with the last service unknown (due for a baseline service until one is
    logged: ``plans_from_catalogue``). Hazards ticked when adding it are added to
    its kind's, never put in their place: the tags choose the cautions on its work orders. A change that
    leaves out any of its kind's own hazards is saved, with a warning naming them."""

    form = SubsystemAdminForm
    list_display = ("name", "telescope", "kind", "parent", "retired_on")
    list_filter = ("telescope__site", ("telescope", TelescopeListFilter), "kind")
    # Also what the choices name it by (``forms.named_with_site``): "vestal dome" finds Vestal Ridge's domes.
    search_fields = ("name", "serial_number", "telescope__name", "telescope__site__name")
    site_path = "telescope__site"

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
            # A unit with its in-service date given (a replacement fitted that day) counts from it, as serviced when
            # fitted: a review's new brake, entered a day late, was due at once for a baseline service.
            since = subsystem.in_service_since
            plans = plans_from_catalogue(subsystem, since)
            counting = (f"They count from its in-service date, {since:%d %b %Y}, as serviced when it was fitted; for a "
                        "unit fitted used, log the last service of each plan on the subsystem page." if since else
                        "Their last service is unknown, so each is due for a baseline service: on the subsystem page, "
                        "log the last service of each plan if you know it (or give its in-service date, for a new "
                        "unit).")
            self.message_user(
                request,
                f"{subsystem}: hazards {', '.join(HAZARDS[code] for code in subsystem.hazards) or 'none'} (its "
                f"kind's and any ticked), and {len(plans)} default service plan(s) from its kind; change the plans "
                f"under Service plans. {counting}",
                messages.INFO,
            )
        elif "telescope" in form.changed_data:
            moved = subsystem_parts_follow(form.instance)  # before the recompute: their plans move too
            if moved:
                self.message_user(request, f"Moved with it to {form.instance.telescope.site_label}: "
                                  f"{', '.join(part.name for part in moved)}.", messages.INFO)
        if change and "retired_on" in form.changed_data and form.instance.retired_on is None:
            self._parts_left_retired(request, form.instance, form.initial.get("retired_on"))
        elif change and "retired_on" in form.changed_data and form.initial.get("retired_on") is None:
            # Retired here, as on its page: its parts with it (``services.parts_retire_with``).
            if parts := parts_retire_with(form.instance, request.user, f"retired with {form.instance.name}"):
                self.message_user(request, f"Retired with it on {form.instance.retired_on:%d %b %Y}, as its parts: "
                                  f"{', '.join(part.name for part in parts)}.", messages.INFO)
        super().save_related(request, form, formsets, change)

    def _parts_left_retired(self, request, subsystem, was_retired_on) -> None:
        """Brought back into service (its "Retired on" cleared), a subsystem brings back none of its parts: retiring it
        retired them on its day (``services.subsystem_retire``), but a part may have been retired that day for a
        reason of its own, so each is brought back here by hand. Those still retired on its day are named, linked."""
        left = [part for part in parts_of(subsystem) if was_retired_on and part.retired_on == was_retired_on]
        if left:
            self.message_user(request, format_html(
                "{} is back in service; its parts retired on the same day, {}, are still retired: {}. Bring back each "
                "that came back into service with it by clearing its Retired on.",
                subsystem, f"{was_retired_on:%d %b %Y}", format_html_join(", ", '<a href="{}">{}</a>', (
                    (reverse("admin:registry_subsystem_change", args=[part.pk]), part.name) for part in left)),
            ), messages.WARNING)

    def has_delete_permission(self, request, obj=None):
        return False  # subsystems are retired (retired_on), never deleted, so their history stays
