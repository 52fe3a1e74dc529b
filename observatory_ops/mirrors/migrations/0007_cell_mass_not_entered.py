"""A mirror's cell mass has no default: empty is "not entered", and a lift of the mirror in its cell is not started
while it is (workorders.selectors.lift_refusal).

Stored mirrors: a cell mass of 0 becomes "not entered". 0 was the default, filled in for every mirror whose record
never had the field typed in, and a mirror lifted in its cell never has a cell of 0 kg; a 0 somebody meant (a mirror
lifted without its cell) cannot be told apart from it. The two mistakes are not alike: a 0 wrongly kept leaves the cell
out of the load the slings and the lifting table are chosen for, while a 0 wrongly cleared costs the engineer one field
typed again, which the refused start names with the link to the mirror's record. The audit trail records each change.
The backward step puts 0 back for every empty one, in the history too, since the column took no empty value before.
"""
import django.core.validators
from django.db import migrations, models
from django.utils import timezone

_HELP = (
    "Mass of the cell the mirror is lifted in, and anything else below the hook with it, in kg. Empty: not entered, so "
    "the lifting figures are the mirror alone and a lift of the mirror in its cell is not started. 0: the mirror is "
    "lifted without its cell."
)


def zero_to_not_entered(apps, schema_editor):
    Mirror = apps.get_model("mirrors", "Mirror")
    HistoricalMirror = apps.get_model("mirrors", "HistoricalMirror")
    fields = [field.attname for field in Mirror._meta.concrete_fields]
    for mirror in Mirror.objects.filter(cell_mass_kg=0):
        mirror.cell_mass_kg = None
        mirror.save(update_fields=["cell_mass_kg"])
        HistoricalMirror.objects.create(
            **{name: getattr(mirror, name) for name in fields}, history_date=timezone.now(), history_type="~",
            history_change_reason="cell mass 0 was the default: now not entered",
        )


def not_entered_to_zero(apps, schema_editor):
    """The old column takes no empty value, its history's included."""
    for model in ("Mirror", "HistoricalMirror"):
        apps.get_model("mirrors", model).objects.filter(cell_mass_kg__isnull=True).update(cell_mass_kg=0)


class Migration(migrations.Migration):

    dependencies = [
        ("mirrors", "0006_cleaning_work_order"),
    ]

    operations = [
        migrations.AlterField(
            model_name="historicalmirror",
            name="cell_mass_kg",
            field=models.FloatField(blank=True, help_text=_HELP, null=True,
                                    validators=[django.core.validators.MinValueValidator(0)]),
        ),
        migrations.AlterField(
            model_name="mirror",
            name="cell_mass_kg",
            field=models.FloatField(blank=True, help_text=_HELP, null=True,
                                    validators=[django.core.validators.MinValueValidator(0)]),
        ),
        migrations.RunPython(zero_to_not_entered, not_entered_to_zero),
    ]
