# Gives subsystems and plans stored before this version what the catalogue has added since, only adding,
# never removing: each subsystem gets any hazard of its kind it lacks (so its work orders print the cautions
# a new installation's would, e.g. a telescope that can move for the fans in the mirror cell), and each plan
# that is still one of its kind's catalogue plans (same name) gets any reading row of that plan it lacks
# (e.g. the encoder's read-head signal level). Runs once; a database with no such records is left alone.
from django.db import migrations


def add_catalogue_hazards_and_readings(apps, schema_editor):
    from observatory_ops.registry.catalogue import KINDS
    from observatory_ops.workorders.cautions import HAZARDS

    Subsystem = apps.get_model("registry", "Subsystem")
    ServicePlan = apps.get_model("planning", "ServicePlan")
    for subsystem in Subsystem.objects.all():
        kind = KINDS.get(subsystem.kind)
        if kind is None:
            continue
        hazards = set(subsystem.hazards) | set(kind.hazards)
        if hazards != set(subsystem.hazards):
            subsystem.hazards = [h for h in HAZARDS if h in hazards]
            subsystem.save(update_fields=["hazards"])
        templates = {t.name: t for t in kind.plans}
        for plan in ServicePlan.objects.filter(subsystem=subsystem, name__in=list(templates)):
            have = {entry.get("quantity") for entry in plan.readings}
            missing = [
                {"quantity": quantity, "limit": limit}
                for quantity, limit in templates[plan.name].readings if quantity not in have
            ]
            if missing:
                plan.readings = [*plan.readings, *missing]
                plan.save(update_fields=["readings"])


class Migration(migrations.Migration):
    dependencies = [
        ("planning", "0007_plan_step_groups"),
        ("registry", "0004_site_digest_sent_on"),
    ]

    operations = [migrations.RunPython(add_catalogue_hazards_and_readings, migrations.RunPython.noop)]
