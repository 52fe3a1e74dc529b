from django import forms

from observatory_ops.registry.models import Site

from .models import ApiToken


class ApiTokenCreateForm(forms.Form):
    site = forms.ModelChoiceField(Site.objects.order_by("name"), help_text="The token works for this site only.")
    name = forms.CharField(
        max_length=100, help_text="What uses it, e.g. the control computer of the east dome, or the workshop calendar."
    )
    purpose = forms.ChoiceField(
        choices=ApiToken.Purpose.choices, initial=ApiToken.Purpose.CONTROL, widget=forms.RadioSelect,
        help_text="A calendar token is given as a link to subscribe to; it cannot send nights or read the due list.",
    )
