"""Form fields, list filters and admin mixins the admin pages share."""
from operator import attrgetter
from typing import NamedTuple

from django import forms
from django.contrib import admin
from django.contrib.admin.views.autocomplete import AutocompleteJsonView
from django.core.exceptions import ValidationError
from django.db import connection
from django.db.models import QuerySet
from django.forms.models import BaseInlineFormSet

from observatory_ops.calc.windows import WEEKDAY_NAMES
from observatory_ops.registry.models import EARLIEST_IN_SERVICE, Site, Subsystem, Telescope
from observatory_ops.workorders.cautions import HAZARDS


class AcrossSites(NamedTuple):
    """How a choice among every site's records of one model names and lists them."""

    site: str  # the way from the record to its site
    order: tuple[str, ...]  # the order a choice lists them in: by site, then as the labels read
    owner: str = ""  # the record named before this one, where its own name does not say it (a plan's subsystem)


#: The records a choice may list from every site, by model: a telescope, what is on one (a subsystem, a mirror), and a
#: subsystem's service plans. Their names repeat across sites ("MC-80 (0.8 m)", one plan name for every brake), and a
#: subsystem or a mirror names its telescope but not its site ("MC-80: Primary mirror"), a plan not even its subsystem.
ACROSS_SITES = {
    "registry.telescope": AcrossSites("site", ("site__name", "name")),
    "registry.subsystem": AcrossSites("telescope__site", ("telescope__site__name", "telescope__name", "name")),
    "mirrors.mirror": AcrossSites(
        "subsystem__telescope__site",
        ("subsystem__telescope__site__name", "subsystem__telescope__name", "subsystem__name"),
    ),
    "planning.serviceplan": AcrossSites(
        "subsystem__telescope__site",
        ("subsystem__telescope__site__name", "subsystem__telescope__name", "subsystem__name", "name"),
        owner="subsystem",
    ),
}


def named_with_site(record) -> str:
    """A record of ``ACROSS_SITES`` named after its site, as ``Telescope.site_label`` names a telescope: "Vestal Ridge:
    MC-80 (0.8 m)", "Vestal Ridge: MC-80: Primary mirror", "Vestal Ridge: MC-80: Axis 1 brake: Check brake pads"."""
    across = ACROSS_SITES[record._meta.label_lower]
    site = attrgetter(across.site.replace("__", "."))(record)
    owner = f"{attrgetter(across.owner)(record)}: " if across.owner else ""
    return f"{site.name}: {owner}{record}"


def listed_with_sites(queryset: QuerySet) -> QuerySet:
    """``queryset`` (of an ``ACROSS_SITES`` model) in its order by site, each record's site fetched with it (and the
    telescope and subsystem on the way): ``named_with_site`` then names them all from one query."""
    across = ACROSS_SITES[queryset.model._meta.label_lower]
    return queryset.select_related(across.site).order_by(*across.order)


class NamedWithSiteChoiceField(forms.ModelChoiceField):
    """A choice among every site's telescopes, subsystems, mirrors or plans (``ACROSS_SITES``), each named after its
    site (``named_with_site``). Whatever queryset it is given, it lists it by site and fetches each record's site with
    it: one query."""

    def _set_queryset(self, queryset):
        super()._set_queryset(None if queryset is None else listed_with_sites(queryset))

    queryset = property(forms.ModelChoiceField._get_queryset, _set_queryset)

    def label_from_instance(self, obj) -> str:
        return named_with_site(obj)


class NamedWithSiteAutocomplete(AutocompleteJsonView):
    """The admin's search behind a choice typed into (``autocomplete_fields``: an isolation point's subsystem, among
    thousands) names each record of ``ACROSS_SITES`` as the choice, once saved, names it (``NamedWithSiteChoiceField``):
    "Vestal Ridge: T70: Dome", where Django gives the record's own name, "T70: Dome", the same at every site. The
    project's admin site answers with it (``observatory_ops.admin_site``)."""

    def get_queryset(self):
        # Typed as the pages write a record ("R40: Axis 1 brake"), each word is searched without its colon: "R40:"
        # matched no telescope's name, so the search found nothing (a walk-through).
        self.term = self.term.replace(":", " ")
        queryset = super().get_queryset()
        return listed_with_sites(queryset) if queryset.model._meta.label_lower in ACROSS_SITES else queryset

    def serialize_result(self, obj, to_field_name):
        result = super().serialize_result(obj, to_field_name)
        return {**result, "text": named_with_site(obj)} if obj._meta.label_lower in ACROSS_SITES else result


class ChoicesNamedWithSite:
    """An admin whose choices of a telescope, a subsystem, a mirror or a plan (any foreign key to one:
    ``ACROSS_SITES``) list every site's, each named with its site (``NamedWithSiteChoiceField``)."""

    def formfield_for_foreignkey(self, db_field, request, **kwargs):
        if db_field.related_model._meta.label_lower in ACROSS_SITES:
            kwargs["form_class"] = NamedWithSiteChoiceField
        return super().formfield_for_foreignkey(db_field, request, **kwargs)


class ChoicesOfItsSite(BaseInlineFormSet):
    """The rows of a stored record of one site (a work order's items and readings) offer that site's telescopes,
    subsystems, mirrors and plans, still named with it, where ``ChoicesNamedWithSite`` lists every site's: a network
    of 100 sites would otherwise list thousands in every row's choice. A new record's rows offer every site's, as its
    own site is not chosen yet. A row given another site's all the same (a page loaded before the record moved, a post
    made by hand) is refused, saying which site's to choose."""

    def add_fields(self, form, index):
        super().add_fields(form, index)
        if self.instance.pk is None:
            return
        elsewhere = f"Choose one at {self.instance.site}, the site of this {self.instance._meta.verbose_name}."
        for field in form.fields.values():
            if isinstance(field, NamedWithSiteChoiceField):
                site = ACROSS_SITES[field.queryset.model._meta.label_lower].site
                field.queryset = field.queryset.filter(**{site: self.instance.site_id})
                field.error_messages = {**field.error_messages, "invalid_choice": elsewhere}


class ProtectedNamed:
    """An admin whose deletion (from the record's own page or the list's "delete selected") that other records stop,
    by a protected key (a telescope's subsystems, a plan's service records, a site's nights), names those records on
    Django's page, as for any protected record. Django also counts them among the records it would delete, and where
    their own admin deletes nothing (subsystems are retired, the log is never deleted) said only that the account
    may not delete them: a refusal that read as a missing permission, when nothing would have been deleted."""

    def get_deleted_objects(self, objs, request):
        deleted, counts, permissions, protected = super().get_deleted_objects(objs, request)
        return deleted, counts, set() if protected else permissions, protected


class TelescopeListFilter(admin.RelatedFieldListFilter):
    """An admin list's filter by telescope, each named with its site, as ``NamedWithSiteChoiceField`` names them."""

    def field_choices(self, field, request, model_admin):
        return [(telescope.pk, telescope.site_label) for telescope in Telescope.objects.select_related("site")]


class HazardsField(forms.TypedMultipleChoiceField):
    """The hazard tags of a subsystem or a plan as labelled tick boxes (stored as a list of codes), where the
    admin would show a raw JSON list: the tags choose the cautions a work order prints."""

    def __init__(self, **kwargs):
        kwargs.setdefault("help_text", "They choose the safety cautions on this item's work orders.")
        super().__init__(
            choices=list(HAZARDS.items()), widget=forms.CheckboxSelectMultiple, required=False, **kwargs
        )


class SubsystemAdminForm(forms.ModelForm):
    hazards = HazardsField(help_text="They choose the safety cautions on its work orders. A new subsystem always "
                           "gets its kind's own as well as those ticked.")
    registered_on_wrong_telescope = forms.BooleanField(
        required=False, label="It was registered on the wrong telescope",
        help_text="Tick only to move a subsystem with records to the telescope it has always been on, at the same "
        "site: its records then count that telescope's nights from the start. A part moved from one telescope to "
        "another is registered there as a new subsystem, and this one retired.",
    )

    def clean(self):
        cleaned = super().clean()
        # Read by the model's clean (``Subsystem._clean_telescope_kept``), which the form calls after this one.
        self.instance.registered_on_wrong_telescope = bool(cleaned.get("registered_on_wrong_telescope"))
        # A retire day set or moved here is held to the subsystem page's rules (a diff review moved one back past
        # service logged since, which the page refuses): one check for both (``services.retire_day_problem``).
        on, telescope = cleaned.get("retired_on"), cleaned.get("telescope")
        if on and telescope and self.instance.pk and "retired_on" in self.changed_data:
            from observatory_ops.planning.services import site_today  # planning's models import the register's

            from .services import retire_day_problem  # the services build on these forms' models

            if not EARLIEST_IN_SERVICE <= on <= site_today(telescope.site):
                return cleaned  # the model's own date rules say it (``Subsystem._clean_retired_on``)

            unit = Subsystem.objects.get(pk=self.instance.pk)
            if problem := retire_day_problem(unit, on):
                self.add_error("retired_on", f"{problem[:1].upper()}{problem[1:]}.")
        return cleaned


class CrewWeekdaysField(forms.MultipleChoiceField):
    """The crew's working days as seven tick boxes, where the admin would show the stored ISO weekday digits
    ("12345" is Monday to Friday); cleaned back to those digits, in weekday order."""

    def __init__(self, **kwargs):
        super().__init__(
            choices=[(str(number), name) for number, name in enumerate(WEEKDAY_NAMES, start=1)],
            widget=forms.CheckboxSelectMultiple,
            error_messages={"required": "Crew weekdays: tick at least one day the crew works.",
                            "invalid_choice": "Crew weekdays: %(value)s is not a weekday (1 Monday to 7 Sunday)."},
            **kwargs,
        )

    def prepare_value(self, value):
        return list(value) if isinstance(value, str) else value

    def clean(self, value) -> str:
        return "".join(sorted(super().clean(value)))


class SiteAdminForm(forms.ModelForm):
    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        if "digest_to" in self.fields:  # the people the digest can go to: engineers and above, still active
            from observatory_ops.access.roles import ENGINEER, holders_of

            self.fields["digest_to"].queryset = holders_of(ENGINEER).order_by("first_name", "last_name", "username")

    crew_weekdays = CrewWeekdaysField(
        # A declared field takes no initial value from the model: a new site starts with the model's default.
        initial=list(Site._meta.get_field("crew_weekdays").default),
        help_text="The days the maintenance crew works. The recoat planner starts the phases at the telescope "
        "(removal, reinstall, realignment) on these days and pauses them over the others; the telescope stays down "
        "meanwhile, so those nights count in a window's cost."
    )


class CrewDaysOffFormSet(BaseInlineFormSet):
    """The site's crew days off as rows: a date given on two rows is refused naming it (the model's own check,
    ``CrewDayOff.clean``, sees only dates already stored)."""

    def clean(self) -> None:
        dates = [form.cleaned_data["date"] for form in self.forms
                 if form.cleaned_data.get("date") and not self._should_delete_form(form)]
        twice = sorted({day for day in dates if dates.count(day) > 1})
        if twice:
            raise ValidationError(
                f"Crew days off: {', '.join(f'{day:%a %d %b %Y}' for day in twice)} given on more than one row: "
                "give each date once."
            )
        super().clean()


def possible_id(model, value) -> int | None:
    """``value`` as the id of a row of ``model``: a whole number in ASCII digits that the model's id column can hold;
    None for anything else. A number beyond the column (99999999999999999999999, typed or sent by hand) is no row, as
    an unknown id is none, but a query naming it fails (SQLite: OverflowError), so it is answered before any query as
    an unknown id is answered after one."""
    text = str(value)
    low, high = connection.ops.integer_field_range(model._meta.pk.get_internal_type())
    if not (text.isascii() and text.isdigit()) or len(text) > len(str(high)):
        return None
    number = int(text)
    return number if low <= number <= high else None


class RetireForm(forms.Form):
    """The subsystem page's retire form: why, and the day it came out of service (empty: the site's today); the day's
    rules are the service's (``services.retire_day_problem``)."""

    reason = forms.CharField(max_length=90, error_messages={"required": "say why the subsystem is retired"})
    retired_on = forms.DateField(required=False, error_messages={
        "invalid": "the day it came out of service: enter a date, such as 2026-06-15"})
