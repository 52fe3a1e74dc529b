"""Work orders say whether the work is done at the telescope.

Stored recoat orders of the coating phase (away at a coating plant) are the recoat orders that carry the vacuum
plant: no phase at the telescope has it. They are marked as away, so the check for hazards their subsystem gained
since leaves them out as it did (they carry the coating's own hazards, not the mirror's).
"""
from django.db import migrations, models


def coating_orders_away(apps, schema_editor):
    WorkOrder = apps.get_model("workorders", "WorkOrder")
    for order in WorkOrder.objects.filter(recoat_plans__isnull=False).distinct():
        if "vacuum_plant" in order.hazards:
            order.at_telescope = False
            order.save(update_fields=["at_telescope"])


class Migration(migrations.Migration):

    dependencies = [
        ('workorders', '0006_isolation_point_help'),
        ('mirrors', '0005_recoat_plan_phase_dates'),  # RecoatPlan.work_orders, read by the data step
    ]

    operations = [
        migrations.AddField(
            model_name='historicalworkorder',
            name='at_telescope',
            field=models.BooleanField(default=True, help_text="False for work done away from the telescope (a mirror at a coating plant): the order carries the work's own hazards, not its subsystems'."),
        ),
        migrations.AddField(
            model_name='workorder',
            name='at_telescope',
            field=models.BooleanField(default=True, help_text="False for work done away from the telescope (a mirror at a coating plant): the order carries the work's own hazards, not its subsystems'."),
        ),
        migrations.RunPython(coating_orders_away, migrations.RunPython.noop),
    ]
