import django_filters
from django import forms
from django.forms.utils import flatatt
from django.utils.html import escape
from django.utils.safestring import mark_safe

from observatory_ops.calc.triggers import STATUSES
from observatory_ops.registry.catalogue import KIND_CHOICES
from observatory_ops.registry.forms import possible_id
from observatory_ops.registry.models import Site, Telescope

from .models import PlanStatus


class QuickSelect(forms.Select):
    """A select written by joining strings instead of one template per option: on a network the due-list
    filters list hundreds of sites and telescopes, and option templates were a third of the page's time."""

    def render(self, name, value, attrs=None, renderer=None):
        chosen = {str(value)} if value not in (None, "") else set()
        options = "".join(
            f'<option value="{escape(key)}"{" selected" if str(key) in chosen else ""}>{escape(label)}</option>'
            for key, label in self.choices
        )
        html = f'<select name="{escape(name)}"{flatatt(self.build_attrs(self.attrs, attrs))}>{options}</select>'
        # Every value and label is escaped above (bandit B308/B703 accepted for this line).
        return mark_safe(html)  # noqa: S308  # nosec B308 B703


class _TelescopeField(django_filters.fields.ModelChoiceField):
    def label_from_instance(self, obj: Telescope) -> str:
        return obj.site_label


class TelescopeFilter(django_filters.ModelChoiceFilter):
    """The telescopes of every site, each named with its site (``Telescope.site_label``): names repeat across sites."""

    field_class = _TelescopeField


class DueFilter(django_filters.FilterSet):
    site = django_filters.ModelChoiceFilter(
        queryset=Site.objects.all(), field_name="site", label="Site", widget=QuickSelect
    )
    telescope = TelescopeFilter(
        queryset=Telescope.objects.select_related("site"), field_name="plan__subsystem__telescope", label="Telescope",
        widget=QuickSelect,
    )
    kind = django_filters.ChoiceFilter(choices=KIND_CHOICES, field_name="plan__subsystem__kind", label="Kind")
    status = django_filters.ChoiceFilter(choices=[(s, s) for s in STATUSES], label="Status")

    class Meta:
        model = PlanStatus
        fields = ["site", "telescope", "kind", "status"]

    def __init__(self, data=None, *args, **kwargs):
        super().__init__(data, *args, **kwargs)
        # With a site chosen the telescope list is that site's: a telescope of another site is not applied (said so),
        # rather than leaving the list empty without a word. A site no id can be (a word, a number too large for the
        # id column) narrows nothing: the site filter refuses it, as it refuses an unknown site.
        site_id = possible_id(Site, (data or {}).get("site"))
        if site_id is not None:
            field = self.filters["telescope"]
            field.queryset = field.queryset.filter(site_id=site_id)
            self.form.fields["telescope"].queryset = field.queryset

    def unapplied(self) -> list[str]:
        """A sentence for each filter that cannot be applied (an unknown site, a status that does not exist, another
        site's telescope), naming what was asked for as the page names it."""
        said = []
        for field, problems in self.errors.items():
            value = self.data.get(field)
            label = self.form.fields[field].label
            telescope_id = possible_id(Telescope, value) if field == "telescope" else None
            other = (Telescope.objects.select_related("site").filter(pk=telescope_id).first()
                     if telescope_id is not None else None)
            site = self.form.cleaned_data.get("site")
            if other is not None and site is not None:
                said.append(f"{label} {other.site_label} not applied: it is not at {site.name}, the site chosen")
            else:
                said.append(f"{label} {value!r} not applied: {' '.join(problems)}")
        return said

    def chosen_site(self) -> Site | None:
        """The site the filters name: the site chosen, or the chosen telescope's; None for all sites. A filter that
        is not valid names none (the others still count)."""
        self.is_valid()  # cleans the form: ``cleaned_data`` then holds the fields that are valid
        telescope = self.form.cleaned_data.get("telescope")
        return self.form.cleaned_data.get("site") or (telescope.site if telescope else None)
