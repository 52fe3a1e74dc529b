import django_filters

from observatory_ops.calc.triggers import STATUSES
from observatory_ops.registry.catalogue import KIND_CHOICES
from observatory_ops.registry.models import Site, Telescope

from .models import PlanStatus


class DueFilter(django_filters.FilterSet):
    site = django_filters.ModelChoiceFilter(queryset=Site.objects.all(), field_name="site", label="Site")
    telescope = django_filters.ModelChoiceFilter(
        queryset=Telescope.objects.select_related("site"), field_name="plan__subsystem__telescope", label="Telescope"
    )
    kind = django_filters.ChoiceFilter(choices=KIND_CHOICES, field_name="plan__subsystem__kind", label="Kind")
    status = django_filters.ChoiceFilter(choices=[(s, s) for s in STATUSES], label="Status")

    class Meta:
        model = PlanStatus
        fields = ["site", "telescope", "kind", "status"]
