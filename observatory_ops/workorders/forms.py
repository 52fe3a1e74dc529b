from django import forms
from django.contrib.auth import get_user_model

from observatory_ops.calc.lifting import DENSITY
from observatory_ops.registry.models import Subsystem

from .models import Part, WorkOrder


class WorkOrderEditForm(forms.ModelForm):
    class Meta:
        model = WorkOrder
        fields = ["title", "order_type", "priority", "planned_date", "assignee", "estimated_hours", "steps", "tools"]
        widgets = {"planned_date": forms.DateInput(attrs={"type": "date"})}

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.fields["assignee"].queryset = get_user_model().objects.filter(is_active=True).order_by("username")


class AdHocForm(forms.Form):
    title = forms.CharField(max_length=200)
    order_type = forms.ChoiceField(choices=WorkOrder.Type.choices, initial=WorkOrder.Type.CORRECTIVE)
    subsystems = forms.ModelMultipleChoiceField(queryset=Subsystem.objects.none())
    steps = forms.CharField(widget=forms.Textarea, required=False, help_text="One step per line.")

    def __init__(self, *args, site, **kwargs):
        super().__init__(*args, **kwargs)
        self.fields["subsystems"].queryset = Subsystem.objects.in_service().filter(telescope__site=site)


class FinishForm(forms.Form):
    actual_hours = forms.FloatField(min_value=0, max_value=1000)
    findings = forms.CharField(widget=forms.Textarea, required=False, max_length=20000)

    def __init__(self, *args, order, **kwargs):
        super().__init__(*args, **kwargs)
        for r in order.required_readings.select_related("subsystem"):
            self.fields[f"reading_{r.pk}"] = forms.FloatField(
                label=f"{r.quantity_label} on {r.subsystem.name} ({r.unit})",
                help_text=f"limit: {r.limit_text}" if r.limit_text else "", required=True,
            )
        for use in order.part_uses.select_related("part"):
            self.fields[f"part_{use.pk}"] = forms.FloatField(
                label=f"{use.part.name} used ({use.part.unit})", min_value=0, initial=use.quantity_planned
            )

    def readings(self) -> dict[int, float]:
        return {int(k[8:]): v for k, v in self.cleaned_data.items() if k.startswith("reading_")}

    def parts(self) -> dict[int, float]:
        return {int(k[5:]): v for k, v in self.cleaned_data.items() if k.startswith("part_")}


class PartAddForm(forms.Form):
    part = forms.ModelChoiceField(queryset=Part.objects.none())
    quantity = forms.FloatField(min_value=0.001, initial=1)

    def __init__(self, *args, site, **kwargs):
        super().__init__(*args, **kwargs)
        self.fields["part"].queryset = Part.objects.filter(site=site)


class LiftForm(forms.Form):
    diameter_mm = forms.FloatField(label="Mirror diameter (mm)")
    thickness_mm = forms.FloatField(label="Edge thickness (mm)")
    hole_mm = forms.FloatField(label="Central hole (mm)", initial=0)
    material = forms.ChoiceField(choices=[(k, k.replace("_", " ")) for k in DENSITY])
    lightweighting_fraction = forms.FloatField(initial=0, help_text="Fraction of the solid blank removed, 0 to <1.")
    fixture_kg = forms.FloatField(label="Cell / fixture mass (kg)", initial=0)
    legs = forms.IntegerField(label="Sling legs rigged", initial=2)
    angle_deg = forms.FloatField(label="Leg angle from horizontal (deg)", initial=60)
    wll_kg = forms.FloatField(label="Working load limit per leg (kg)", required=False)


class WithdrawForm(forms.Form):
    reason = forms.CharField(max_length=200)
