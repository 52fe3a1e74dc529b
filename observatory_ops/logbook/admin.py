from django import forms
from django.contrib import admin, messages
from django.contrib.admin import helpers
from django.template.defaultfilters import pluralize
from django.template.response import TemplateResponse
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.archive.history import person
from observatory_ops.registry.forms import TelescopeListFilter

from .models import NightUsage, Reading, ServiceRecord
from .nights_csv import FROM_SITE
from .services import WHOLE_SITE, left_out_shown, nights_remove


class ReadOnlyAdmin(SimpleHistoryAdmin):
    """The log is written only through its own ways in, which check every value and recompute the site:
    nights by import, the API or the log page's form (a night, the site's or a telescope's, sent again with
    other figures is updated), readings and service records on the subsystem page (corrections are new rows).
    Here it is read, with its history; the one write is removing nights stored by mistake (``NightUsageAdmin``)."""

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
        return left_out_shown(night) if value is None and night.telescope_id else value

    return shown


_FIGURES = {name: _figure_or_sites(name) for name in FROM_SITE}


@admin.register(NightUsage)
class NightUsageAdmin(ReadOnlyAdmin):
    list_display = ("site", "night", "whose", "open_hours", _FIGURES["slews"], _FIGURES["brake_cycles"],
                    _FIGURES["pm10_ugm3"], "source")
    list_filter = ("site", ("telescope", TelescopeListFilter), "source")
    list_select_related = ("site", "telescope")
    date_hierarchy = "night"
    # The record page, read-only, shows the figures as the list does.
    fields = ("site", "telescope", "night", "open_hours", *_FIGURES.values(), "humidity_pct", "dew", "rain",
              "source", "recorded_at")
    readonly_fields = tuple(_FIGURES.values())

    actions = ["remove"]

    @admin.display(description="telescope", ordering="telescope__name")
    def whose(self, night: NightUsage) -> str:
        return night.telescope.name if night.telescope_id else WHOLE_SITE

    def has_remove_permission(self, request) -> bool:
        return request.user.has_perm("logbook.delete_nightusage")

    @admin.action(description="Remove the selected nights (sent by mistake)", permissions=["remove"])
    def remove(self, request, queryset):
        """Ask why, then remove the nights and recompute their sites (``services.nights_remove``)."""
        form = NightsRemoveForm(request.POST if "reason" in request.POST else None)
        if form.is_valid():
            removed = nights_remove(list(queryset), by=request.user, reason=form.cleaned_data["reason"])
            at = "; ".join(f"{site.name}: {count}" for site, count in removed.items())
            count = sum(removed.values())
            recomputed = "its site's due states are" if len(removed) == 1 else "their sites' due states are"
            self.message_user(
                request, f"{count} night{pluralize(count)} removed ({at}); {recomputed} recomputed.", messages.SUCCESS,
            )
            return None
        nights = list(queryset.select_related("site", "telescope"))
        context = {
            **self.admin_site.each_context(request), "opts": self.opts, "form": form, "title": "Remove nights",
            "nights": [(n, self.whose(n)) for n in nights],
            "selected": request.POST.getlist(helpers.ACTION_CHECKBOX_NAME),
        }
        return TemplateResponse(request, "logbook/admin_nights_remove.html", context)


class NightsRemoveForm(forms.Form):
    reason = forms.CharField(
        max_length=100, help_text="Kept in the nights' history, e.g. \"sent under R40, was T70's\".",
    )


@admin.register(Reading)
class ReadingAdmin(ReadOnlyAdmin):
    list_display = ("subsystem", "quantity", "value", "unit", "taken_at", "taken_by")
    list_filter = ("quantity", ("subsystem__telescope", TelescopeListFilter))


@admin.register(ServiceRecord)
class ServiceRecordAdmin(ReadOnlyAdmin):
    list_display = ("performed_on", "subsystem", "plan", "summary", "done_by", "work_order", "repaired_failure",
                    "corrects", "void")
    list_filter = (("subsystem__telescope", TelescopeListFilter), "repaired_failure")
    list_select_related = ("subsystem__telescope", "plan", "performed_by", "work_order", "corrects")

    @admin.display(description="performed by", ordering="performed_by__last_name")
    def done_by(self, record: ServiceRecord) -> str:
        return person(record.performed_by)  # by name, as the pages give people
