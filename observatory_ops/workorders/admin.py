from django.contrib import admin
from simple_history.admin import SimpleHistoryAdmin

from .models import IsolationPoint, Part, PartUse, RequiredReading, WorkOrder, WorkOrderItem


class ItemInline(admin.TabularInline):
    model = WorkOrderItem
    extra = 0


class ReadingInline(admin.TabularInline):
    model = RequiredReading
    extra = 0


class PartUseInline(admin.TabularInline):
    model = PartUse
    extra = 0


@admin.register(WorkOrder)
class WorkOrderAdmin(SimpleHistoryAdmin):
    list_display = ("number", "title", "site", "state", "planned_date", "assignee")
    list_filter = ("site", "state", "order_type")
    inlines = [ItemInline, ReadingInline, PartUseInline]
    readonly_fields = ("state", "finished_at", "finished_by", "countersigned_at", "countersigned_by")


@admin.register(Part)
class PartAdmin(SimpleHistoryAdmin):
    list_display = ("name", "part_number", "site", "quantity_on_hand", "reorder_point", "location")
    list_filter = ("site",)


@admin.register(IsolationPoint)
class IsolationPointAdmin(SimpleHistoryAdmin):
    list_display = ("telescope", "energy", "label", "location")
    list_filter = ("telescope__site", "energy")
