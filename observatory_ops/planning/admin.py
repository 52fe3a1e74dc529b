from django.contrib import admin

from .models import ServicePlan, Trigger


class TriggerInline(admin.TabularInline):
    model = Trigger
    extra = 1


@admin.register(ServicePlan)
class ServicePlanAdmin(admin.ModelAdmin):
    list_display = ("name", "subsystem", "dust_sensitivity", "counting_from", "active")
    list_filter = ("subsystem__telescope__site", "subsystem__telescope", "active")
    search_fields = ("name", "subsystem__name")
    inlines = [TriggerInline]
