"""Orders not yet started whose lifting figures carry the 0 kg cell their mirror had by default now carry "not entered",
as the mirror does (mirrors.0007): their figures take the cell mass from the mirror's record once it is entered there,
and the work is not started before (workorders.selectors.lift_refusal).

Only a draft or issued order whose stored cell / fixture mass is 0 and that covers a mirror whose 0 was just cleared:
its 0 is the copy of that default (the lift page also offered 0 until it was typed over). A recoat's strip-and-coat
order keeps its 0: the mirror is lifted out of its cell there, so 0 is meant. Orders underway, finished, countersigned
or withdrawn keep their record as it was. The audit trail records each change; the backward step leaves the orders as
they are (mirrors.0007's backward step makes an empty cell mass 0 again, which is what their figures then show).
"""
from django.db import migrations
from django.utils import timezone


def zero_cell_to_not_entered(apps, schema_editor):
    WorkOrder = apps.get_model("workorders", "WorkOrder")
    HistoricalWorkOrder = apps.get_model("workorders", "HistoricalWorkOrder")
    Mirror = apps.get_model("mirrors", "Mirror")
    cleared = Mirror.objects.filter(cell_mass_kg__isnull=True).values("subsystem_id")
    fields = [field.attname for field in WorkOrder._meta.concrete_fields]
    orders = (
        WorkOrder.objects.filter(state__in=("draft", "issued"), items__subsystem_id__in=cleared)
        .exclude(recoat_phase="coating").distinct()
    )
    for order in orders:
        inputs = order.lift_inputs
        if not isinstance(inputs, dict) or inputs.get("fixture_kg") != 0:
            continue
        order.lift_inputs = {**inputs, "fixture_kg": None}
        order.save(update_fields=["lift_inputs"])
        HistoricalWorkOrder.objects.create(
            **{name: getattr(order, name) for name in fields}, history_date=timezone.now(), history_type="~",
            history_change_reason="cell mass 0 was the mirror's default: now not entered",
        )


class Migration(migrations.Migration):

    dependencies = [
        ("mirrors", "0007_cell_mass_not_entered"),
        ("workorders", "0013_stopping_part_way_note"),
    ]

    operations = [migrations.RunPython(zero_cell_to_not_entered, migrations.RunPython.noop)]
