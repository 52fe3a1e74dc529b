"""A subsystem's hazards are recorded: at least one hazard, or an engineer's "no hazards found" (registry.models
.Subsystem.no_hazards_found). Stored subsystems with no hazards keep none and the box unticked, so their work orders
say that nobody has recorded them and are held until an engineer does.

Stored air-operated brakes (kind "brake") get the stored-mechanical hazard the catalogue now gives the kind: they are
applied by springs and released by air, so their springs stay loaded with the air vented. Only adding, as planning
migration 0008 gave stored subsystems what the catalogue had gained; the audit trail records the change. Work orders
made before keep their hazards, and say that they lack it (workorders.selectors.hazards_missing). The backward step
leaves the hazards as they are.
"""
from django.db import migrations, models
from django.utils import timezone

_KIND = "brake"
_ADDED = "stored_mechanical"
_AFTER = "pneumatic"  # its place in the caution library's order (workorders.cautions.HAZARDS), as written then


def air_brakes_carry_their_springs(apps, schema_editor):
    Subsystem = apps.get_model("registry", "Subsystem")
    HistoricalSubsystem = apps.get_model("registry", "HistoricalSubsystem")
    fields = [field.attname for field in Subsystem._meta.concrete_fields]
    for subsystem in Subsystem.objects.filter(kind=_KIND):
        hazards = list(subsystem.hazards or [])
        if _ADDED in hazards:
            continue
        at = hazards.index(_AFTER) + 1 if _AFTER in hazards else len(hazards)
        subsystem.hazards = [*hazards[:at], _ADDED, *hazards[at:]]
        subsystem.save(update_fields=["hazards"])
        HistoricalSubsystem.objects.create(
            **{name: getattr(subsystem, name) for name in fields}, history_date=timezone.now(), history_type="~",
            history_change_reason="air brake: springs hazard from the catalogue",
        )


class Migration(migrations.Migration):

    dependencies = [
        ('registry', '0011_site_elevation_and_look_ahead_bounds'),
    ]

    operations = [
        migrations.RunPython(air_brakes_carry_their_springs, migrations.RunPython.noop),
        migrations.AddField(
            model_name='historicalsubsystem',
            name='no_hazards_found',
            field=models.BooleanField(default=False, help_text='Tick only when an engineer has checked the work done on it and found none of the hazards above. A subsystem of a kind that brings no hazards of its own (Other) carries at least one hazard or this tick: without either, nobody has recorded its hazards, and its work orders are neither issued nor started.', verbose_name='no hazards found'),
        ),
        migrations.AddField(
            model_name='subsystem',
            name='no_hazards_found',
            field=models.BooleanField(default=False, help_text='Tick only when an engineer has checked the work done on it and found none of the hazards above. A subsystem of a kind that brings no hazards of its own (Other) carries at least one hazard or this tick: without either, nobody has recorded its hazards, and its work orders are neither issued nor started.', verbose_name='no hazards found'),
        ),
    ]
