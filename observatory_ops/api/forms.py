from django import forms

from observatory_ops.registry.models import Site


class ApiTokenCreateForm(forms.Form):
    site = forms.ModelChoiceField(Site.objects.order_by("name"), help_text="The token reads and writes this site only.")
    name = forms.CharField(max_length=100, help_text="What uses it, e.g. the control computer of the east dome.")
