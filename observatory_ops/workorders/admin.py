from django import forms
from django.contrib import admin, messages
from django.contrib.admin.utils import unquote
from django.contrib.admin.widgets import AutocompleteSelect
from django.core.exceptions import ValidationError
from django.http import HttpResponseRedirect
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.access.roles import TECHNICIAN, holders_of
from observatory_ops.archive.history import person
from observatory_ops.planning.admin import RecomputesSite
from observatory_ops.planning.services import site_today
from observatory_ops.registry.forms import ChoicesNamedWithSite, ChoicesOfItsSite, possible_id

from . import selectors
from .forms import PersonChoiceField
from .models import (
    ChecklistTick,
    EnergyControlInspection,
    IsolationPoint,
    Part,
    PartUse,
    RequiredReading,
    State,
    WorkOrder,
    WorkOrderItem,
    listed,
)


class ItemsFixedOnceStarted(ChoicesOfItsSite):
    """The subsystems an order covers choose the isolation points its lockout step locks (a dome's own drives), so
    they are not added, changed or removed once the work has started (``WorkOrder.started_edit_refusal``), as its
    steps, hazards and telescope are not (``WorkOrder.clean``). A stored order's rows offer its site's subsystems and
    plans."""

    def clean(self):
        super().clean()
        if any(form.has_changed() for form in self.forms):
            if why := self.instance.started_edit_refusal("subsystems it covers"):
                raise ValidationError(why)


class ItemInline(ChoicesNamedWithSite, admin.TabularInline):
    model = WorkOrderItem
    formset = ItemsFixedOnceStarted
    extra = 0


class ReadingInline(ChoicesNamedWithSite, admin.TabularInline):
    model = RequiredReading
    formset = ChoicesOfItsSite
    extra = 0


class PartUseInline(admin.TabularInline):
    model = PartUse
    extra = 0
    # What finishing found short in the register, and when the stock was counted (services.part_count_record).
    readonly_fields = ("quantity_short", "short_counted_at")


class TickInline(admin.TabularInline):
    """The checklist ticks, read only: they are recorded on the work order page and never edited."""

    model = ChecklistTick
    extra = 0
    can_delete = False
    fields = readonly_fields = ("recorded_at", "recorded_by", "kind", "step_index", "text", "ticked", "result")

    def has_add_permission(self, request, obj=None):
        return False

    def has_change_permission(self, request, obj=None):
        return False


#: What the admin page of a closed order says is kept as it was (``WorkOrder.closed_edit_refusal``).
RECORD_SHOWN = "findings, hours, readings and parts used"


@admin.register(WorkOrder)
class WorkOrderAdmin(ChoicesNamedWithSite, RecomputesSite, SimpleHistoryAdmin):
    """A finished, countersigned or withdrawn order is the record (``WorkOrder.closed_edit_refusal``): its page shows
    it read only, its rows included, and says why and how it is corrected; a post to it saves nothing and says so; its
    history offers no revert (a revert posted all the same is refused by ``WorkOrder.clean``, as one that would move
    any order's state is); and it is not deleted."""

    list_display = ("number", "title", "site", "state", "planned_date", "assignee")
    # Saved or deleted, an order recomputes its site: a recoat's nights follow its orders' dates and states
    # (planning.services.recoat_downtime), and the due list says which plans an order holds.
    site_path = "site"
    list_filter = ("site", "state", "order_type")
    inlines = [ItemInline, ReadingInline, PartUseInline, TickInline]
    object_history_form_template = "admin/workorders/workorder/object_history_form.html"
    # Hazards and steps only through the order's own pages, which never drop a hazard and keep the lockout step
    # where the energy is isolated (services.work_order_hazards_update, forms.WorkOrderEditForm).
    readonly_fields = (
        "state", "finished_at", "finished_by", "countersigned_at", "countersigned_by", "unticked_at_finish",
        "hazards_confirmed_at_finish", "isolation_unticked_at_finish", "isolation_confirmed_at_finish", "crew",
        "crew_by_account", "hazards", "steps", "at_telescope", "hand_back_left_to",
    )

    def save_model(self, request, obj, form, change):
        if "estimated_hours" in form.changed_data:  # as on the order's edit page: the estimate is the engineer's now
            obj.estimate_basis = ""
        super().save_model(request, obj, form, change)

    def has_change_permission(self, request, obj=None):
        """Not for a closed order: Django then shows its page read only, its inline rows with no add, change or
        delete, and simple_history offers no revert. ``obj`` is a past version on the history's pages: the order's
        stored state decides."""
        if obj is not None and obj.closed_edit_refusal(RECORD_SHOWN):
            return False
        return super().has_change_permission(request, obj)

    def changeform_view(self, request, object_id=None, form_url="", extra_context=None):
        stored = self.get_object(request, unquote(object_id)) if object_id else None
        closed = stored.closed_edit_refusal(RECORD_SHOWN) if stored else ""
        if closed and request.method == "POST":  # a page loaded before the order closed, or a post made by hand
            self.message_user(request, f"Nothing saved: {closed}", messages.ERROR)
            return HttpResponseRedirect(request.path)
        return super().changeform_view(request, object_id, form_url, {**(extra_context or {}), "closed": closed})

    def history_form_view(self, request, object_id, version_id, extra_context=None):
        """A past version of a closed order is shown with no revert, and the page says why (as its change page)."""
        stored = self.get_object(request, unquote(object_id))
        closed = stored.closed_edit_refusal(RECORD_SHOWN) if stored else ""
        return super().history_form_view(request, object_id, version_id, {**(extra_context or {}), "closed": closed})

    def get_deleted_objects(self, objs, request):
        """A closed order is not deleted (the single delete page and the list's delete action both ask here): Django's
        page lists it as standing in the way, and deletes nothing."""
        deleted, counts, permissions, protected = super().get_deleted_objects(objs, request)
        for order in objs:
            if closed := order.closed_edit_refusal(RECORD_SHOWN):
                protected.append(closed)
            elif order.state == State.UNDERWAY:
                # Its crew is at work: its ticks are the record of its locks, which other crews wait for, and it may
                # hold another crew's hand-back (a diff review deleted one with its locks on, past the withdrawal's
                # refusal).
                protected.append(f"{order}: it is underway, its crew at work. Withdraw it on its page instead (not "
                                 "while its crew's locks are on)")
        return deleted, counts, permissions, protected


class EnergyControlInspectionForm(forms.ModelForm):
    class Meta:
        model = EnergyControlInspection
        fields = ("telescope", "inspected_on", "inspector", "employees", "findings")
        field_classes = {"inspector": PersonChoiceField}  # by name, as "employees observed" are typed

    def __init__(self, *args, **kwargs):
        """The inspector is an authorised employee: someone who may lock out here (the technician role or above), not
        a viewer (a diff review chose the site's viewer and it was kept)."""
        super().__init__(*args, **kwargs)
        if "inspector" in self.fields:
            self.fields["inspector"].queryset = holders_of(TECHNICIAN).order_by("last_name", "first_name", "username")

    def clean(self):
        data = super().clean()
        telescope, day = data.get("telescope"), data.get("inspected_on")
        if telescope is not None and day is not None and day > site_today(telescope.site):
            self.add_error("inspected_on", f"{day:%d %b %Y} is after today at {telescope.site.name}: record an "
                                           "inspection once it is made.")
        inspector, employees = data.get("inspector"), data.get("employees") or ""
        observed = {name.strip().casefold() for name in employees.split(",")}
        if inspector is not None and {person(inspector).casefold(), inspector.username.casefold()} & observed:
            self.add_error("inspector", f"{person(inspector)} is among those observed: the inspector is an authorised "
                                        "person other than those using the procedure (OSHA 29 CFR 1910.147(c)(6)).")
        return data


@admin.register(EnergyControlInspection)
class EnergyControlInspectionAdmin(SimpleHistoryAdmin):
    """The yearly inspection of a telescope's energy control procedure, certified by its inspector; the site's
    dashboard says when each telescope's next is due (``selectors.energy_control_inspections``)."""

    form = EnergyControlInspectionForm
    list_display = ("telescope", "inspected_on", "inspected_by", "employees", "entered_by")
    list_filter = ("telescope__site",)
    list_select_related = ("telescope", "inspector", "recorded_by")

    @admin.display(description="inspector", ordering="inspector__last_name")
    def inspected_by(self, inspection: EnergyControlInspection) -> str:
        return person(inspection.inspector)

    @admin.display(description="recorded by", ordering="recorded_by__last_name")
    def entered_by(self, inspection: EnergyControlInspection) -> str:
        return person(inspection.recorded_by)

    def save_model(self, request, obj, form, change):
        if not change:
            obj.recorded_by = request.user
        super().save_model(request, obj, form, change)


@admin.register(Part)
class PartAdmin(SimpleHistoryAdmin):
    list_display = ("name", "part_number", "site", "quantity_on_hand", "reorder_point", "location")
    list_filter = ("site",)


class IsolationPointForm(forms.ModelForm):
    """A point on the lockout of an order underway (``selectors.orders_underway_locking``) is not moved to another
    telescope or subsystem: it would leave that lockout unsaid. Its words may be corrected: the tick on it then counts
    for nothing until it is ticked again, which holds the work done locked out (``services.checklist_tick_set``)."""

    class Meta:
        model = IsolationPoint
        fields = "__all__"

    def clean(self):
        cleaned = super().clean()
        if self.instance.pk and {"telescope", "subsystem"} & set(self.changed_data):
            if orders := selectors.orders_underway_locking(IsolationPoint.objects.get(pk=self.instance.pk)):
                raise ValidationError(_locked_by(orders, "moved to another telescope or subsystem"))
        return cleaned


def _locked_by(orders: list[WorkOrder], done: str) -> str:
    named = listed([order.number for order in orders])
    return (
        f"This point is on the lockout of {named}, underway: it is not {done} while that work is underway, since it "
        "would drop out of the lockout in progress. Do it once the work is finished or withdrawn."
    )


class _SearchedChoice(AutocompleteSelect):
    """Django's search box for a choice (``autocomplete_fields``), except that a value sent that no id can be
    (``possible_id``: "zzz", a number too large for the id column) is shown as nothing chosen: Django's box looks the
    value up to name it, and that query fails (ValueError, OverflowError) where the field has already refused the value
    as not one of the choices."""

    def optgroups(self, name, value, attr=None):
        model = self.choices.queryset.model
        return super().optgroups(name, [given for given in value if possible_id(model, given) is not None], attr)


@admin.register(IsolationPoint)
class IsolationPointAdmin(ChoicesNamedWithSite, SimpleHistoryAdmin):
    form = IsolationPointForm
    list_display = ("telescope", "subsystem", "energy", "label", "location")
    list_filter = ("telescope__site", "energy")
    autocomplete_fields = ("subsystem",)  # a network has thousands of subsystems: searched, not listed

    def formfield_for_foreignkey(self, db_field, request, **kwargs):
        if db_field.name in self.get_autocomplete_fields(request):
            kwargs["widget"] = _SearchedChoice(db_field, self.admin_site, using=kwargs.get("using"))
        return super().formfield_for_foreignkey(db_field, request, **kwargs)

    def get_deleted_objects(self, objs, request):
        """A point on the lockout of an order underway is not deleted (the single delete page and the list's delete
        action both ask here): Django's page lists those orders as standing in the way, and deletes nothing."""
        deleted, counts, permissions, protected = super().get_deleted_objects(objs, request)
        for point in objs:
            if orders := selectors.orders_underway_locking(point):
                protected.append(f"{point}: {_locked_by(orders, 'deleted')}")
        return deleted, counts, permissions, protected
