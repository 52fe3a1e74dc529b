"""Corrections logged before they carried their record's work order get it now (logbook.services.service_record_correct):
their hours return to the order type's column of the reliability page, and the order shows its hours as corrected."""

from django.db import migrations


def carry_work_order(apps, schema_editor):
    ServiceRecord = apps.get_model("logbook", "ServiceRecord")
    # A correction may correct a correction: follow each chain from its first record, in the order they were written.
    for record in ServiceRecord.objects.filter(corrects__isnull=False, work_order__isnull=True).order_by("pk"):
        first = record
        while first.corrects_id is not None:
            first = ServiceRecord.objects.get(pk=first.corrects_id)
        if first.work_order_id is not None:
            ServiceRecord.objects.filter(pk=record.pk).update(work_order_id=first.work_order_id)


class Migration(migrations.Migration):
    dependencies = [("logbook", "0011_reading_withdrawn")]

    operations = [migrations.RunPython(carry_work_order, migrations.RunPython.noop)]
