"""Recoat plans keep each phase's first and last day.

Plans made before the crew's working days laid their phases end to end on calendar days, from the plan's
first day; their dates are filled in so, and phases of no days are dropped (they had no work order and no
dates). The backward step takes the dates off again.
"""
import datetime as dt

from django.db import migrations, models


def dates_in(apps, schema_editor):
    RecoatPlan = apps.get_model("mirrors", "RecoatPlan")
    for plan in RecoatPlan.objects.all():
        day, laid = plan.starts_on, []
        for phase in plan.phases:
            if "first" in phase:
                laid.append(phase)
                continue
            if phase["days"] > 0:
                last = day + dt.timedelta(days=phase["days"] - 1)
                laid.append({**phase, "first": day.isoformat(), "last": last.isoformat()})
            day += dt.timedelta(days=phase["days"])
        plan.phases = laid
        plan.save(update_fields=["phases"])


def dates_out(apps, schema_editor):
    RecoatPlan = apps.get_model("mirrors", "RecoatPlan")
    for plan in RecoatPlan.objects.all():
        plan.phases = [{"name": p["name"], "days": p["days"]} for p in plan.phases]
        plan.save(update_fields=["phases"])


class Migration(migrations.Migration):

    dependencies = [
        ('mirrors', '0004_measurement_reading'),
    ]

    operations = [
        migrations.AlterField(
            model_name='historicalrecoatplan',
            name='phases',
            field=models.JSONField(help_text='The phases that take days, in order: [{"name": ..., "days": ..., "first": ISO date, "last": ISO date}] (a phase at the telescope may pause over the crew\'s days off, so its last day is stored, not counted).'),
        ),
        migrations.AlterField(
            model_name='recoatplan',
            name='phases',
            field=models.JSONField(help_text='The phases that take days, in order: [{"name": ..., "days": ..., "first": ISO date, "last": ISO date}] (a phase at the telescope may pause over the crew\'s days off, so its last day is stored, not counted).'),
        ),
        migrations.RunPython(dates_in, dates_out),
    ]
