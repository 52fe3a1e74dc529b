from django import forms
from django.contrib import admin, messages
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.registry.forms import HazardsField

from .models import BookedRun, ServicePlan, Trigger
from .services import site_recompute


class RecomputesSite:
    """For admin pages whose changes move due states (the register, plans and triggers, nights, readings,
    service records, mirrors): the site is recomputed as soon as a change is saved, inline rows included,
    inside the admin's own transaction, so no page shows figures from before the change."""

    def site_of(self, obj):
        raise NotImplementedError

    def save_related(self, request, form, formsets, change):
        super().save_related(request, form, formsets, change)
        site = self.site_of(form.instance)
        site_recompute(site)
        self.message_user(request, f"Due states of {site} recomputed.", messages.INFO)

    def delete_model(self, request, obj):
        site = self.site_of(obj)
        super().delete_model(request, obj)
        site_recompute(site)


class TriggerInline(admin.TabularInline):
    model = Trigger
    extra = 1


class ServicePlanAdminForm(forms.ModelForm):
    hazards = HazardsField(help_text="Hazards of this task beyond its subsystem's own; they add safety cautions "
                           "to its work orders.")


@admin.register(ServicePlan)
class ServicePlanAdmin(RecomputesSite, SimpleHistoryAdmin):
    form = ServicePlanAdminForm
    list_display = ("name", "subsystem", "dust_sensitivity", "counting_from", "active")
    list_filter = ("subsystem__telescope__site", "subsystem__telescope", "active")
    search_fields = ("name", "subsystem__name")
    inlines = [TriggerInline]

    def site_of(self, obj):
        return obj.subsystem.telescope.site


@admin.register(BookedRun)
class BookedRunAdmin(SimpleHistoryAdmin):
    list_display = ("title", "site", "starts_on", "ends_on", "blocked")
    list_filter = ("site",)
