"""Form fields the register's admin pages share."""
from django import forms

from observatory_ops.workorders.cautions import HAZARDS


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
