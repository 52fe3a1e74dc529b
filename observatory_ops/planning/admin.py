from operator import attrgetter

from django import forms
from django.contrib import admin, messages
from django.db import transaction
from django.db.models import prefetch_related_objects
from django.forms.models import BaseInlineFormSet
from django.utils.text import capfirst
from simple_history.admin import SimpleHistoryAdmin

from observatory_ops.logbook.quantities import QUANTITIES, usual_for_kind
from observatory_ops.registry.forms import ChoicesNamedWithSite, HazardsField, ProtectedNamed, TelescopeListFilter
from observatory_ops.registry.models import Site
from observatory_ops.workorders.models import listed

from .models import BookedRun, Closure, ServicePlan, Trigger
from .selectors import not_computed_reason
from .services import site_recompute, site_today


class RecomputesSite:
    """For admin pages whose changes move due states (the register, plans and triggers, nights, readings,
    service records, mirrors): the site is recomputed as soon as a change is saved, inline rows included,
    inside the admin's own transaction, so no page shows figures from before the change. A deletion recomputes the
    site the record was at, from its own page or from the list's "delete selected" (each site of the records
    ticked, once); what stops a deletion (records kept by a protected key) stops both alike, on Django's page.

    A change that moves the record to another site (a telescope, a subsystem, a plan or a mirror put under another
    site's) recomputes the site it left, then the one it joined: the states of its plans are stored under the first
    until it is recomputed, and one plan has one state, so the second could not store them before."""

    site_path: str  # the lookup from the record to its site, e.g. "subsystem__telescope__site"

    def site_of(self, obj):
        return attrgetter(self.site_path.replace("__", "."))(obj)

    def save_model(self, request, obj, form, change):
        # The site of the record as stored, read before the change is saved (kept on the instance for save_related).
        obj._site_before = self.site_of(type(obj)._default_manager.get(pk=obj.pk)) if change else None
        super().save_model(request, obj, form, change)

    def save_related(self, request, form, formsets, change):
        super().save_related(request, form, formsets, change)
        site = self.site_of(form.instance)
        left = getattr(form.instance, "_site_before", None)
        self._recompute(request, [left, site] if left is not None and left.pk != site.pk else [site])

    def delete_model(self, request, obj):
        site = self.site_of(obj)
        super().delete_model(request, obj)
        self._recompute(request, [site])

    def delete_queryset(self, request, queryset):
        # The list's action runs outside the admin's transaction (a single delete runs inside it): the deletion and
        # the recomputes are kept together here, so no state outlives the records it was computed from.
        with transaction.atomic():
            sites = list(Site.objects.filter(pk__in=queryset.values(self.site_path)).order_by("name"))
            super().delete_queryset(request, queryset)
            self._recompute(request, sites)

    def _recompute(self, request, sites: list) -> None:
        for site in sites:
            site_recompute(site)
        self.message_user(request, f"Due states of {listed([str(site) for site in sites])} recomputed.",
                          messages.INFO)


#: The refusal of a plan saved without a trigger (or with every trigger row deleted).
NO_TRIGGER_REFUSAL = ("Add a trigger: a plan without one is never computed, so it would be left out of the due list "
                      "and the site's counts. Fill in a row under Triggers (Calendar days, with the interval in days "
                      "as its limit, is the simplest).")


class TriggerFormSet(BaseInlineFormSet):
    """A plan's trigger rows: at least one (``TriggerInline.min_num``), refused with ``NO_TRIGGER_REFUSAL``; each
    row's own check (``Trigger.clean``) refuses a trigger its plan's subsystem can never compute."""

    default_error_messages = {"too_few_forms": NO_TRIGGER_REFUSAL}

    def full_clean(self):
        # An inactive plan is not counted, so it is never missing from the due list: an old plan without a trigger
        # may be made inactive as it is. Decided here, not when the formset is made: the admin makes it before the
        # plan's own form has read the posted "active".
        if not getattr(self.instance, "active", True):
            self.validate_min, self.min_num = False, 0
        super().full_clean()

    def clean(self):
        """Two rows counting the same thing toward the same side (two dust-weighted limits, 300 h and 200 h) are
        refused: whichever comes first makes the lower one govern and the other never does, so one of them was
        meant as something else (a site review saved such a plan unasked)."""
        super().clean()
        seen = {}
        for form in self.forms:
            data = getattr(form, "cleaned_data", None)
            if not data or data.get("DELETE") or not data.get("metric"):
                continue
            key = (data["metric"], data.get("quantity") or "", data.get("direction"))
            if key in seen:
                trigger = Trigger(metric=data["metric"], quantity=data.get("quantity") or "")
                what = (QUANTITIES[trigger.quantity][0] if trigger.quantity in QUANTITIES
                        else trigger.get_metric_display())
                raise forms.ValidationError(
                    f"Two triggers watch {what.lower()} the same way (limits {seen[key]:g} and {data.get('limit'):g}): "
                    "the first reached always governs, so the other never does. Keep one."
                )
            seen[key] = data.get("limit") or 0


class TriggerInline(admin.TabularInline):
    model = Trigger
    formset = TriggerFormSet
    min_num = 1

    def get_formset(self, request, obj=None, **kwargs):
        # The admin takes ``min_num`` from the inline but not ``validate_min``: without it a plan whose rows are all
        # left blank or ticked for deletion would still be saved.
        return super().get_formset(request, obj, validate_min=True, **kwargs)

    def get_extra(self, request, obj=None, **kwargs):
        """A new plan shows its one required row; a stored plan one blank row under its triggers."""
        return 0 if obj is None else 1


class ServicePlanAdminForm(forms.ModelForm):
    hazards = HazardsField(help_text="Hazards of this task beyond its subsystem's own; they add safety cautions "
                           "to its work orders.")

    def __init__(self, *args, **kwargs):
        """The readings' help names the quantity codes usual on this plan's subsystem, not one kind's example. A plan
        added by hand starts with its last service unknown (due now for a baseline service): the counting date,
        which the form needs, is taken as a real last service only when the box is ticked."""
        super().__init__(*args, **kwargs)
        if self.instance._state.adding and "counting_from_given" in self.fields:
            self.fields["counting_from_given"].initial = False
            self.fields["counting_from"].help_text = (
                "The day of the last service, if you know it (then tick the box below); if not, today, with the box "
                "left unticked: the plan is then due now for a baseline service."
            )
        subsystem = self.instance.subsystem if self.instance.subsystem_id else None
        if subsystem is None or "readings" not in self.fields:
            return
        usual = [f"{code} ({label}, {unit})" for code, (label, unit) in QUANTITIES.items()
                 if code in usual_for_kind(subsystem.kind)]
        kind = subsystem.kind_label
        self.fields["readings"].help_text += (
            f" The codes usual on its subsystem's kind ({kind}): {', '.join(usual)}." if usual
            else f" Nothing is usually measured on its subsystem's kind ({kind}): any code of the reading form."
        )

    def clean(self):
        """A counting date changed on a stored plan is a date given by hand: the plan counts from it, no longer "last
        service unknown" (unless the box is unticked in the same change)."""
        cleaned = super().clean()
        if self.instance._state.adding:  # a new plan's box says it, ticked or not (``__init__``)
            return cleaned
        if "counting_from" in self.changed_data and "counting_from_given" not in self.changed_data:
            cleaned["counting_from_given"] = True
        return cleaned


@admin.register(ServicePlan)
class ServicePlanAdmin(ProtectedNamed, ChoicesNamedWithSite, RecomputesSite, SimpleHistoryAdmin):
    form = ServicePlanAdminForm
    list_display = ("name", "subsystem", "dust_sensitivity", "counting_from", "counting_from_given", "active")
    list_filter = ("subsystem__telescope__site", ("subsystem__telescope", TelescopeListFilter), "active")
    search_fields = ("name", "subsystem__name")
    inlines = [TriggerInline]
    site_path = "subsystem__telescope__site"

    def save_related(self, request, form, formsets, change):
        """Saved and recomputed (``RecomputesSite``); a plan that is counted but still has no due state (a mirror
        subsystem's plan waiting for its mirror record, a reading trigger waiting for a reading) is warned of, with
        why (``selectors.not_computed_reason``)."""
        super().save_related(request, form, formsets, change)
        plan = ServicePlan.objects.select_related("subsystem__telescope__site", "status").get(pk=form.instance.pk)
        reason = not_computed_reason(plan)
        if reason:
            self.message_user(request, f"{plan.name} is left out of the due list and the site's counts until it can be "
                              f"computed. {capfirst(reason)}.", messages.WARNING)


@admin.register(BookedRun)
class BookedRunAdmin(SimpleHistoryAdmin):
    list_display = ("title", "site", "starts_on", "ends_on", "blocked")
    list_filter = ("site",)

    def save_model(self, request, obj, form, change):
        """Saved as entered; a run falling on nights of a recoat already planned is warned of, naming the recoat and
        its work orders (the planner keeps only new recoats off booked nights: ``mirrors.services.runs_over_recoats``).
        """
        from observatory_ops.mirrors.services import runs_over_recoats  # mirrors builds on planning

        super().save_model(request, obj, form, change)
        over = [o for o in runs_over_recoats(obj.site, site_today(obj.site)) if o.run.pk == obj.pk]
        prefetch_related_objects([o.plan for o in over], "work_orders")
        for clash in over:
            self.message_user(request, clash.admin_text, messages.WARNING)


@admin.register(Closure)
class ClosureAdmin(ChoicesNamedWithSite, RecomputesSite, SimpleHistoryAdmin):
    """Nights a telescope or the whole site does not observe (a season shut, an overhaul): saved, changed or deleted,
    its site is recomputed, the forecasts expecting no use on its nights (``planning.models.Closure``)."""

    list_display = ("site", "whose", "first_night", "last_night", "reason")
    list_filter = ("site",)
    site_path = "site"

    @admin.display(description="Closes")
    def whose(self, obj: Closure) -> str:
        return obj.whose

    def save_model(self, request, obj, form, change):
        """Saved as entered; a booked run on its nights is warned of (a user review closed the site over a booked
        campaign unsaid): the recoat planner keeps a blocked run's nights blocked, closed or not."""
        super().save_model(request, obj, form, change)
        runs = BookedRun.objects.filter(site=obj.site, starts_on__lte=obj.last_night, ends_on__gte=obj.first_night)
        for run in runs:
            self.message_user(request, (
                f"The booked run {run.title} ({run.starts_on:%d %b %Y} to {run.ends_on:%d %b %Y}) falls on nights of "
                "this closure. Change the run or the closure: the recoat planner keeps the nights of a run booked as "
                "blocked blocked, closed or not."), messages.WARNING)
