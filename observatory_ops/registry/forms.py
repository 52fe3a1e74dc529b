"""Form fields and list filters the register's admin pages share."""
from django import forms
from django.contrib import admin
from django.core.exceptions import ValidationError
from django.forms.models import BaseInlineFormSet

from observatory_ops.calc.windows import WEEKDAY_NAMES
from observatory_ops.registry.models import Site, Telescope
from observatory_ops.workorders.cautions import HAZARDS


class TelescopeChoiceField(forms.ModelChoiceField):
    """A choice of telescope among every site's, each named with its site (``Telescope.site_label``): two sites may
    each have an "MC-80 (0.8 m)"."""

    def __init__(self, queryset=None, **kwargs):
        super().__init__(queryset=(Telescope.objects if queryset is None else queryset).select_related("site"),
                         **kwargs)

    def label_from_instance(self, obj: Telescope) -> str:
        return obj.site_label


class TelescopesNamedWithSite:
    """An admin whose telescope field chooses among every site's telescopes, each named with its site."""

    def formfield_for_foreignkey(self, db_field, request, **kwargs):
        if db_field.name == "telescope":
            kwargs["form_class"] = TelescopeChoiceField
        return super().formfield_for_foreignkey(db_field, request, **kwargs)


class TelescopeListFilter(admin.RelatedFieldListFilter):
    """An admin list's filter by telescope, each named with its site, as ``TelescopeChoiceField`` names them."""

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
