from django.contrib import admin
from simple_history.admin import SimpleHistoryAdmin

from .models import BookedRun, ServicePlan, Trigger


class TriggerInline(admin.TabularInline):
    model = Trigger
    extra = 1


@admin.register(ServicePlan)
class ServicePlanAdmin(SimpleHistoryAdmin):
    list_display = ("name", "subsystem", "dust_sensitivity", "counting_from", "active")
    list_filter = ("subsystem__telescope__site", "subsystem__telescope", "active")
    search_fields = ("name", "subsystem__name")
    inlines = [TriggerInline]


@admin.register(BookedRun)
class BookedRunAdmin(SimpleHistoryAdmin):
    list_display = ("title", "site", "starts_on", "ends_on", "blocked")
    list_filter = ("site",)
