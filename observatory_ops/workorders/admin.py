from django.contrib import admin
from simple_history.admin import SimpleHistoryAdmin

from .models import ChecklistTick, IsolationPoint, Part, PartUse, RequiredReading, WorkOrder, WorkOrderItem


class ItemInline(admin.TabularInline):
    model = WorkOrderItem
    extra = 0


class ReadingInline(admin.TabularInline):
    model = RequiredReading
    extra = 0


class PartUseInline(admin.TabularInline):
    model = PartUse
    extra = 0


class TickInline(admin.TabularInline):
    """The checklist ticks, read only: they are recorded on the work order page and never edited."""

    model = ChecklistTick
    extra = 0
    can_delete = False
    fields = readonly_fields = ("recorded_at", "recorded_by", "kind", "step_index", "text", "ticked")

    def has_add_permission(self, request, obj=None):
        return False

    def has_change_permission(self, request, obj=None):
        return False


@admin.register(WorkOrder)
class WorkOrderAdmin(SimpleHistoryAdmin):
    list_display = ("number", "title", "site", "state", "planned_date", "assignee")
    list_filter = ("site", "state", "order_type")
    inlines = [ItemInline, ReadingInline, PartUseInline, TickInline]
    # Hazards and steps only through the order's own pages, which never drop a hazard and keep the lockout step
    # where the energy is isolated (services.work_order_hazards_update, forms.WorkOrderEditForm).
    readonly_fields = (
        "state", "finished_at", "finished_by", "countersigned_at", "countersigned_by", "unticked_at_finish",
        "hazards_confirmed_at_finish",
        "hazards", "steps", "at_telescope",
    )


@admin.register(Part)
class PartAdmin(SimpleHistoryAdmin):
    list_display = ("name", "part_number", "site", "quantity_on_hand", "reorder_point", "location")
    list_filter = ("site",)


@admin.register(IsolationPoint)
class IsolationPointAdmin(SimpleHistoryAdmin):
    list_display = ("telescope", "subsystem", "energy", "label", "location")
    list_filter = ("telescope__site", "energy")
    autocomplete_fields = ("subsystem",)  # a network has thousands of subsystems: searched, not listed
